// heft predict and heft plot sky end to end.
#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <sstream>
#include "heft/draws.hpp"
#include "heft/error.hpp"
#include "heft/predict.hpp"
#include "heft/rng.hpp"
#include "heft/stats.hpp"
#include "test_util.hpp"
using namespace heft;

TEST_CASE("heft predict and plot sky from fit samples, bad draw tables", "[predict][cli]") {
  const std::string draws = test::tmp_path("pred_draws.csv"), summary = test::tmp_path("pred.csv"),
                    grid = test::tmp_path("pred_grid.csv"), svg = test::tmp_path("sky.svg"),
                    png = test::tmp_path("sky.png");
  std::string text = draws_header();
  for (const auto& d : test::face_on_ring(500, 9)) append_draw_row(text, "RING-1", d);
  test::write_text(draws, text);
  REQUIRE(test::run_heft("predict -q " + draws + " --date 2027.5,2028 --iwa 150 --owa 250 -o " + summary +
                         " --grid " + grid + " --grid-size 40") == 0);
  const test::Table t = test::read_table(summary);
  REQUIRE(t.rows.size() == 2);
  CHECK(t.num(0, "sep_med") == Approx(200.0));
  CHECK(t.num(1, "p_in_wa") == Approx(1.0));
  CHECK(test::read_table(grid).rows.size() == 2 * 40 * 40);
  // docs/formats.md, JSON outputs: "stars", q-keyed quantiles, units.
  const std::string js = test::tmp_path("pred.json");
  REQUIRE(test::run_heft("predict -q " + draws + " --date 2027.5 -o " + test::tmp_path("predict_discard.csv") + " --json " + js) == 0);
  const auto j = nlohmann::json::parse(test::read_text(js));
  REQUIRE(j["stars"].size() == 1);
  CHECK(j["stars"][0]["sep_mas"]["q50"].get<double>() == t.num(0, "sep_med"));
  CHECK(j["run"]["units"]["sep_med"] == "mas");
  REQUIRE(test::run_heft("plot sky " + grid + " --iwa 150 --owa 250 --date 2028 -o " + svg) == 0);
  CHECK(test::read_text(svg).find("outer working angle") != std::string::npos);
  CHECK(test::read_text(svg).find("68 % credible region") != std::string::npos);
  CHECK(test::read_text(svg).find("posterior density (per mas") != std::string::npos);
  std::remove(png.c_str());
  // Rendering check with rsvg-convert (librsvg2-bin, Debian).
  REQUIRE(std::system(("rsvg-convert " + svg + " -o " + png).c_str()) == 0);
  // Bad tables name file, line and column.
  std::string err;
  std::string bad = text;
  const auto line2 = bad.find('\n') + 1;
  bad.replace(bad.find(",10,", line2), 4, ",-3,");
  test::write_text(draws, bad);
  CHECK(test::run_heft("predict -q " + draws + " --date 2027", &err) == 2);
  CHECK_THAT(err, Catch::Contains(":2:") && Catch::Contains("a_au"));
  test::write_text(draws, "id,a_au\nX,1\n");
  CHECK(test::run_heft("predict -q " + draws + " --date 2027", &err) == 2);
  CHECK_THAT(err, Catch::Contains("missing required column"));
}
