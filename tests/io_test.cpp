// Output and parsing primitives of io: where an output goes (regular file,
// symlink, FIFO, device node), what is left behind on failure, number and
// UTF-8 parsing, JSON errors with positions. Device nodes and FIFOs are made
// inside the test's temporary folder, never on the machine's /dev.
#include <catch2/catch.hpp>
#include <fcntl.h>
#include <sys/stat.h>
#include <sys/sysmacros.h>
#include <sys/wait.h>
#include <unistd.h>

#include <bit>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <dirent.h>
#include <sstream>
#include <thread>
#include <vector>

#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/stats.hpp"
#include "test_util.hpp"

using namespace heft;

namespace {

bool is_char_device(const std::string& p) {
  struct stat st {};
  return ::lstat(p.c_str(), &st) == 0 && S_ISCHR(st.st_mode);
}

}  // namespace

TEST_CASE("io: a regular output appears whole, keeps its mode, and leaves no temporary", "[io]") {
  const std::string d = test::fresh_dir("io_regular"), p = d + "/out.csv";
  {
    AtomicOutput out(p);
    out.write("a,b\n");
    CHECK(test::listing(d).size() == 1);  // only the temporary, not the target
    CHECK_FALSE(test::file_exists(p));
    out.commit();
  }
  CHECK(test::listing(d) == std::vector<std::string>{"out.csv"});
  CHECK(test::read_text(p) == "a,b\n");
  // Replacing an existing file keeps its permissions (mkstemp makes 0600).
  ::chmod(p.c_str(), 0640);
  write_file_atomic(p, "c\n");
  struct stat st {};
  REQUIRE(::stat(p.c_str(), &st) == 0);
  CHECK((st.st_mode & 07777) == 0640);
  // Destroyed without commit: the old content stays and nothing else remains.
  {
    AtomicOutput out(p);
    out.write("partial");
  }
  CHECK(test::read_text(p) == "c\n");
  CHECK(test::listing(d) == std::vector<std::string>{"out.csv"});
}

TEST_CASE("io: a large output written in pieces, its writeback started on the way, is whole", "[io]") {
  // AtomicOutput starts the disk's writeback every 8 MiB (sync_file_range)
  // before commit's fsync: 20 MiB in uneven pieces must arrive byte for
  // byte, and an uncommitted one must still leave nothing (no outside
  // source).
  const std::string d = test::fresh_dir("io_large"), p = d + "/big.txt";
  std::string expect;
  {
    AtomicOutput out(p);
    for (int k = 0; expect.size() < (std::size_t{20} << 20); ++k) {
      const std::string piece(1000 + 37 * (k % 101), static_cast<char>('a' + k % 26));
      out.write(piece);
      expect += piece;
    }
    out.commit();
  }
  CHECK(test::read_text(p) == expect);
  {
    AtomicOutput out(p + ".2");
    out.write(expect);
  }
  CHECK(test::listing(d) == std::vector<std::string>{"big.txt"});
}

TEST_CASE("io: a symlink output keeps the link and replaces its target", "[io]") {
  const std::string d = test::fresh_dir("io_link");
  test::write_text(d + "/real.csv", "old\n");
  REQUIRE(::symlink("real.csv", (d + "/link.csv").c_str()) == 0);
  write_file_atomic(d + "/link.csv", "new\n");
  struct stat st {};
  REQUIRE(::lstat((d + "/link.csv").c_str(), &st) == 0);
  CHECK(S_ISLNK(st.st_mode));
  CHECK(test::read_text(d + "/real.csv") == "new\n");
  CHECK(resolve_output(d + "/link.csv").identity == resolve_output(d + "/real.csv").identity);
  // A dangling link creates its target.
  REQUIRE(::symlink("made.csv", (d + "/dangling.csv").c_str()) == 0);
  write_file_atomic(d + "/dangling.csv", "x\n");
  CHECK(test::read_text(d + "/made.csv") == "x\n");
  // A loop is refused with a reason.
  REQUIRE(::symlink("loop_b", (d + "/loop_a").c_str()) == 0);
  REQUIRE(::symlink("loop_a", (d + "/loop_b").c_str()) == 0);
  CHECK_THROWS_WITH(AtomicOutput(d + "/loop_a"), Catch::Contains("too many levels of symbolic links"));
  CHECK_THROWS_WITH(AtomicOutput(d), Catch::Contains("is a directory"));
  CHECK_THROWS_WITH(AtomicOutput(d + "/no/such/dir/x.csv"), Catch::Contains("cannot"));
}

