// End-to-end tests of `heft screen`: output schema, bad-input rules, file
// handling, atomic output. The reference numbers come from the library.
#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "heft/anomaly.hpp"
#include "heft/io.hpp"
#include "heft/screen.hpp"
#include "test_util.hpp"

using namespace heft;
using heft::test::run_heft;
using heft::test::tmp_path;

namespace {
StarRecord good_star(const std::string& id, double extra_pm = 0.0) {
  const SkyState<double> late{units::deg_to_rad(83.8), units::deg_to_rad(-5.4), 25.0, 40.0,
                              -12.0, 15.0};
  const SkyState<double> early = propagate(late, 1991.25 - 2016.0);
  StarRecord s;
  s.id = id;
  s.early = test::entry(early, 1991.25, 0.8, 0.9, 1989.85, 1993.21);
  s.late = test::entry(late, 2016.0, 0.03, 0.04, 2014.57, 2017.41);
  s.late.corr[0] = 0.2;
  s.late.pmra_mas_yr += extra_pm;
  s.rv_km_s = 15.0;
  s.rv_error_km_s = 0.5;
  return s;
}

std::string table_of(const std::vector<StarRecord>& stars) {
  std::string t = star_table_header();
  for (const auto& s : stars) append_star_row(t, s);
  return t;
}

// Replaces the value of column `col` in data row `row` (0-based) of a CSV text.
std::string set_field(const std::string& csv, int row, const std::string& col,
                      const std::string& value) {
  std::vector<std::string> lines;
  std::size_t start = 0;
  while (start < csv.size()) {
    const auto nl = csv.find('\n', start);
    lines.push_back(csv.substr(start, nl - start));
    start = nl + 1;
  }
  auto split = [](const std::string& l) {
    std::vector<std::string> f;
    std::size_t a = 0;
    for (;;) {
      const auto c = l.find(',', a);
      f.push_back(l.substr(a, c == std::string::npos ? std::string::npos : c - a));
      if (c == std::string::npos) break;
      a = c + 1;
    }
    return f;
  };
  const auto header = split(lines[0]);
  auto fields = split(lines[row + 1]);
  for (std::size_t i = 0; i < header.size(); ++i)
    if (header[i] == col) fields[i] = value;
  std::string joined;
  for (std::size_t i = 0; i < fields.size(); ++i) joined += (i ? "," : "") + fields[i];
  lines[row + 1] = joined;
  std::string out;
  for (const auto& l : lines) out += l + "\n";
  return out;
}

// heft screen of `in` with one and with two threads fails (exit 2), its
// message naming `where` (file:line:).
void check_first_error(const std::string& in, const std::string& where) {
  for (const char* j : {"1", "2"}) {
    std::string err;
    CHECK(run_heft(std::string("screen -j ") + j + " " + in + " -o " + in + ".out", &err) == 2);
    CHECK(err.find(where) != std::string::npos);
  }
}
}  // namespace

TEST_CASE("screen writes the documented columns and the library's numbers", "[cli][screen]") {
  const std::string in = tmp_path("screen_ok.csv"), out = tmp_path("screen_ok.out.csv"),
                    js = tmp_path("screen_ok.json");
  test::write_text(in, table_of({good_star("HX-1"), good_star("HX-2", 0.5)}));
  REQUIRE(run_heft("screen " + in + " -o " + out + " --json " + js + " -q") == 0);
  const auto t = test::read_table(out);
  REQUIRE(t.header == screen_columns());
  REQUIRE(t.rows.size() == 2);
  CHECK(t.str(0, "status") == "ok");
  // The row equals the library's result for the same star, to the last digit.
  const ScreenRow lib = screen_star(good_star("HX-2", 0.5), "", ScreenOptions{});
  CHECK(t.num(1, "dpm_late_ra") == lib.result.dpm_late_mas_yr.x());
  CHECK(t.num(1, "chi2_joint") == lib.result.chi2_joint);
  CHECK(t.num(1, "dpm_late_ra") == Approx(0.5).margin(1e-3));
  CHECK(std::abs(t.num(0, "dpm_late_ra")) < 1e-6);
  CHECK(t.num(0, "dt_yr") == 24.75);
  const auto j = nlohmann::json::parse(test::read_text(js));
  REQUIRE(j["stars"].size() == 2);
  CHECK(j["stars"][1]["chi2_joint"].get<double>() == lib.result.chi2_joint);
  CHECK(j["run"]["rows"] == 2);
  CHECK(j["run"]["options"]["rv_sigma_km_s"].is_null());  // default: the kinematic width
  CHECK_THAT(j["run"]["options"]["rv_prior"].get<std::string>(), Catch::StartsWith("kinematic"));
  // stdin in, stdout out.
  REQUIRE(run_heft("screen - -q < " + in + " > " + out) == 0);
  CHECK(test::read_table(out).rows.size() == 2);
}

