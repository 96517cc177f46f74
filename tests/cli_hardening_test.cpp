// Regression tests of the hardening work: outputs that are not regular
// files, inputs that once crashed or were misread, torn checkpoints, and
// one exit code per error kind for every command. Device nodes and FIFOs
// live in the test's temporary folder, never on the machine's /dev.
#include <catch2/catch.hpp>
#include <signal.h>
#include <sys/stat.h>
#include <sys/sysmacros.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <dirent.h>
#include <fstream>
#include <thread>

#include "heft/io.hpp"
#include "heft/rank.hpp"
#include "test_util.hpp"

using namespace heft;
using heft::test::run_heft;
using heft::test::tmp_path;

namespace {

// A small simulated survey (a few companions) shared by the tests here.
const std::string& stars() {
  static const std::string path = [] {
    const std::string p = tmp_path("hard_stars.csv");
    REQUIRE(run_heft("simulate -q --stars 40 --seed 12 --companion-fraction 0.5 --companion-mass loguniform:20,80 "
                     "--a loguniform:3,30 --distance uniform:20,40 -o " + p) == 0);
    return p;
  }();
  return path;
}

// The star table with the id of data row 1 replaced by `id` (raw CSV text).
std::string with_first_id(const std::string& id) {
  std::string t = test::read_text(stars());
  const auto row = t.find('\n') + 1;
  const auto comma = t.find(',', row);
  return t.replace(row, comma - row, id);
}

const char* kDrawHeader =
    "id,a_au,mass_mjup,ecc,inc_deg,arg_peri_deg,node_deg,mean_anom_deg,ref_epoch_yr,period_yr,parallax_mas,"
    "host_mass_msun,weight\n";

}  // namespace

TEST_CASE("outputs: FIFO and symlink targets stay what they are, two outputs on one path are refused", "[cli][hardening]") {
  const std::string d = test::fresh_dir("hard_out"), fifo = d + "/pipe", real = d + "/real.csv", link = d + "/link.csv";
  REQUIRE(::mkfifo(fifo.c_str(), 0600) == 0);
  std::string got;
  std::thread reader([&] { got = test::read_text(fifo); });
  REQUIRE(run_heft("screen -q " + stars() + " -o " + fifo) == 0);
  reader.join();
  CHECK(got.rfind("id,status,", 0) == 0);
  struct stat st {};
  REQUIRE(::lstat(fifo.c_str(), &st) == 0);
  CHECK(S_ISFIFO(st.st_mode));

  test::write_text(real, "old\n");
  REQUIRE(::symlink("real.csv", link.c_str()) == 0);
  REQUIRE(run_heft("screen -q " + stars() + " -o " + link) == 0);
  REQUIRE(::lstat(link.c_str(), &st) == 0);
  CHECK(S_ISLNK(st.st_mode));
  CHECK(test::read_text(real) == got);

  // -o X --json X once left X corrupt; a link and its target are one place.
  std::string err;
  CHECK(run_heft("screen -q " + stars() + " -o " + real + " --json " + link, &err) == 1);
  CHECK_THAT(err, Catch::Contains("-o and --json would both write"));
  CHECK(test::read_text(real) == got);
  CHECK(run_heft("predict -q x.csv --date 2027 -o - --json -", &err) == 1);
  CHECK_THAT(err, Catch::Contains("standard output"));
  CHECK(test::listing(d) == (std::vector<std::string>{"link.csv", "pipe", "real.csv"}));
}

TEST_CASE("outputs: device nodes are written in place and write errors on stdout fail the run", "[cli][hardening]") {
  if (::geteuid() != 0) {
    WARN("not root: device-node checks skipped (mknod needs root)");
    return;
  }
  const std::string d = test::fresh_dir("hard_dev"), null_node = d + "/null", full_node = d + "/full";
  // Linux device numbers: 1,3 is the null device, 1,7 the always-full device.
  REQUIRE(::mknod(null_node.c_str(), S_IFCHR | 0666, makedev(1, 3)) == 0);
  REQUIRE(::mknod(full_node.c_str(), S_IFCHR | 0666, makedev(1, 7)) == 0);
  std::string err;
  CHECK(run_heft("screen -q " + stars() + " -o " + null_node + " --json " + null_node) == 0);
  CHECK(run_heft("rank -q " + stars() + " --date 2027.5 --draws 64 --n-a 6 -o " + null_node) == 0);
  CHECK(run_heft("screen -q " + stars() + " -o " + full_node, &err) == 2);
  CHECK_THAT(err, Catch::Contains("No space left on device"));
  // `-o - > full` once exited 0 and lost the data.
  CHECK(run_heft("screen -q " + stars() + " -o - > " + full_node, &err) == 2);
  CHECK_THAT(err, Catch::Contains("<stdout>") && Catch::Contains("No space left on device"));
  CHECK(run_heft("screen -q " + stars() + " > " + full_node, &err) == 2);
  struct stat st {};
  for (const auto& node : {null_node, full_node}) {
    REQUIRE(::lstat(node.c_str(), &st) == 0);
    CHECK(S_ISCHR(st.st_mode));
  }
  // No checkpoint or temporary was made beside the device.
  CHECK(test::listing(d) == (std::vector<std::string>{"full", "null"}));
}

