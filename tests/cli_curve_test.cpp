// heft curve and heft plot curve end to end: determinism, JSON, bad input, SVG.
#include <catch2/catch.hpp>
#include <cstdio>
#include <fstream>
#include <set>
#include <nlohmann/json.hpp>
#include "heft/calibration.hpp"
#include "heft/curve.hpp"
#include "heft/screen.hpp"
#include "test_util.hpp"
using namespace heft;

TEST_CASE("heft curve CLI: deterministic, modes in JSON, bad input", "[curve][cli]") {
  const std::string stars = test::tmp_path("curve_stars.csv");
  REQUIRE(test::run_heft("simulate -q --stars 6 --seed 31 --companion-fraction 0.5 --a loguniform:2,10 "
                         "--companion-mass loguniform:20,80 --distance uniform:20,40 -o " + stars) == 0);
  const std::string o1 = test::tmp_path("curve1.csv"), o2 = test::tmp_path("curve2.csv"),
                    js = test::tmp_path("curve.json");
  const std::string args = "curve -q --all " + stars + " --n-a 6 --draws 256 --a-min 1 --a-max 100 ";
  REQUIRE(test::run_heft(args + "-j 1 -o " + o1 + " --json " + js) == 0);
  REQUIRE(test::run_heft(args + "-j 2 -o " + o2) == 0);
  CHECK(test::read_text(o1) == test::read_text(o2));
  const auto t = test::read_table(o1);
  CHECK(t.header == std::vector<std::string>{"id", "a_au", "sep_mas", "period_yr", "weight", "mass_lo95",
                                             "mass_lo68", "mass_med", "mass_hi68", "mass_hi95", "notes"});
  const auto j = nlohmann::json::parse(test::read_text(js));
  REQUIRE(j["stars"].size() == 6);
  // docs/formats.md, JSON outputs: quantiles keyed q<percent>, the CSV's
  // numbers to the bit, units in the run object.
  bool compared = false;
  for (const auto& s : j["stars"]) {
    CHECK((s["mode"] == "detection" || s["mode"] == "upper_limit"));
    CHECK(s["dark_companion_assumed"] == true);
    for (const auto& p : s["points"]) {
      const auto& m = p["mass_mjup"];
      const std::vector<std::string> keys = s["mode"] == "detection"
                                                ? std::vector<std::string>{"q16", "q2.5", "q50", "q84", "q97.5"}
                                                : std::vector<std::string>{"q68", "q95"};
      std::vector<std::string> got, got_err;
      for (const auto& [k, v] : m.items()) got.push_back(k);
      CHECK(got == keys);
      // their Monte Carlo errors under the same keys: positive, or null
      // (below 100 effective samples, or one sample holding the quantile)
      for (const auto& [k, v] : p["mass_mjup_error"].items()) {
        got_err.push_back(k);
        CHECK((v.is_null() || v.get<double>() > 0.0));
        if (p["ess"].get<double>() < 100.0) CHECK(v.is_null());
      }
      CHECK(got_err == keys);
      // the effective number of orbit draws beside it (docs/formats.md)
      const double ess = p["ess"].get<double>(), orbits = p["ess_orbits"].get<double>();
      CHECK(orbits <= ess * (1.0 + 1e-12));
      CHECK(orbits >= ess / 8.0 * (1.0 - 1e-12));
      // the draws and rounds spent on it: at least the first block of an
      // eighth of --draws, at most four rounds of them (docs/method.md)
      const long draws = p["draws"].get<long>(), draws_option = 256;
      const int rounds = p["rounds"].get<int>();
      CHECK(rounds >= 1);
      CHECK(rounds <= 4);
      CHECK(draws >= draws_option / 8);
      CHECK(draws <= rounds * draws_option);
    }
    if (compared || s["mode"] != "detection") continue;
    for (std::size_t r = 0; r < t.rows.size(); ++r)
      if (t.str(r, "id") == s["id"] && t.num(r, "a_au") == s["points"][0]["a_au"].get<double>()) {
        CHECK(s["points"][0]["mass_mjup"]["q50"].get<double>() == t.num(r, "mass_med"));
        compared = true;
        break;
      }
  }
  CHECK(compared);
  CHECK(j["run"]["units"]["sep_mas"] == "mas");
  CHECK(j["run"]["units"]["mass_med"] == "Mjup");
  CHECK(j["run"]["mass_prior"]["upper_limit"].get<std::string>().find("uniform in companion mass on [0, m_max]") == 0);
  // Empty mass values and no --host-mass: bad_input:no_host_mass, exit 4.
  const auto tab = test::read_table(stars);
  std::string csv;
  for (std::size_t i = 0; i < tab.header.size(); ++i) csv += (i ? "," : "") + tab.header[i];
  csv += "\n";
  for (auto row : tab.rows) {
    row[tab.col("mass")] = "";
    for (std::size_t i = 0; i < row.size(); ++i) csv += (i ? "," : "") + row[i];
    csv += "\n";
  }
  const std::string no_mass = test::tmp_path("curve_nomass.csv"), js2 = test::tmp_path("curve_nomass.json");
  test::write_text(no_mass, csv);
  CHECK(test::run_heft(args.substr(0, 15) + no_mass + " --n-a 3 --draws 64 -o " + test::tmp_path("curve_discard.csv") + " --json " + js2) == 4);
  CHECK(nlohmann::json::parse(test::read_text(js2))["stars"][0]["status"] == "bad_input:no_host_mass");
  CHECK(test::run_heft(args.substr(0, 15) + no_mass + " --n-a 3 --draws 64 -o " + test::tmp_path("curve_discard.csv") + " --host-mass 1.1") == 0);
  std::string err;
  CHECK(test::run_heft("curve -q " + stars + " --id NOPE", &err) == 2);
  CHECK(err.find("NOPE") != std::string::npos);
  CHECK(test::run_heft("curve -q --all " + stars + " --ecc beta:1", &err) == 1);  // a bad option value is a usage error
  CHECK(test::run_heft("curve -q --all " + stars + " --quantile-tolerance 1.5", &err) == 1);
  CHECK(test::run_heft("curve -q --all " + stars + " --method analytic --quantile-tolerance 0.1", &err) == 1);
  CHECK_THAT(err, Catch::Contains("--method montecarlo only"));
  // The Monte Carlo curve's eccentricities stop at 0.99: a prior wholly
  // beyond is refused (it was computed at 0.99 without a word), one that
  // reaches beyond is cut there.
  CHECK(test::run_heft("curve -q --all " + stars + " --ecc 0.995", &err) == 1);
  CHECK_THAT(err, Catch::Contains("0.99"));
  CHECK(test::run_heft("rank -q " + stars + " --date 2027.5 --ecc uniform:0.991,0.999 -o " +
                       test::tmp_path("curve_discard.csv"), &err) == 1);
  CHECK(test::run_heft("curve -q --all " + stars + " --method analytic --ecc 0.995 -o " +
                       test::tmp_path("curve_discard.csv")) == 0);  // no Monte Carlo, no cut
  // Which stars is always said (a curve costs seconds): none of --id, --ids,
  // --all is a usage error; --ids names the ids it could not find.
  CHECK(test::run_heft("curve -q " + stars, &err) == 1);
  CHECK_THAT(err, Catch::Contains("--ids FILE"));
  const std::string ids = test::tmp_path("curve_ids.txt"), two = test::tmp_path("curve_two.csv");
  test::write_text(ids, "# two of them\n" + t.str(0, "id") + "\n" + t.str(t.rows.size() - 1, "id") + "\n");
  REQUIRE(test::run_heft("curve -q " + stars + " --n-a 6 --draws 256 --a-min 1 --a-max 100 --ids " + ids +
                         " -o " + two) == 0);
  std::set<std::string> got;
  for (const auto& row : test::read_table(two).rows) got.insert(row[0]);
  CHECK(got == std::set<std::string>{t.str(0, "id"), t.str(t.rows.size() - 1, "id")});
  test::write_text(ids, "NOPE-1\n" + t.str(0, "id") + "\n");
  CHECK(test::run_heft("curve -q " + stars + " --ids " + ids + " -o " + test::tmp_path("curve_discard.csv"), &err) == 2);
  CHECK_THAT(err, Catch::Contains("'NOPE-1'"));
}

