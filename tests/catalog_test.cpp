#include <catch2/catch.hpp>
#include <omp.h>

#include <sstream>
#include <stdexcept>
#include <string>

#include "heft/catalog.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/rng.hpp"
#include "test_util.hpp"

using namespace heft;

TEST_CASE("CSV tokenizer: quotes, escapes, line breaks, comments", "[catalog]") {
  // RFC 4180 rules (quoted commas, doubled quotes, quoted line breaks).
  std::istringstream in("\xEF\xBB\xBF# comment\r\na, \"b,c\" ,\"say \"\"hi\"\"\"\r\n\n\"multi\nline\",x,\r\n");
  CsvReader csv(in, "mem.csv");
  REQUIRE(csv.next());
  REQUIRE(csv.fields().size() == 3);
  CHECK(csv.fields()[0] == "a");
  CHECK(csv.fields()[1] == "b,c");
  CHECK(csv.fields()[2] == "say \"hi\"");
  CHECK(csv.line() == 2);
  CHECK(csv.column(1) == 4);
  REQUIRE(csv.next());
  CHECK(csv.fields()[0] == "multi\nline");
  CHECK(csv.fields()[2].empty());
  CHECK(csv.line() == 4);
  CHECK_FALSE(csv.next());
  std::istringstream plain("a,  b ,c\n");  // a line without quotes: columns from the fields' spans
  CsvReader csv3(plain, "plain.csv");
  REQUIRE(csv3.next());
  CHECK(csv3.field_count() == 3);
  CHECK(csv3.field(1) == "b");
  CHECK(csv3.column(1) == 5);
  CHECK(csv3.column(2) == 8);
  std::istringstream bad("\"open,1\n");
  CsvReader csv2(bad, "bad.csv");
  CHECK_THROWS_AS(csv2.next(), InputError);
}

TEST_CASE("CSV tokenizer: rows that straddle the reader's blocks", "[catalog]") {
  // RFC 4180 rules as above, over an input of 0.8 MB: the reader takes the
  // stream in blocks of 4 KiB growing to 256 KiB, so rows, CRLF pairs and
  // quoted line breaks fall across block boundaries; the last row has no
  // line break. Every field and line number must be as written (no
  // outside source: the expected rows are the ones generated).
  std::string text = "id,value,note\n";
  const int n = 20000;
  for (int i = 0; i < n; ++i) {
    text += "r" + std::to_string(i) + "," + std::to_string(i * 7) + ",";
    if (i % 7 == 3) text += "\"two\nlines " + std::to_string(i) + "\"";
    else text += std::string(static_cast<std::size_t>(i % 53), 'x');
    if (i + 1 < n) text += i % 2 ? "\r\n" : "\n";
  }
  std::istringstream in(text);
  CsvReader csv(in, "blocks.csv");
  REQUIRE(csv.next());
  long line = 2;
  for (int i = 0; i < n; ++i) {
    INFO("row " << i);
    REQUIRE(csv.next());
    REQUIRE(csv.fields().size() == 3);
    CHECK(csv.fields()[0] == "r" + std::to_string(i));
    CHECK(csv.fields()[1] == std::to_string(i * 7));
    if (i % 7 == 3) {
      CHECK(csv.fields()[2] == "two\nlines " + std::to_string(i));
    } else {
      CHECK(csv.fields()[2] == std::string(static_cast<std::size_t>(i % 53), 'x'));
    }
    CHECK(csv.line() == line);
    line += i % 7 == 3 ? 2 : 1;
  }
  CHECK_FALSE(csv.next());
}

TEST_CASE("CSV tokenizer: the first fields of a row alone, then the rest, are what next() reads", "[catalog]") {
  // next_first(n) splits a plain row's first n fields and counts the
  // others; with complete() the row must be next()'s, field by field,
  // column by column, and so must the field count and the errors before
  // it (the reference is next() itself: no outside source). Random rows of
  // commas, spaces, tabs, quotes, CR, comments, blank lines, valid and
  // invalid UTF-8, some longer than the comma count's 255-byte steps.
  const std::string pieces[] = {",", ",", ",", " ", "\t", "a", "bc", "12.5", "\"q,\"\"x\"", "\xC3\xA9", "\xFF",
                                "#", "\r", "\n", "\n", "\"open", std::string(120, 'x')};
  std::uint64_t state = 12345;
  auto next_rand = [&] { return splitmix64(state); };
  long rows = 0, partial = 0, errors = 0;
  for (int t = 0; t < 3000; ++t) {
    std::string text;
    const int n_pieces = static_cast<int>(next_rand() % 60);
    for (int k = 0; k < n_pieces; ++k) {
      const std::uint64_t r = next_rand() % 100;
      text += r < 70 ? pieces[r % 8] : r < 80 ? pieces[16] : pieces[r % 16];
    }
    const std::size_t n = next_rand() % 4;
    std::istringstream a(text), b(text);
    CsvReader full(a, "t.csv"), first(b, "t.csv");
    for (;;) {
      std::string what_full, what_first;
      bool got_full = false, got_first = false;
      try {
        got_full = full.next();
      } catch (const InputError& e) {
        what_full = e.what();
      }
      try {
        got_first = first.next_first(n);
      } catch (const InputError& e) {
        what_first = e.what();
      }
      INFO("text '" << text << "', n " << n);
      REQUIRE(what_first == what_full);
      REQUIRE(got_first == got_full);
      if (!what_full.empty()) {
        ++errors;
        break;
      }
      if (!got_full) break;
      ++rows;
      REQUIRE(first.field_count() == full.field_count());
      REQUIRE(first.line() == full.line());
      for (std::size_t i = 0; i < std::min(n, full.field_count()); ++i) {
        CHECK(first.field(i) == full.field(i));
        CHECK(first.column(i) == full.column(i));
      }
      first.complete();
      REQUIRE(first.fields().size() == full.fields().size());
      partial += full.field_count() > n ? 1 : 0;
      for (std::size_t i = 0; i < full.field_count(); ++i) {
        CHECK(first.fields()[i] == full.fields()[i]);
        CHECK(first.column(i) == full.column(i));
      }
    }
  }
  // The cases must occur: rows split in part, and rows that fail.
  CHECK(rows > 3000);
  CHECK(partial > 1000);
  CHECK(errors > 100);
}