TEST_CASE("outputs: SIGTERM during a run leaves no temporary file", "[cli][hardening]") {
  const std::string d = test::fresh_dir("hard_sig"), pid_file = tmp_path("hard_sig_pid");
  REQUIRE(std::system((std::string(HEFT_BINARY) + " rank -q " + stars() + " --date 2027.5 --draws 4096 -j 1 -o " + d +
                       "/ranked.csv --json " + d + "/ranked.json & echo $! > " + pid_file)
                          .c_str()) == 0);
  long pid = 0;
  std::istringstream(test::read_text(pid_file)) >> pid;
  REQUIRE(pid > 0);
  std::this_thread::sleep_for(std::chrono::milliseconds(400));
  REQUIRE(::kill(static_cast<pid_t>(pid), SIGTERM) == 0);
  for (int k = 0; k < 100 && ::kill(static_cast<pid_t>(pid), 0) == 0; ++k)
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  // Only the checkpoint (kept on purpose, for --resume) may remain.
  for (const auto& name : test::listing(d)) CHECK(name == "ranked.csv.checkpoint");
}

TEST_CASE("predict: draws that once crashed it are refused with file:line:column", "[cli][hardening]") {
  const std::string d = tmp_path("hard_draws.csv"), ok = tmp_path("hard_draws_ok.csv");
  std::string err;
  // A period of 1e-307 yr: every value valid alone, the mean anomaly infinite.
  test::write_text(d, std::string(kDrawHeader) + "S,1,10,0.1,30,0,0,0,2016,1e-307,8,1,1\n");
  CHECK(run_heft("predict -q " + d + " --date 2027", &err) == 2);
  CHECK_THAT(err, Catch::Contains(d + ":2:") && Catch::Contains("period too short"));
  test::write_text(d, std::string(kDrawHeader) + "S,1e300,10,0.1,30,0,0,0,2016,3,1e300,1,1\n");
  CHECK(run_heft("predict -q " + d + " --date 2027", &err) == 2);
  CHECK_THAT(err, Catch::Contains("angular semi-major axis"));
  // An outlier at a = 1e12 AU (once an integer overflow in the grid index)
  // is a valid draw: the prediction runs, the map stays finite.
  test::write_text(ok, std::string(kDrawHeader) + "S,10,10,0.1,30,0,0,0,2016,31.6,8,1,0.5\n" +
                           "S,1e12,10,0.1,30,0,0,0,2016,3.16e16,8,1,0.5\n");
  const std::string grid = tmp_path("hard_grid.csv");
  CHECK(run_heft("predict -q " + ok + " --date 2027 --grid " + grid + " -o " + tmp_path("hard_pred.csv")) == 0);
  CHECK(test::read_text(grid).find("nan") == std::string::npos);
  // A date given as MJD by mistake.
  CHECK(run_heft("predict -q " + ok + " --date 61000", &err) == 1);
  CHECK_THAT(err, Catch::Contains("--date"));
}