TEST_CASE("screen flags each bad-input rule and exits 4", "[cli][screen]") {
  // Rules of the canonical table (docs/formats.md).
  const std::string base = table_of({good_star("A"), good_star("B")});
  struct Case {
    std::string col, value, reason;
  };
  const std::vector<Case> cases = {
      {"late_pmra_error", "0", "nonpositive_error"},
      {"early_ra_error", "-0.3", "nonpositive_error"},
      {"late_dec", "91", "dec_out_of_range"},
      {"late_ra_dec_corr", "1.5", "corr_out_of_range"},
      {"late_pmra", "nan", "non_finite"},
      {"early_parallax", "inf", "non_finite"},
      {"late_window_end", "2015.0", "window_excludes_epoch"},
      {"late_parallax", "-1", "nonpositive_parallax"},
      {"late_pmra", "", "missing_late_pmra"},
  };
  for (const auto& c : cases) {
    DYNAMIC_SECTION(c.col << "=" << c.value) {
      const std::string in = tmp_path("bad_" + c.reason + ".csv"), out = in + ".out";
      test::write_text(in, set_field(base, 1, c.col, c.value));
      std::string err;
      CHECK(run_heft("screen " + in + " -o " + out, &err) == 4);
      const auto t = test::read_table(out);
      REQUIRE(t.rows.size() == 2);
      CHECK(t.str(0, "status") == "ok");
      CHECK(t.str(1, "status") == "bad_input:" + c.reason);
      CHECK(t.str(1, "chi2_late").empty());
      CHECK(err.find("1 row bad_input:" + c.reason) != std::string::npos);
    }
  }
  SECTION("covariance not positive definite") {
    std::string csv = set_field(base, 0, "late_ra_dec_corr", "0.9");
    csv = set_field(csv, 0, "late_ra_parallax_corr", "0.9");
    csv = set_field(csv, 0, "late_dec_parallax_corr", "-0.9");
    const std::string in = tmp_path("bad_pd.csv"), out = in + ".out";
    test::write_text(in, csv);
    CHECK(run_heft("screen " + in + " -o " + out + " -q") == 4);
    CHECK(test::read_table(out).str(0, "status") == "bad_input:covariance_not_positive_definite");
  }
  SECTION("duplicate id") {
    const std::string in = tmp_path("bad_dup.csv"), out = in + ".out";
    test::write_text(in, table_of({good_star("A"), good_star("A")}));
    CHECK(run_heft("screen " + in + " -o " + out + " -q") == 4);
    CHECK(test::read_table(out).str(1, "status") == "bad_input:duplicate_id");
  }
  SECTION("--strict makes the first bad row fatal and leaves no output") {
    const std::string in = tmp_path("bad_strict.csv"), out = tmp_path("bad_strict.out");
    std::remove(out.c_str());
    test::write_text(in, set_field(base, 1, "late_dec", "-95"));
    std::string err;
    CHECK(run_heft("screen " + in + " -o " + out + " --strict", &err) == 2);
    CHECK(!test::file_exists(out));
    CHECK(err.find(in + ":3") != std::string::npos);
    CHECK(err.find("dec_out_of_range") != std::string::npos);
  }
}

