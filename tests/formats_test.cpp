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

TEST_CASE("ensemble: a correlated 2-D Gaussian comes out with its moments", "[ensemble]") {
  // Source: the target's own moments (definition): mean (1, -2), sigmas
  // (1, 3), correlation 0.9. Monte Carlo tolerance: the effective number of
  // independent draws is steps * walkers / tau; bounds at about 4 standard errors.
  const double m1 = 1.0, m2 = -2.0, s1 = 1.0, s2 = 3.0, rho = 0.9;
  auto log_prob = [&](const double* x) {
    const double u = (x[0] - m1) / s1, v = (x[1] - m2) / s2;
    return -0.5 * (u * u - 2 * rho * u * v + v * v) / (1 - rho * rho);
  };
  Rng rng = Rng::for_star(3, "ensemble");
  const int walkers = 32;
  Eigen::MatrixXd start(2, walkers);
  for (int k = 0; k < walkers; ++k) start.col(k) << rng.normal() * 0.1, -2.0 + rng.normal() * 0.1;
  EnsembleOptions opt;
  opt.steps = 4000;
  opt.burn = 1000;
  opt.thin = 2;
  opt.seed = 9;
  const EnsembleChain c = run_ensemble(log_prob, start, opt);
  const Eigen::MatrixXd& s = c.samples;
  REQUIRE(s.rows() == static_cast<Eigen::Index>(opt.steps / opt.thin) * walkers);
  const Eigen::RowVectorXd mean = s.colwise().mean();
  const Eigen::MatrixXd centred = s.rowwise() - mean;
  const Eigen::MatrixXd cov = centred.transpose() * centred / static_cast<double>(s.rows() - 1);
  const double tau = std::max(c.iat_steps[0], c.iat_steps[1]);
  const double n_eff = opt.steps * walkers / tau;
  INFO("tau " << tau << " steps, acceptance " << c.acceptance << ", n_eff " << n_eff);
  CHECK(n_eff > 1000);
  CHECK(std::abs(mean(0) - m1) < 4 * s1 / std::sqrt(n_eff));
  CHECK(std::abs(mean(1) - m2) < 4 * s2 / std::sqrt(n_eff));
  CHECK(std::sqrt(cov(0, 0)) == Approx(s1).epsilon(4 / std::sqrt(2 * n_eff)));
  CHECK(std::sqrt(cov(1, 1)) == Approx(s2).epsilon(4 / std::sqrt(2 * n_eff)));
  CHECK(cov(0, 1) / std::sqrt(cov(0, 0) * cov(1, 1)) == Approx(rho).margin(4 * (1 - rho * rho) / std::sqrt(n_eff)));
  // The stretch move accepts roughly a third to a half of its proposals in
  // two dimensions (Goodman & Weare 2010; from memory).
  CHECK(c.acceptance > 0.3);
  CHECK(c.acceptance < 0.8);
}