TEST_CASE("inputs: numbers beyond double range, invalid UTF-8, '#' ids, directories, BOMs, huge fields",
          "[cli][hardening]") {
  std::string err;
  const std::string out = tmp_path("hard_in_out.csv");
  std::remove(out.c_str());
  // 1e309 in a star file: the JSON line and column, exit 2.
  std::string sf = test::read_text(std::string(HEFT_SOURCE_DIR) + "/demo/followup/KMG-00754.json");
  const auto plx = sf.find("\"late_parallax_error\"");
  REQUIRE(plx != std::string::npos);
  const auto colon = sf.find(':', plx);
  sf.replace(colon + 1, sf.find_first_of(",\n}", colon) - colon - 1, " 1e309");
  const std::string big = tmp_path("hard_big.json");
  test::write_text(big, sf);
  CHECK(run_heft("fit -q " + big + " -o " + out, &err) == 2);
  CHECK_THAT(err, Catch::Contains(big + ":") && Catch::Contains("number overflow"));
  CHECK_FALSE(test::file_exists(out));

  // Invalid UTF-8 in an id: refused at its line and column, nothing written.
  const std::string bad = tmp_path("hard_utf8.csv");
  test::write_text(bad, with_first_id("KMG\xFF"));
  for (const std::string cmd : {"screen -q ", "rank -q --date 2027.5 --draws 64 --n-a 6 "}) {
    CHECK(run_heft(cmd + bad + " -o " + out + " --json " + out + ".json", &err) == 2);
    CHECK_THAT(err, Catch::Contains(bad + ":2:1") && Catch::Contains("not valid UTF-8"));
    CHECK_FALSE(test::file_exists(out));
    CHECK_FALSE(test::file_exists(out + ".json"));
  }

  // A data row whose id starts with '#': once dropped as a comment.
  const std::string hash = tmp_path("hard_hash.csv");
  test::write_text(hash, with_first_id("#KMG-1"));
  CHECK(run_heft("screen -q " + hash + " -o " + out, &err) == 2);
  CHECK_THAT(err, Catch::Contains(hash + ":2:1") && Catch::Contains("quote an id"));
  test::write_text(hash, with_first_id("\"#KMG-1\""));
  REQUIRE(run_heft("screen -q " + hash + " -o " + out) == 0);
  CHECK(test::read_table(out).str(0, "id") == "#KMG-1");

  // 1e-400junk was read as 0.
  std::string junk = test::read_text(stars());
  const auto row = junk.find('\n') + 1;
  const auto c1 = junk.find(',', row) + 1;
  junk.replace(c1, junk.find(',', c1) - c1, "1e-400junk");
  test::write_text(hash, junk);
  CHECK(run_heft("screen -q " + hash + " -o " + out, &err) == 2);
  CHECK_THAT(err, Catch::Contains("not a number: '1e-400junk'"));

  // A directory as input.
  const std::string dir = test::fresh_dir("hard_dir");
  CHECK(run_heft("screen -q " + dir, &err) == 2);
  CHECK_THAT(err, Catch::Contains(dir + ": cannot read: is a directory"));
  CHECK(run_heft("fit -q " + dir, &err) == 2);
  CHECK_THAT(err, Catch::Contains("is a directory"));

  // A 10 MB header field is echoed clipped.
  std::string wide = test::read_text(stars());
  wide.insert(wide.find('\n'), "," + std::string(10'000'000, 'w'));
  for (auto p = wide.find('\n', wide.find('\n') + 1); p != std::string::npos; p = wide.find('\n', p + 2))
    wide.insert(p, ",");
  test::write_text(hash, wide);
  REQUIRE(run_heft("screen " + hash + " -o " + out, &err) == 0);
  CHECK_THAT(err, Catch::Contains("(10000000 bytes)") && Catch::Contains("is not canonical"));
  CHECK(err.size() < 1000);

  // A ranked table with a UTF-8 byte-order mark merges like any other.
  const std::string ranked = tmp_path("hard_ranked.csv"), bom = tmp_path("hard_bom.csv");
  REQUIRE(run_heft("rank -q " + stars() + " --date 2027.5 --draws 64 --n-a 6 -o " + ranked) == 0);
  test::write_text(bom, "\xEF\xBB\xBF" + test::read_text(ranked));
  REQUIRE(run_heft("merge -q " + bom + " -o " + out) == 0);
  CHECK(test::read_text(out) == test::read_text(ranked));
}

TEST_CASE("rank --resume: a torn or damaged checkpoint line is dropped and its star computed again", "[cli][hardening]") {
  const std::string out = tmp_path("hard_cp.csv"), cp = out + ".checkpoint", fresh = tmp_path("hard_cp_fresh.csv");
  const std::string args = " --date 2027.5 --draws 64 --n-a 6 -q -j 1 ";
  REQUIRE(run_heft("rank " + stars() + args + "-o " + fresh) == 0);
  // A checkpoint as a killed run leaves it: copy the fresh run's records in.
  std::ifstream in(fresh);
  RankRunInfo info;
  std::vector<RankRecord> recs = read_ranked(in, fresh, info);
  std::vector<RankRecord> curved;
  for (auto& r : recs)
    if (!has_note(r.notes, "below_detect_sigma") && r.status.ok()) curved.push_back(r);
  REQUIRE(curved.size() >= 3);
  std::string text = checkpoint_head(info);
  std::string damaged = checkpoint_line(curved[1]);
  damaged[damaged.find(',') + 3] ^= 1;  // one flipped bit inside the row
  const std::string torn = checkpoint_line(curved[2]);
  text += checkpoint_line(curved[0]) + damaged + torn.substr(0, torn.size() - 1);  // last line without newline
  for (auto& r : curved) r.rank = 0;
  test::write_text(cp, text);
  std::istringstream cps(text);
  const Checkpoint c = read_checkpoint(cps, cp);
  CHECK(c.records.size() == 1);
  CHECK(c.dropped == 2);
  std::string err;
  REQUIRE(run_heft("rank " + stars() + " --date 2027.5 --draws 64 --n-a 6 -j 1 --resume -o " + out, &err) == 0);
  CHECK_THAT(err, Catch::Contains("2 damaged or torn line(s) dropped"));
  CHECK(test::read_text(out) == test::read_text(fresh));
  CHECK_FALSE(test::file_exists(cp));
}