TEST_CASE("heft curve: many stars, one curve per thread, in table order whatever the threads", "[curve][cli]") {
  // 40 stars: three batches with one thread (16 stars each), two with two.
  const std::string stars = test::tmp_path("curve_many.csv");
  REQUIRE(test::run_heft("simulate -q --stars 40 --seed 77 --companion-fraction 0.5 -o " + stars) == 0);
  const std::string args = "curve -q --all " + stars + " --n-a 3 --draws 64 ";
  std::string outs[2];
  for (int j : {1, 2}) {
    const std::string o = test::tmp_path("curve_many" + std::to_string(j));
    REQUIRE(test::run_heft(args + "-j " + std::to_string(j) + " -o " + o + ".csv --json " + o + ".json --keep-draws " +
                           o + ".draws.csv") == 0);
    outs[j - 1] = test::read_text(o + ".csv") + test::read_text(o + ".json") + test::read_text(o + ".draws.csv");
  }
  CHECK(outs[0] == outs[1]);
  // Rows in the table's order.
  const auto tab = test::read_table(stars);
  std::vector<std::string> order;
  for (const auto& row : test::read_table(test::tmp_path("curve_many2.csv")).rows)
    if (order.empty() || order.back() != row[0]) order.push_back(row[0]);
  std::vector<std::string> want;
  for (std::size_t r = 0; r < tab.rows.size(); ++r) want.push_back(tab.str(r, "id"));
  CHECK(order == want);
  // A row that does not read, after a batch's worth of good ones: the
  // error names its line, and no output is left behind.
  std::string text = test::read_text(stars);
  const std::size_t at = test::line_start(text, 35);
  text.insert(text.find('\n', at), ",1");  // one field too many
  const std::string broken = test::tmp_path("curve_many_broken.csv"), o = test::tmp_path("curve_many_broken.out.csv");
  test::write_text(broken, text);
  std::remove(o.c_str());
  for (int j : {1, 2}) {
    std::string err;
    CHECK(test::run_heft("curve -q --all " + broken + " --n-a 3 --draws 64 -j " + std::to_string(j) + " -o " + o,
                         &err) == 2);
    CHECK_THAT(err, Catch::Contains(":35:"));
    CHECK(!std::ifstream(o).good());
  }
}