TEST_CASE("io: a FIFO output is written in place, not replaced", "[io]") {
  const std::string d = test::fresh_dir("io_fifo"), fifo = d + "/pipe";
  REQUIRE(::mkfifo(fifo.c_str(), 0600) == 0);
  CHECK(resolve_output(fifo).kind == OutputTarget::Kind::kDirect);
  std::string got;
  std::thread reader([&] { got = test::read_text(fifo); });
  write_file_atomic(fifo, "through the pipe\n");
  reader.join();
  CHECK(got == "through the pipe\n");
  struct stat st {};
  REQUIRE(::lstat(fifo.c_str(), &st) == 0);
  CHECK(S_ISFIFO(st.st_mode));
  CHECK(test::listing(d) == std::vector<std::string>{"pipe"});
}

TEST_CASE("io: device nodes (made in a temporary folder) stay devices, write errors are reported", "[io]") {
  if (::geteuid() != 0) {
    WARN("not root: device-node checks skipped (mknod needs root)");
    return;
  }
  const std::string d = test::fresh_dir("io_dev"), null_node = d + "/null", full_node = d + "/full";
  // Linux device numbers: 1,3 is the null device, 1,7 the always-full device.
  REQUIRE(::mknod(null_node.c_str(), S_IFCHR | 0666, makedev(1, 3)) == 0);
  REQUIRE(::mknod(full_node.c_str(), S_IFCHR | 0666, makedev(1, 7)) == 0);
  write_file_atomic(null_node, "discarded\n");
  CHECK(is_char_device(null_node));
  CHECK(resolve_output(null_node).identity.empty());  // two outputs may share a device
  CHECK_THROWS_WITH(write_file_atomic(full_node, std::string(1 << 16, 'x')),
                    Catch::Contains(full_node) && Catch::Contains("No space left on device"));
  CHECK(is_char_device(full_node));
  CHECK(test::listing(d) == (std::vector<std::string>{"full", "null"}));
}

TEST_CASE("io: a temporary output is removed when the process is terminated by a signal", "[io]") {
  const std::string d = test::fresh_dir("io_signal");
  const pid_t pid = ::fork();
  REQUIRE(pid >= 0);
  if (pid == 0) {
    remove_outputs_on_signals();
    AtomicOutput out(d + "/never.csv");
    out.write("half");
    ::raise(SIGTERM);
    std::_Exit(0);  // not reached
  }
  int status = 0;
  REQUIRE(::waitpid(pid, &status, 0) == pid);
  CHECK(WIFSIGNALED(status));
  CHECK(WTERMSIG(status) == SIGTERM);
  CHECK(test::listing(d).empty());
}

TEST_CASE("io: parse_double takes whole fields only, also out of range", "[io]") {
  double v = 1.0;
  CHECK_FALSE(parse_double("1e-400junk", v));  // range error does not skip the end check
  CHECK_FALSE(parse_double("1e400x", v));
  REQUIRE(parse_double("1e-400", v));
  CHECK(v == 0.0);
  REQUIRE(parse_double("-1e400", v));
  CHECK(std::isinf(v));
  CHECK(v < 0);
  REQUIRE(parse_double("+2.5", v));
  CHECK(v == 2.5);
  CHECK_FALSE(parse_double("", v));
  CHECK_FALSE(parse_double("2.5 ", v));
}