TEST_CASE("screen: implausible proper motions and parallaxes are noted, not refused", "[cli][hardening]") {
  // Limits: Barnard's star 10.39"/yr, Proxima Cen 768 mas (facts of the trade, from memory).
  std::string t = test::read_text(stars());
  const auto header = test::read_table(stars()).header;
  auto set = [&](int row, const std::string& col, const std::string& v) {
    std::size_t p = 0;
    for (int k = 0; k <= row; ++k) p = t.find('\n', p) + 1;
    int c = 0;
    while (header[c] != col) ++c;
    for (int k = 0; k < c; ++k) p = t.find(',', p) + 1;
    t.replace(p, t.find_first_of(",\n", p) - p, v);
  };
  set(0, "late_pmra", "100000");
  set(0, "early_pmra", "100000");
  set(1, "late_parallax", "1200");
  const std::string in = tmp_path("hard_implausible.csv"), out = tmp_path("hard_implausible_out.csv");
  test::write_text(in, t);
  REQUIRE(run_heft("screen -q " + in + " -o " + out) == 0);
  const auto s = test::read_table(out);
  CHECK_THAT(s.str(0, "notes"), Catch::Contains("implausible_pm"));
  CHECK_THAT(s.str(1, "notes"), Catch::Contains("implausible_parallax"));
  CHECK_THAT(s.str(2, "notes"), !Catch::Contains("implausible"));
  CHECK(s.str(0, "status") == "ok");
}

TEST_CASE("exit codes: usage 1, input 2, the same mapping in every command", "[cli][hardening]") {
  std::string err;
  const std::string missing = tmp_path("no_such_file.csv");
  // A bad option value is a usage error.
  CHECK(run_heft("curve -q " + stars() + " --id X --ecc beta:0", &err) == 1);
  CHECK(run_heft("rank -q " + stars() + " --date 2027 --ecc uniform:1", &err) == 1);
  CHECK_THAT(err, Catch::Contains("--ecc"));
  CHECK(run_heft("fit -q x.json --ecc nonsense:1,2", &err) == 1);
  CHECK(run_heft("simulate -q --stars 3 --a loguniform:0,1", &err) == 1);
  CHECK(run_heft("rank -q " + stars() + " --date 2027 --shard 3/2", &err) == 1);
  // A missing input is an input error.
  const std::vector<std::string> commands = {"screen " + missing,
                                             "curve " + missing + " --id X",
                                             "rank " + missing + " --date 2027",
                                             "fit " + missing,
                                             "predict " + missing + " --date 2027",
                                             "merge " + missing,
                                             "plot curve " + missing,
                                             "plot sky " + missing,
                                             "ingest --early " + missing + " --late " + missing + " --map " +
                                                 missing + " --key-early a --key-late b"};
  for (const auto& c : commands) {
    INFO(c);
    CHECK(run_heft(c + " -q", &err) == 2);
    CHECK_THAT(err, Catch::Contains(missing));
  }
  // A checkpoint that cannot be written is an input (file) error, not a numerical failure.
  if (::geteuid() != 0) return;  // root ignores permissions: use a full device node
  const std::string d = test::fresh_dir("hard_cpfail");
  REQUIRE(::mknod((d + "/full").c_str(), S_IFCHR | 0666, makedev(1, 7)) == 0);
  REQUIRE(::symlink("full", (d + "/ranked.csv.checkpoint").c_str()) == 0);
  CHECK(run_heft("rank -q " + stars() + " --date 2027.5 --draws 64 --n-a 6 -o " + d + "/ranked.csv", &err) == 2);
  CHECK_THAT(err, Catch::Contains("checkpoint"));
}