TEST_CASE("heft plot curve writes an SVG that renders", "[curve][cli][plot]") {
  // Rendering check with rsvg-convert (librsvg2-bin, Debian).
  const std::string stars = test::tmp_path("plot_stars.csv"), curve = test::tmp_path("plot_curve.csv"),
                    svg = test::tmp_path("plot.svg"), png = test::tmp_path("plot.png");
  REQUIRE(test::run_heft("simulate -q --stars 3 --seed 8 --companion-fraction 1 --a loguniform:3,10 "
                         "--companion-mass loguniform:30,60 --distance uniform:20,30 -o " + stars) == 0);
  REQUIRE(test::run_heft("curve -q --all " + stars + " --n-a 8 --draws 256 -o " + curve) == 0);
  const std::string truth = test::tmp_path("plot_truth.csv");
  REQUIRE(test::run_heft("simulate -q --stars 3 --seed 8 --companion-fraction 1 --a loguniform:3,10 "
                         "--companion-mass loguniform:30,60 --distance uniform:20,30 -o " + stars + " --truth " + truth) == 0);
  REQUIRE(test::run_heft("plot curve " + curve + " --iwa 80 --owa 2000 --prior-mass 1,200 --truth " + truth + " -o " + svg) == 0);
  const std::string text = test::read_text(svg);
  CHECK(text.find("<svg") != std::string::npos);
  CHECK(text.find("semi-major axis a (AU)") != std::string::npos);
  CHECK(text.find("angular semi-major axis a x parallax (mas)") != std::string::npos);
  CHECK(text.find("deuterium burning") != std::string::npos);
  CHECK(text.find("inner working angle") != std::string::npos);
  CHECK(text.find("prior upper bound") != std::string::npos);
  CHECK(text.find("injected companion") != std::string::npos);
  // One weight bar per separation with weight (8 points, refined).
  const std::string bar_fill = "fill=\"#fd8d3c\" fill-opacity";
  std::size_t bars = 0;
  for (auto at = text.find(bar_fill); at != std::string::npos; at = text.find(bar_fill, at + 1)) ++bars;
  CHECK(bars >= 8);
  std::remove(png.c_str());
  REQUIRE(std::system(("rsvg-convert " + svg + " -o " + png).c_str()) == 0);
  CHECK(test::read_text(png).size() > 5000);
  // A malformed curve table names file, line and column.
  std::string bad = test::read_text(curve);
  const auto second = bad.find('\n') + 1;
  const auto comma = bad.find(',', second);
  bad.replace(comma + 1, bad.find(',', comma + 1) - comma - 1, "x1");
  test::write_text(curve, bad);
  std::string err;
  CHECK(test::run_heft("plot curve " + curve + " -o " + svg, &err) == 2);
  CHECK(err.find(curve + ":2:") != std::string::npos);
}