TEST_CASE("screen: structural errors name file, line and column", "[cli][screen]") {
  const std::string base = table_of({good_star("A"), good_star("B")});
  SECTION("unparsable number") {
    const std::string in = tmp_path("unparsable.csv"), out = tmp_path("unparsable.out");
    std::remove(out.c_str());
    const std::string csv = set_field(base, 1, "late_pmra", "12.3.4");
    test::write_text(in, csv);
    // Expected character column: where the field starts in line 3.
    const std::string line3 = csv.substr(csv.find('\n', csv.find('\n') + 1) + 1);
    const std::size_t col = line3.find("12.3.4") + 1;
    std::string err;
    CHECK(run_heft("screen " + in + " -o " + out, &err) == 2);
    CHECK(err.find(in + ":3:" + std::to_string(col) + ":") != std::string::npos);
    CHECK(err.find("late_pmra") != std::string::npos);
    CHECK(!test::file_exists(out));
  }
  SECTION("the first error in file order, whatever the threads") {
    // Rows are parsed in parallel: a later row's error must not win over
    // an earlier one's, nor a row that does not read over a number before it.
    std::vector<StarRecord> many;
    for (int i = 0; i < 40; ++i) many.push_back(good_star("S" + std::to_string(i)));
    std::string csv = set_field(table_of(many), 30, "late_pmra", "x");  // line 32
    csv = set_field(csv, 10, "early_pmra", "1.2.3");                     // line 12
    const std::string in = tmp_path("two_errors.csv");
    test::write_text(in, csv);
    check_first_error(in, in + ":12:");
    // A short row after the bad number: the number (line 12) still first.
    std::string shorter = csv;
    const std::size_t l20 = test::line_start(shorter, 20);
    shorter.erase(shorter.find_last_of(',', shorter.find('\n', l20)), shorter.find('\n', l20) - shorter.find_last_of(',', shorter.find('\n', l20)));
    test::write_text(in, shorter);
    check_first_error(in, in + ":12:");
    // Without the bad number the short row is the first error.
    test::write_text(in, set_field(shorter, 10, "early_pmra", "1.0"));
    check_first_error(in, in + ":20: row has");
  }
  SECTION("missing required column") {
    const std::string in = tmp_path("missing_col.csv");
    std::string csv = base;
    csv.replace(csv.find("late_pmdec_error"), 16, "late_pmdec_errr");
    test::write_text(in, csv);
    std::string err;
    CHECK(run_heft("screen " + in + " -o " + in + ".out", &err) == 2);
    CHECK(err.find("late_pmdec_error") != std::string::npos);
  }
  SECTION("empty file") {
    const std::string in = tmp_path("empty.csv");
    test::write_text(in, "");
    std::string err;
    CHECK(run_heft("screen " + in, &err) == 2);
    CHECK(err.find("empty file") != std::string::npos);
  }
}

TEST_CASE("screen: rows over several chunks, read ahead while screening", "[cli][screen]") {
  // Rows go through in chunks of 512, the next chunk read while the
  // current one is screened: the output, a duplicate id whose first copy is
  // in an earlier chunk, and the first error must not depend on the threads.
  std::vector<StarRecord> many;
  for (int i = 0; i < 4500; ++i) many.push_back(good_star("S" + std::to_string(i), 0.01 * (i % 7)));
  many[3000].id = "S10";  // chunk 5 repeats an id of chunk 0
  const std::string csv = table_of(many);
  const std::string in = tmp_path("chunks.csv");
  test::write_text(in, csv);
  std::string first;
  for (const char* j : {"1", "2"}) {
    const std::string out = in + ".j" + j + ".out";
    CHECK(run_heft(std::string("screen -q -j ") + j + " " + in + " -o " + out) == 4);
    const test::Table t = test::read_table(out);
    REQUIRE(t.rows.size() == 4500);
    CHECK(t.str(3000, "status") == "bad_input:duplicate_id");
    CHECK(t.str(10, "status") == "ok");
    int duplicates = 0;  // the id table grew three times on the way and kept S10 only
    for (std::size_t r = 0; r < t.rows.size(); ++r) duplicates += t.str(r, "status") == "bad_input:duplicate_id";
    CHECK(duplicates == 1);
    CHECK(t.str(4499, "id") == "S4499");
    if (first.empty()) first = test::read_text(out);
    else CHECK(test::read_text(out) == first);
  }
  // A bad number in chunk 4 (line 2,502) and a row that does not read in
  // chunk 5 (line 2,602), read while chunk 4 is parsed: the number first.
  std::string two = set_field(csv, 2500, "late_pmra", "1.2.3");
  two.insert(test::line_start(two, 2602), "S-short,1991.25\n");
  test::write_text(in, two);
  check_first_error(in, in + ":2502:");
  // Without it, the short row.
  test::write_text(in, set_field(two, 2500, "late_pmra", "1.0"));
  check_first_error(in, in + ":2602: row has");
}