TEST_CASE("io: parse_double reads what strtod reads", "[io]") {
  // Reference: glibc's strtod, which rounds correctly (ISO C 7.22.1.3 with
  // Annex F, IEEE 754 round to nearest). parse_double is fast_float, with
  // digit steps of its own for plain decimals.
  std::uint64_t state = 271828;  // splitmix64
  auto next = [&state] {
    std::uint64_t z = (state += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
  };
  std::vector<std::string> texts = {"0", "-0", "0.0", "1", "-1.5", "1e5", "1E5", "2.5e-3", ".5", "5.", "007.25",
                                    "4.9406564584124654e-324", "2.4703282292062327e-324",  // halfway to the
                                    "2.4703282292062328e-324", "1.7976931348623158e308",   // smallest subnormal;
                                    "9007199254740993", "9007199254740993.0000000001",     // ties to even
                                    "0.1000000000000000055511151231257827021181583404541015625",
                                    "123456789012345678901234567890"};
  char buf[64];
  for (int i = 0; i < 300000; ++i) {
    const std::uint64_t r = next();
    // every digit count to 25, mantissas to 19 digits, exponents -340..340
    const int digits = 1 + static_cast<int>(r % 25), point = static_cast<int>((r >> 8) % (digits + 1));
    std::string t = (r >> 16) & 1 ? "-" : "";
    for (int d = 0; d < digits; ++d) {
      if (d == point && d > 0) t += '.';
      t += static_cast<char>('0' + next() % 10);
    }
    if ((r >> 17) & 1) t += "e" + std::to_string(static_cast<int>((r >> 20) % 681) - 340);
    texts.push_back(t);
    const double bits = std::bit_cast<double>(next());  // %.17g and %.15g of any finite double
    if (!std::isfinite(bits)) continue;
    std::snprintf(buf, sizeof buf, "%.17g", bits);
    texts.emplace_back(buf);
    std::snprintf(buf, sizeof buf, "%.15g", bits);
    texts.emplace_back(buf);
    // the shortest round trip of a value of a star table's size, as heft
    // and most catalogue extracts write them: plain decimals, read by
    // parse_double's own digit steps
    const double scaled = std::ldexp(static_cast<double>(r >> 11) / 9007199254740992.0, static_cast<int>(r % 40) - 30);
    texts.emplace_back(buf, std::to_chars(buf, buf + sizeof buf, (r >> 18) & 1 ? -scaled : scaled).ptr);
  }
  // every split of up to 21 digits into integer and fraction parts
  for (int whole = 1; whole <= 21; ++whole)
    for (int fraction = 0; whole + fraction <= 21; ++fraction)
      for (int k = 0; k < 40; ++k) {
        std::string t = k % 2 ? "-" : "";
        for (int d = 0; d < whole + fraction; ++d) {
          if (d == whole) t += '.';
          t += static_cast<char>('0' + (d == 0 && k % 4 < 2 ? 0 : next() % 10));
        }
        texts.push_back(t);
      }
  long differ = 0;
  for (const auto& t : texts) {
    double got = 0.0;
    const double ref = std::strtod(t.c_str(), nullptr);
    if (!parse_double(t, got) || std::bit_cast<std::uint64_t>(got) != std::bit_cast<std::uint64_t>(ref)) {
      if (++differ <= 5) UNSCOPED_INFO(t + " read as " + std::to_string(got));
    }
  }
  CHECK(texts.size() > 1000000);
  CHECK(differ == 0);
  double v = 0.0;
  REQUIRE(parse_double("nan", v));  // the caller reports these as non-finite
  CHECK(std::isnan(v));
  REQUIRE(parse_double("-inf", v));
  CHECK((std::isinf(v) && v < 0));
  CHECK_FALSE(parse_double("0x1p3", v));  // no hexadecimal
  CHECK_FALSE(parse_double("1,5", v));
  CHECK_FALSE(parse_double("--1", v));
  // a character that is not a digit among a fraction's last seven digits,
  // or in an eight-digit step
  for (const char* t : {"1234.567x", "-12.34567e", "0.1234567-", "1.2345678.", "1.23456789012x4", "12.3.45678",
                        "123456.7 ", "1.2/", "0.12345678901234567:"})
    CHECK_FALSE(parse_double(t, v));
}

TEST_CASE("io: append_double writes what std::to_chars writes, and it reads back", "[io]") {
  // Reference: libstdc++'s std::to_chars (C++17 [charconv.to.chars], the
  // shortest round trip, fixed or scientific by length). append_double
  // takes Dragonbox's digits and lays them out itself.
  std::vector<double> values = {0.0, -0.0, 5e-324, -5e-324, 2.2250738585072014e-308, 1.7976931348623157e308,
                                9007199254740992.0, 9007199254740993.0, 1e22, 1e23, 123456789012345680000.0,
                                0.1, 0.3, 1.0 / 3.0, 1e-4, 1e-3, 1e4, 1e5, 1234e-7, 1234e5, 12345e5, -0.0001234};
  for (int k = -325; k <= 308; ++k)
    for (int m : {1, 2, 5, 9, 11, 99, 123, 1001, 123456789}) {
      const double v = m * std::pow(10.0, k);
      if (!std::isfinite(v) || v == 0.0) continue;
      for (double w : {v, std::nextafter(v, 0.0), std::nextafter(v, INFINITY), -v}) values.push_back(w);
    }
  std::uint64_t state = 12345;  // splitmix64 over bit patterns: every exponent and sign
  auto next = [&state] {
    std::uint64_t z = (state += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
  };
  for (int i = 0; i < 1000000; ++i) {
    const double bits = std::bit_cast<double>(next());
    if (std::isfinite(bits)) values.push_back(bits);
    // numbers of the tables' own sizes, 17 significant digits
    values.push_back(std::ldexp(static_cast<double>(next() >> 11), static_cast<int>(next() % 100) - 90));
  }
  long differ = 0, unread = 0;
  std::string got;
  char ref[64];
  for (double v : values) {
    got.clear();
    append_double(got, v);
    const auto end = std::to_chars(ref, ref + sizeof ref, v).ptr;
    if (got != std::string_view(ref, end - ref)) {
      if (++differ <= 5) UNSCOPED_INFO(std::string(ref, end) + " written as " + got);
    }
    double back = 0.0;
    if (!parse_double(got, back) || std::bit_cast<std::uint64_t>(back) != std::bit_cast<std::uint64_t>(v)) ++unread;
  }
  CHECK(values.size() > 2000000);
  CHECK(differ == 0);
  CHECK(unread == 0);
  got = "x";
  append_double(got, INFINITY);
  append_double(got, std::nan(""));
  CHECK(got == "x");
}

TEST_CASE("io: UTF-8 validation and clipped echoes", "[io]") {
  // Byte sequences from RFC 3629 Sect. 3 and the Unicode standard, Table 3-7.
  CHECK(valid_utf8("KMG-00754"));
  CHECK(valid_utf8("\xCE\xB7 CrB"));           // U+03B7
  CHECK(valid_utf8("\xF0\x9F\x94\xAD"));       // U+1F52D
  CHECK_FALSE(valid_utf8("\xC0\xAF"));         // overlong '/'
  CHECK_FALSE(valid_utf8("\xED\xA0\x80"));     // surrogate U+D800
  CHECK_FALSE(valid_utf8("\xF4\x90\x80\x80")); // above U+10FFFF
  CHECK_FALSE(valid_utf8("\xE2\x82"));         // truncated
  CHECK_FALSE(valid_utf8("\xFF"));
  const std::string big(10'000'000, 'h');
  const std::string clipped = clip_for_message(big);
  CHECK(clipped.size() < 120);
  CHECK_THAT(clipped, Catch::EndsWith("... (10000000 bytes)"));
  // Cut on a character boundary: 79 ASCII bytes then a 2-byte character.
  CHECK(valid_utf8(clip_for_message(std::string(79, 'a') + "\xCE\xB7" + std::string(10, 'b'))));
}

TEST_CASE("io: CSV rows whose id starts with '#' are not dropped silently", "[io]") {
  std::istringstream in("id,x,y\n# a comment\n#S1,1,2\n");
  ColumnTable t(in, "t.csv", {"id", "x"});
  CHECK_THROWS_WITH(t.next(), Catch::Contains("t.csv:3:1") && Catch::Contains("quote an id that starts with '#'"));
  std::istringstream quoted("id,x,y\n\"#S1\",1,2\n");
  ColumnTable q(quoted, "q.csv", {"id"});
  REQUIRE(q.next());
  CHECK(q.text(0) == "#S1");
  std::istringstream bad_utf8("id,x\nS\xFF,1\n");
  ColumnTable b(bad_utf8, "b.csv", {"id"});
  CHECK_THROWS_WITH(b.next(), Catch::Contains("b.csv:2:1") && Catch::Contains("not valid UTF-8"));
}

TEST_CASE("io: JSON errors name line and column, numbers beyond double range too", "[io]") {
  std::istringstream overflow("{\n  \"a\": 1,\n  \"b\": 1e309\n}\n");
  CHECK_THROWS_WITH(read_json(overflow, "s.json"), Catch::Contains("s.json:3:") && Catch::Contains("number overflow"));
  std::istringstream syntax("{\"a\": [1, 2,, 3]}");
  CHECK_THROWS_WITH(read_json(syntax, "x.json"), Catch::StartsWith("x.json:1:") && Catch::Contains("malformed JSON"));
  std::istringstream empty("");
  CHECK_THROWS_AS(read_json(empty, "e.json"), InputError);
  std::istringstream good("{\"a\": [1.5, \"t\"]}");
  const nlohmann::json j = read_json(good, "g.json");
  CHECK(j["a"][0].get<double>() == 1.5);
}

TEST_CASE("stats: bin_index refuses NaN and outliers before converting", "[io][stats]") {
  CHECK(bin_index(0.5, 0.0, 1.0, 360) == 0);
  CHECK(bin_index(359.999, 0.0, 1.0, 360) == 359);
  CHECK(bin_index(360.0, 0.0, 1.0, 360) == -1);
  CHECK(bin_index(-1e-12, 0.0, 1.0, 360) == -1);
  CHECK(bin_index(std::nan(""), 0.0, 1.0, 360) == -1);
  CHECK(bin_index(1e300, -5.0, 0.1, 100) == -1);
  CHECK(bin_index(0.0, -5.0, 0.0, 100) == -1);  // zero width: NaN or inf ratio
}