TEST_CASE("numbers: exact parsing and shortest round trip", "[catalog]") {
  double v = 0;
  CHECK(parse_double("+1.5e-3", v));
  CHECK(v == 1.5e-3);
  CHECK_FALSE(parse_double("1.5x", v));
  CHECK_FALSE(parse_double("", v));
  // Shortest text that reads back to the same double (std::to_chars).
  for (double x : {0.1, 1.0 / 3.0, 83.80000000000001, -2.5e-300, 123456789.123456789}) {
    double back = 0;
    REQUIRE(parse_double(format_double(x), back));
    CHECK(back == x);
  }
  CHECK(format_double(0.1) == "0.1");
  CHECK(format_double(std::nan("")).empty());
}

TEST_CASE("covariance of a 5-parameter solution round-trips", "[catalog]") {
  Astrometry a;
  a.ra_error_mas = 0.3;
  a.dec_error_mas = 0.2;
  a.parallax_error_mas = 0.4;
  a.pmra_error_mas_yr = 0.5;
  a.pmdec_error_mas_yr = 0.6;
  a.corr = {0.1, -0.2, 0.3, 0.0, 0.05, -0.1, 0.2, 0.15, -0.05, 0.25};
  const Eigen::Matrix<double, 5, 5> c = a.covariance();
  CHECK(c(0, 1) == Approx(0.1 * 0.3 * 0.2));
  CHECK(c(3, 4) == Approx(0.25 * 0.5 * 0.6));
  Astrometry b;
  b.set_covariance(c * 4.0);
  CHECK(b.pmdec_error_mas_yr == Approx(1.2));
  CHECK(b.corr[7] == Approx(0.15));
}

TEST_CASE("star rows in chunks: file order, indices and the first error, whatever the threads", "[catalog]") {
  // Eleven rows in chunks of three (read_star_rows reads a chunk ahead):
  // R7 repeats R2's id; every row is otherwise valid.
  std::string table = star_table_header();
  for (int k = 0; k < 11; ++k) {
    StarRecord s;
    s.id = k == 7 ? "R2" : "R" + std::to_string(k);
    const SkyState<double> st{1.0, 0.2, 20.0, 30.0 + k, -10.0, 5.0};
    s.early = test::entry(st, 1991.25, 0.8, 0.9, 1989.85, 1993.21);
    s.late = test::entry(st, 2016.0, 0.03, 0.04, 2014.57, 2017.41);
    append_star_row(table, s);
  }
  struct Seen {
    std::vector<std::string> ids;
    std::vector<long> index, line;
    std::string error;
  };
  const auto run = [](const std::string& text, int throw_at) {
    std::istringstream in(text);
    StarTableReader reader(in, "mem.csv");
    Seen seen;
    std::vector<long> worked(3, -1);
    try {
      read_star_rows(
          reader, 3,
          [&](std::size_t i, const ParsedStarRow& r) {
            if (r.index == throw_at) throw std::runtime_error("work " + std::to_string(r.index));
            worked[i] = r.index;
          },
          [&](std::size_t i, const ParsedStarRow& r) {
            CHECK(worked[i] == r.index);  // work's result for this row, in its slot
            seen.ids.push_back(r.star.id + (r.bad_reason.empty() ? "" : ":" + r.bad_reason));
            seen.index.push_back(r.index);
            seen.line.push_back(r.line);
          });
    } catch (const std::exception& e) {
      seen.error = e.what();
    }
    return seen;
  };
  for (int threads : {1, 2}) {
    const int before = omp_get_max_threads();
    omp_set_num_threads(threads);
    const Seen all = run(table, -1);
    REQUIRE(all.ids.size() == 11);
    CHECK(all.error.empty());
    CHECK(all.ids[0] == "R0");
    CHECK(all.ids[2] == "R2");
    CHECK(all.ids[7] == "R2:duplicate_id");
    CHECK(all.ids[10] == "R10");
    for (long k = 0; k < 11; ++k) {
      CHECK(all.index[k] == k);
      CHECK(all.line[k] == k + 2);
    }
    // A number that does not parse in row 8 (line 10, third chunk) and a
    // row that does not read at line 12 (fourth chunk, read ahead): rows
    // before the first error are taken, in order, then it is thrown.
    std::string bad = table;
    bad.insert(test::line_start(bad, 12), "R-short,1\n");
    bad.insert(bad.find(',', test::line_start(bad, 10)) + 1, "x");
    const Seen work_first = run(bad, 5);
    CHECK(work_first.ids.size() == 5);
    CHECK(work_first.error == "work 5");
    const Seen number_first = run(bad, -1);
    CHECK(number_first.ids.size() == 8);
    CHECK(number_first.error.find("mem.csv:10:4: column 'early_epoch'") != std::string::npos);  // "R8,x1991.25"
    bad = table;
    bad.insert(test::line_start(bad, 12), "R-short,1\n");
    const Seen short_row = run(bad, -1);
    CHECK(short_row.ids.size() == 10);
    CHECK(short_row.error.find("mem.csv:12:") != std::string::npos);
    omp_set_num_threads(before);
  }
}