TEST_CASE("screen accepts header-only, CRLF, BOM, quotes and comments", "[cli][screen]") {
  const std::string base = table_of({good_star("A"), good_star("B", 0.3)});
  const std::string ref_in = tmp_path("fmt_ref.csv"), ref_out = tmp_path("fmt_ref.out");
  test::write_text(ref_in, base);
  REQUIRE(run_heft("screen -q " + ref_in + " -o " + ref_out) == 0);
  const std::string expected = test::read_text(ref_out);

  std::string crlf;
  for (char c : base) {
    if (c == '\n') crlf += '\r';
    crlf += c;
  }
  std::string fancy = "\xEF\xBB\xBF# survey extract, comment line\n" + base;
  fancy.replace(fancy.find("\nA,"), 3, "\n\"A\",");
  fancy += "# trailing comment\n\n";
  for (const auto& [name, text] : std::vector<std::pair<std::string, std::string>>{
           {"crlf", crlf}, {"fancy", fancy}}) {
    const std::string in = tmp_path("fmt_" + name + ".csv"), out = in + ".out";
    test::write_text(in, text);
    REQUIRE(run_heft("screen -q " + in + " -o " + out) == 0);
    CHECK(test::read_text(out) == expected);
  }
  const std::string hdr = tmp_path("fmt_header_only.csv");
  test::write_text(hdr, star_table_header());
  REQUIRE(run_heft("screen -q " + hdr + " -o " + hdr + ".out") == 0);
  CHECK(test::read_text(hdr + ".out") == screen_header());
}

TEST_CASE("screen applies frame corrections and error calibration", "[cli][screen]") {
  // Spin pattern: a +Z spin of w uas/yr adds w cos(dec) to pmra
  // (Lindegren et al. 2018, Eq. 5); heft subtracts it from the late PMs.
  const std::string in = tmp_path("calib.csv"), out = tmp_path("calib.out"),
                    ref = tmp_path("calib_ref.out");
  test::write_text(in, table_of({good_star("A")}));
  REQUIRE(run_heft("screen -q " + in + " -o " + ref) == 0);
  REQUIRE(run_heft("screen -q " + in + " -o " + out + " --late-spin 0,0,100") == 0);
  const double cosd = std::cos(units::deg_to_rad(-5.4));
  const auto a = test::read_table(ref), b = test::read_table(out);
  CHECK(b.num(0, "dpm_late_ra") - a.num(0, "dpm_late_ra") == Approx(-0.1 * cosd).epsilon(1e-6));
  // Inflation by 2 doubles the late-only terms; a floor adds in quadrature.
  REQUIRE(run_heft("screen -q " + in + " -o " + out + " --late-floor 0.05") == 0);
  const double e0 = a.num(0, "dpm_late_dec_error"), e1 = test::read_table(out).num(0, "dpm_late_dec_error");
  CHECK(e1 * e1 - e0 * e0 == Approx(0.05 * 0.05).epsilon(1e-6));
  const std::string table = tmp_path("spin_table.csv");
  test::write_text(table, "mag_min,mag_max,wx,wy,wz\n0,10.5,0,0,100\n10.5,13,0,0,0\n");
  std::string with_mag = table_of({good_star("A")});
  REQUIRE(run_heft("screen -q " + in + " -o " + out + " --late-spin-table " + table) == 0);
  CHECK(test::read_table(out).str(0, "notes").find("no_spin_bin") != std::string::npos);
  test::write_text(table, "mag_min,mag_max,wx,wy,wz\n0,10.5,0,0,abc\n");
  std::string err;
  CHECK(run_heft("screen -q " + in + " -o " + out + " --late-spin-table " + table, &err) == 2);
  CHECK(err.find(table + ":2:12") != std::string::npos);
}
