// Round trips of the files heft writes and reads back, and the ensemble
// sampler on a density with known moments (tests for parts that had none).
#include <catch2/catch.hpp>
#include <cmath>
#include <fstream>
#include <sstream>

#include "heft/draws.hpp"
#include "heft/ensemble.hpp"
#include "heft/rng.hpp"
#include "heft/starfile.hpp"
#include "test_util.hpp"

using namespace heft;

TEST_CASE("formats: orbit draws write and read back to the bit", "[formats]") {
  Rng rng = Rng::for_star(5, "draws");
  std::string text = draws_header();
  std::vector<std::pair<std::string, OrbitDraw>> written;
  for (int k = 0; k < 50; ++k) {
    const OrbitDraw d{rng.log_uniform(0.5, 500), rng.log_uniform(0.1, 200), rng.uniform(0, 0.95),
                      rng.uniform(0, 180),       rng.uniform(0, 360),       rng.uniform(0, 360),
                      rng.uniform(0, 360),       2016.0,                    rng.log_uniform(0.3, 1e4),
                      rng.uniform(1, 100),       rng.uniform(0.5, 1.5),     rng.uniform()};
    const std::string id = k < 30 ? "S1" : "\"S,2\"";  // a quoted id with a comma
    written.emplace_back(k < 30 ? "S1" : "\"S,2\"", d);
    append_draw_row(text, id, d);
  }
  std::istringstream in(text);
  const auto stars = read_draws(in, "d.csv");
  REQUIRE(stars.size() == 2);
  CHECK(stars[0].id == "S1");
  CHECK(stars[1].id == "\"S,2\"");
  REQUIRE(stars[0].draws.size() == 30);
  REQUIRE(stars[1].draws.size() == 20);
  for (int k = 0; k < 50; ++k) {
    const OrbitDraw& a = written[k].second;
    const OrbitDraw& b = stars[k < 30 ? 0 : 1].draws[k < 30 ? k : k - 30];
    CHECK(a.a_au == b.a_au);
    CHECK(a.mass_mjup == b.mass_mjup);
    CHECK(a.mean_anom_deg == b.mean_anom_deg);
    CHECK(a.period_yr == b.period_yr);
    CHECK(a.weight == b.weight);
  }
}

TEST_CASE("formats: the star file writes and reads back to the bit", "[formats]") {
  std::ifstream f(std::string(HEFT_SOURCE_DIR) + "/demo/followup/KMG-00754.json");
  const StarFile a = read_star_file(f, "KMG-00754.json");
  std::istringstream again(star_file_json(a));
  const StarFile b = read_star_file(again, "again.json");
  CHECK(star_file_json(b) == star_file_json(a));
  CHECK(b.star.id == a.star.id);
  CHECK(b.star.late.pmra_mas_yr == a.star.late.pmra_mas_yr);
  CHECK(b.star.early.covariance() == a.star.early.covariance());
  REQUIRE(b.relative.size() == a.relative.size());
  for (std::size_t k = 0; k < a.relative.size(); ++k) {
    CHECK(b.relative[k].v1 == a.relative[k].v1);
    CHECK(b.relative[k].e2 == a.relative[k].e2);
  }
  CHECK(b.host_mass.center_msun == a.host_mass.center_msun);
  CHECK(b.host_mass.width == a.host_mass.width);
}
