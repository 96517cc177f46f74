// Deep fit: optimiser pulls on simulated systems, the visual-binary worked
// example, upper limits, star-file errors.

#include <catch2/catch.hpp>
#include <cmath>
#include <sstream>

#include "heft/error.hpp"
#include "heft/fit.hpp"
#include "heft/simulate.hpp"
#include "test_util.hpp"

using namespace heft;

namespace {

SurveyModel imaged_survey(std::uint64_t seed) {
  SurveyModel m;
  m.seed = seed;
  m.companion_fraction = 1.0;
  m.companion_mass_mjup = {Distribution::Kind::kLogUniform, 10.0, 80.0};
  m.a_au = {Distribution::Kind::kLogUniform, 3.0, 12.0};
  m.distance_pc = {Distribution::Kind::kUniform, 10.0, 40.0};
  m.ecc = {Distribution::Kind::kUniform, 0.0, 0.6};
  m.host_mass_rel_error = 0.05;
  m.rv_fraction = 1.0;
  return m;
}

}  // namespace

TEST_CASE("fit: optimiser recovers injected mass, a and e within the Ceres covariance", "[fit]") {
  // Injection-recovery (common practice, no source): pulls of the best fit
  // against the truth should be standard normal.
  const SurveyModel sm = imaged_survey(7);
  FitOptions opt;
  opt.sample = false;
  opt.starts = 32;
  std::vector<double> pulls[3];
  int used = 0;
  for (long i = 0; used < 24 && i < 200; ++i) {
    StarRecord star;
    SimTruth truth;
    const ScreenRow row = test::simulate_and_screen(sm, i, star, truth);
    if (!row.ok()) continue;
    bool ok = false;
    StarFile f = star_file_of(star, kAbsent, kAbsent, ok);
    REQUIRE(ok);
    Rng rng = Rng::for_star(99, star.id);
    for (double t : {2016.0, 2019.0, 2022.0, 2025.0})
      f.relative.push_back(observe_companion(truth, star.late.epoch_yr, t, 0.5, 0.1, rng));
    const FitModel model(f, row.result, opt);
    const FitResult r = run_fit(model, opt, star.id);
    const FitMinimum& b = r.minima.front();
    if (!b.covariance_ok) continue;
    ++used;
    const double tv[3] = {truth.mass_mjup, truth.a_au, truth.ecc};
    for (int k = 0; k < 3; ++k) pulls[k].push_back((b.derived[k] - tv[k]) / b.derived_sigma[k]);
  }
  REQUIRE(used >= 20);
  for (int k = 0; k < 3; ++k) {
    double m = 0, s2 = 0;
    for (double v : pulls[k]) m += v;
    m /= pulls[k].size();
    for (double v : pulls[k]) s2 += (v - m) * (v - m);
    const double sd = std::sqrt(s2 / (pulls[k].size() - 1));
    INFO(derived_names()[k] << ": pull mean " << m << ", sd " << sd << ", n " << pulls[k].size());
    CHECK(std::abs(m) < 0.5);
    CHECK(std::abs(sd - 1.0) < 0.4);
  }
}
