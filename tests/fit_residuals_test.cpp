// The deep fit's Ceres problem: one residual block per observation type,
// adding up to the model's negative log posterior.
//
// <ceres/ceres.h> comes first and its glog CHECK macro is dropped, so that
// CHECK below is Catch's (heft's public headers never include glog).
#include <ceres/ceres.h>
#undef CHECK
#include <catch2/catch.hpp>

#include <fstream>

#include "heft/fit.hpp"
#include "test_util.hpp"

using namespace heft;

TEST_CASE("fit: one residual block per observation, adding up to the model's posterior", "[fit]") {
  // The demo follow-up star (four imaging epochs) with two invented RVs of
  // one instrument, so that every observation type has its block.
  std::ifstream in(std::string(HEFT_SOURCE_DIR) + "/demo/followup/KMG-00754.json");
  StarFile f = read_star_file(in, "KMG-00754.json");
  f.instruments = {"spectrograph"};
  f.rv = {{2020.0, 15.0, 5.0, 0}, {2022.0, -10.0, 5.0, 0}};
  const ScreenRow row = screen_star(f.star, "", ScreenOptions{});
  REQUIRE(row.ok());
  const FitModel m(f, row.result, FitOptions{});
  Rng rng(7);
  for (int trial = 0; trial < 5; ++trial) {
    Eigen::VectorXd p = m.prior_draw(rng);
    std::vector<double> r(m.n_residuals());
    double extra = 0.0;
    REQUIRE(m.evaluate(p.data(), r.data(), extra));
    double rr = 0.0;
    for (double v : r) rr += v * v;
    ceres::Problem problem;
    const Pinned none;
    add_residual_blocks(problem, m, none, p);
    CHECK(problem.NumResidualBlocks() == 1 + 4 + 2 + 1);  // anomaly, 4 epochs, 2 RVs, priors
    CHECK(problem.NumResiduals() == m.n_residuals());
    double cost = 0.0;
    REQUIRE(problem.Evaluate(ceres::Problem::EvaluateOptions(), &cost, nullptr, nullptr, nullptr));
    CHECK(2.0 * cost == Approx(rr).epsilon(1e-13));
    // -ln posterior = r.r / 2 + extra (the RV log-normalisers and the
    // non-Gaussian prior terms).
    CHECK(m.neg_log_post(p.data()) == Approx(0.5 * rr + extra).epsilon(1e-13));
  }
}
