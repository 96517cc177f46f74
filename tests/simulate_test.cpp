#include <catch2/catch.hpp>
#include <cmath>

#include "heft/screen.hpp"
#include "heft/simulate.hpp"
#include "heft/stats.hpp"
#include "test_util.hpp"

using namespace heft;

namespace {
double chi2_2_cdf(double x) { return 1.0 - std::exp(-0.5 * x); }
}  // namespace

TEST_CASE("simulated single stars screen to chi2(2)", "[simulate]") {
  // Source: chi2 of whitened Gaussian 2-vectors is chi2(2) (statistics);
  // KS test with a fixed seed, p > 0.01.
  SurveyModel m;
  m.n_stars = 20000;
  m.seed = 77;
  m.companion_fraction = 0.0;
  std::vector<double> late, early;
  StarRecord s;
  SimTruth t;
  for (long i = 0; i < m.n_stars; ++i) {
    const ScreenRow r = test::simulate_and_screen(m, i, s, t);
    REQUIRE(r.ok());
    late.push_back(r.result.chi2_late);
    early.push_back(r.result.chi2_early);
  }
  double p_late, p_early;
  const double d = ks_test(late, chi2_2_cdf, p_late);
  ks_test(early, chi2_2_cdf, p_early);
  INFO("KS D = " << d << ", p_late = " << p_late << ", p_early = " << p_early);
  CHECK(p_late > 0.01);
  CHECK(p_early > 0.01);
  // The KS test itself can fail: chi2(4) values are rejected as chi2(2).
  std::vector<double> wrong;
  for (long i = 0; i + 1 < m.n_stars; i += 2) wrong.push_back(late[i] + late[i + 1]);
  double p_wrong;
  ks_test(wrong, chi2_2_cdf, p_wrong);
  CHECK(p_wrong < 1e-6);
}

TEST_CASE("injection-recovery: recovered anomalies scatter by their errors", "[simulate]") {
  // Pull = (recovered dpm_late - noiseless truth) / reported error: mean 0 +- 0.05
  // and standard deviation 1 +- 0.05 per axis (statistics, common practice).
  SurveyModel m;
  m.n_stars = 6000;
  m.seed = 4242;
  m.companion_fraction = 0.5;
  double sum[2] = {0, 0}, sum2[2] = {0, 0};
  long n = 0;
  StarRecord s;
  SimTruth t;
  for (long i = 0; i < m.n_stars; ++i) {
    const ScreenRow r = test::simulate_and_screen(m, i, s, t);
    REQUIRE(r.ok());
    const double pr = (r.result.dpm_late_mas_yr.x() - t.dpm_late_ra) / std::sqrt(r.result.dpm_cov(0, 0));
    const double pd = (r.result.dpm_late_mas_yr.y() - t.dpm_late_dec) / std::sqrt(r.result.dpm_cov(1, 1));
    sum[0] += pr; sum2[0] += pr * pr;
    sum[1] += pd; sum2[1] += pd * pd;
    ++n;
  }
  for (int k = 0; k < 2; ++k) {
    const double mean = sum[k] / n, sd = std::sqrt(sum2[k] / n - mean * mean);
    INFO("axis " << k << ": mean " << mean << ", sd " << sd);
    CHECK(std::abs(mean) < 0.05);
    CHECK(std::abs(sd - 1.0) < 0.05);
  }
}

TEST_CASE("simulated companions produce the expected anomaly scale", "[simulate]") {
  // A companion injected with a well-defined orbit gives a noiseless late
  // anomaly of the order of the reflex PM (a window-smeared version of it).
  SurveyModel m;
  m.n_stars = 300;
  m.seed = 5;
  m.companion_fraction = 1.0;
  StarRecord s;
  SimTruth t;
  long big = 0;
  for (long i = 0; i < m.n_stars; ++i) {
    simulate_star(m, i, s, t);
    REQUIRE(t.companion);
    const double q = t.mass_mjup / units::kMjupPerMsun / (t.host_mass_msun + t.mass_mjup / units::kMjupPerMsun);
    const double vmax = q * units::kTwoPi * t.a_au * t.parallax_mas / t.period_yr *
                        std::sqrt((1 + t.ecc) / (1 - t.ecc));  // periastron speed, mas/yr
    const double dpm = std::hypot(t.dpm_late_ra, t.dpm_late_dec);
    CHECK(dpm <= 2.0 * vmax + 1e-9);  // |PM - long-baseline| <= 2 max reflex speed
    big += dpm > 0.1 * vmax;
  }
  CHECK(big > 150);
}

TEST_CASE("simulate_star with a noise seed: same star and truth, another noise realisation", "[simulate]") {
  // Common practice, no source: the noise override of a per-system study
  // (bench/fit_bench demo) must leave everything but the measurement noise.
  SurveyModel m;
  m.seed = 9;
  m.companion_fraction = 1.0;
  m.rv_fraction = 1.0;
  StarRecord s0, s1, s2, s3;
  SimTruth t0, t1, t2, t3;
  simulate_star(m, 4, s0, t0);
  simulate_star(m, 4, s1, t1, 100);
  simulate_star(m, 4, s2, t2, 101);
  simulate_star(m, 4, s3, t3, 100);
  for (const SimTruth* t : {&t1, &t2}) {
    CHECK(t->mass_mjup == t0.mass_mjup);
    CHECK(t->mean_anom_late_deg == t0.mean_anom_late_deg);
    CHECK(t->dpm_late_ra == t0.dpm_late_ra);
  }
  for (const StarRecord* s : {&s1, &s2}) {
    CHECK(s->late.covariance() == s0.late.covariance());
    CHECK(s->early.covariance() == s0.early.covariance());
    CHECK(s->late.pmra_mas_yr != s0.late.pmra_mas_yr);
    CHECK(s->mass_msun != s0.mass_msun);
    CHECK(s->rv_km_s != s0.rv_km_s);
  }
  CHECK(s1.late.pmra_mas_yr != s2.late.pmra_mas_yr);
  // The same noise seed, the same star to the bit.
  CHECK(s3.late.pmra_mas_yr == s1.late.pmra_mas_yr);
  CHECK(s3.early.dec_deg == s1.early.dec_deg);
  CHECK(s3.mass_msun == s1.mass_msun);
  // The noise stays at its stated size: late PM within 6 sigma of the default realisation's.
  CHECK(std::abs(s1.late.pmra_mas_yr - s0.late.pmra_mas_yr) < 6.0 * std::sqrt(2.0) * s0.late.pmra_error_mas_yr);
}
