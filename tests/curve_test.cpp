#include <catch2/catch.hpp>
#include <Eigen/LU>
#include <algorithm>
#include <nlohmann/json.hpp>
#include <random>
#include <set>

#include "heft/calibration.hpp"
#include "heft/curve.hpp"
#include "heft/screen.hpp"
#include "heft/stats.hpp"
#include "test_util.hpp"

using namespace heft;

namespace {
// Data of a companion on orbit o, noiseless, with per-epoch errors.
AnomalyData data_for(const Orbit<double>& o, double a_au, double m2_mjup, double m1, double plx,
                     double err_late, double err_early, const Window& early, const Window& late) {
  const double m2 = m2_mjup / units::kMjupPerMsun, q = m2 / (m1 + m2);
  AnomalyData d;
  d.dpm = model_anomaly(o, a_au, q, plx, early, late);
  d.cov = Eigen::Vector4d(err_late * err_late, err_late * err_late, err_early * err_early,
                          err_early * err_early).asDiagonal();
  d.parallax_mas = plx;
  d.parallax_error_mas = 1e-6;
  d.host_mass_msun = m1;
  d.host_mass_error_msun = 0.0;
  d.sig_joint = 1e3;
  d.early = early;
  d.late = late;
  return d;
}
const Window kEarly{1989.85, 1993.21, 1991.25, {}, {}}, kLate{2014.57, 2017.41, 2016.0, {}, {}};

// System `index` of a coverage population (coverage_survey), screened: its
// anomaly data, truth and whether it could be screened.
struct CoverageSystem {
  std::string id;
  AnomalyData d;
  SimTruth t;
  double sig_joint = 0.0;
  bool ok = false;
};
CoverageSystem coverage_system(const SurveyModel& m, long index) {
  CoverageSystem c;
  StarRecord s;
  simulate_star(m, index, s, c.t);
  c.id = s.id;
  const ScreenRow row = screen_star(s, validate_star(s), ScreenOptions{});
  c.ok = row.ok();
  if (!c.ok) return c;
  bool have_mass = false;
  c.d = anomaly_data(s, row.result, kAbsent, kAbsent, have_mass);
  c.sig_joint = row.result.sig_joint;
  return c;
}

// A star with no significant anomaly (sig_joint 1) at 20 mas.
AnomalyData no_signal_data() {
  AnomalyData d = data_for(Orbit<double>{10, 0, 0, 0, 0, 0, 2016}, 5.0, 0.0, 1.0, 20.0, 0.03, 0.5,
                           kEarly, kLate);
  d.dpm << 0.02, -0.01, 0.3, 0.2;
  d.sig_joint = 1.0;
  return d;
}

// Its curve at 1, 10 and 100 AU.
Curve no_signal_curve(CurveOptions opt) {
  opt.a_au = {1.0, 10.0, 100.0};
  return montecarlo_curve(no_signal_data(), opt, "single");
}
}  // namespace

TEST_CASE("Jupiter-Sun analogue: the curve at 5.2 AU brackets 1 MJup", "[curve]") {
  // Common practice values, no source: 1 MJup at 5.2 AU around 1 Msun, 10 pc.
  const double P = period_from_a(5.2, 1.0 + 1.0 / units::kMjupPerMsun);
  const Orbit<double> o{P, 0.0, 0.0, 0.0, 0.0, 1.0, 2016.0};
  const AnomalyData d = data_for(o, 5.2, 1.0, 1.0, 100.0, 0.002, 0.002, kEarly, kLate);
  CurveOptions opt;
  opt.a_au = {5.2};
  opt.draws = 2048;
  opt.prior.m_min_mjup = 0.01;
  opt.refine_rounds = 0;
  const Curve c = montecarlo_curve(d, opt, "jupiter");
  REQUIRE_FALSE(c.upper_limit);
  const CurvePoint& p = c.points.at(0);
  INFO("band " << p.mass_lo95 << " " << p.mass_lo68 << " " << p.mass_med << " " << p.mass_hi68 << " " << p.mass_hi95);
  CHECK(p.mass_lo95 <= 1.0);
  CHECK(p.mass_hi95 >= 1.0);
  CHECK(p.mass_hi95 < 10.0);
  CHECK(p.ess > 100);
}

TEST_CASE("analytic and Monte Carlo medians agree for circular orbits", "[curve]") {
  // High S/N late anomaly, uninformative early one, P >> window, P << baseline
  // (windows 0.1 yr, baseline ~1000 yr); analytic projection factor = median
  // of the same isotropic orientation distribution (docs/method.md, Sect. 8).
  const Window early{1015.95, 1016.05, 1016.0, {}, {}}, late{2015.95, 2016.05, 2016.0, {}, {}};
  for (double a : {2.0, 8.0}) {
    const double P = period_from_a(a, 1.0);
    const Orbit<double> o{P, 0.0, 1.0, 0.3, 0.7, 2.0, 2016.0};
    AnomalyData d = data_for(o, a, 5.0, 1.0, 50.0, 1e-4, 1e3, early, late);
    CurveOptions opt;
    opt.a_au = {a};
    opt.draws = 4096;
    opt.prior.ecc = {Distribution::Kind::kFixed, 0.0, 0.0};
    opt.refine_rounds = 0;
    const double mc = montecarlo_curve(d, opt, "circ").points.at(0).mass_med;
    const double an = analytic_curve(d, opt).points.at(0).mass_med;
    INFO("a = " << a << ": montecarlo " << mc << ", analytic " << an);
    CHECK(mc == Approx(an).epsilon(0.03));
  }
}

TEST_CASE("curve limits: sqrt(a) law and the turn-up at both ends", "[curve]") {
  // Physics of the relation (Kervella et al. 2019, Sect. 3): for
  // window << P << baseline and m2 << m1, m2 ~ v P / a ~ sqrt(a) at fixed
  // anomaly; with the real windows and baseline the signal is smeared at
  // short periods (window) and at long periods (baseline).
  const Window early{1015.995, 1016.005, 1016.0, {}, {}}, late{2015.995, 2016.005, 2016.0, {}, {}};
  const Orbit<double> o{period_from_a(5.0, 1.0), 0.0, 0.8, 0.0, 0.5, 1.0, 2016.0};
  AnomalyData d = data_for(o, 5.0, 0.5, 1.0, 20.0, 1e-3, 1e3, early, late);
  CurveOptions opt;
  opt.a_au = log_grid(1.0, 30.0, 6);
  opt.draws = 1024;
  opt.prior.m_min_mjup = 1e-3;
  opt.prior.ecc = {Distribution::Kind::kFixed, 0.0, 0.0};
  opt.refine_rounds = 0;
  const Curve c = montecarlo_curve(d, opt, "slope");
  const double slope = std::log(c.points.back().mass_med / c.points.front().mass_med) / std::log(30.0);
  CHECK(slope == Approx(0.5).margin(0.02));

  AnomalyData real = data_for(o, 5.0, 0.5, 1.0, 20.0, 1e-3, 1e3, kEarly, kLate);
  opt.a_au = {0.3, 3.0, 300.0};
  const Curve r = montecarlo_curve(real, opt, "ends");
  auto norm = [&](int k) { return r.points[k].mass_med / std::sqrt(r.points[k].a_au); };
  INFO("m/sqrt(a): " << norm(0) << " " << norm(1) << " " << norm(2));
  CHECK(norm(0) > 1.5 * norm(1));
  CHECK(norm(2) > 1.5 * norm(1));
}

TEST_CASE("upper limits are finite and do not depend on the lower mass bound", "[curve]") {
  // A star with no significant anomaly: prior uniform in mass on [0, m_max].
  CurveOptions opt;
  opt.draws = 1024;
  const Curve a = no_signal_curve(opt);
  opt.prior.m_min_mjup = 5.0;
  const Curve b = no_signal_curve(opt);
  REQUIRE(a.upper_limit);
  for (std::size_t k = 0; k < a.points.size(); ++k) {
    CHECK(std::isfinite(a.points[k].mass_hi95));
    CHECK(a.points[k].mass_hi95 > 0.0);
    CHECK(a.points[k].mass_hi95 >= a.points[k].mass_hi68);
    CHECK(std::isnan(a.points[k].mass_med));
    CHECK(a.points[k].mass_hi95 == b.points[k].mass_hi95);
  }
  double total = 0;
  for (const auto& p : a.points) total += p.weight;
  CHECK(total == Approx(1.0).epsilon(1e-12));
}

TEST_CASE("curve rounds: draws are weighed in blocks until 1,000 effective samples", "[curve]") {
  // The engine's own contract (docs/method.md, Sect. 8; no outside source):
  // a round of prior draws weighs its first eighth of --draws (512) whole,
  // then 64 draws at a time, and stops once the effective sample size
  // reaches 1,000. Without signal the posterior is close to the prior and
  // the size grows about in proportion to the draws, so a separation that
  // goes past its first 512 draws and stops at the first check past the
  // target has a size below 1,000 x used / (used - 64), given 10 % for the
  // weights' scatter. Checked only at the ends of blocks of 512, the
  // separation at 10 AU stopped at 1,024 draws with a size of 1,600.
  CurveOptions opt;
  opt.refine_rounds = 0;
  int past_first_block = 0;
  for (const double a : {1.0, 10.0, 100.0}) {
    opt.a_au = {a};
    const Curve quiet = montecarlo_curve(no_signal_data(), opt, "single");
    const double used = static_cast<double>(quiet.draws_weighed), ess = quiet.points[0].ess;
    INFO("a " << a << ": draws weighed without signal " << used << ", ess " << ess);
    CHECK(quiet.draws_weighed % 64 == 0);
    CHECK(quiet.draws_weighed >= 512);
    CHECK(ess >= 1000.0);
    if (quiet.draws_weighed > 512) {
      ++past_first_block;
      CHECK(ess < 1.1 * 1000.0 * used / (used - 64.0));
    }
  }
  CHECK(past_first_block >= 1);

  // A detection at S/N 15 (noiseless data of 10 MJup at 5 AU) reaches the
  // target within the first round's blocks and its band holds the mass; at
  // S/N 76 the first round runs in full and the adaptive rounds follow.
  const double P = period_from_a(5.0, 1.0);
  const Orbit<double> o{P, 0.3, 1.0, 2.0, 0.5, 1.0, 2016.0};
  opt.a_au = {5.0};
  const AnomalyData mid = data_for(o, 5.0, 10.0, 1.0, 50.0, 0.05, 0.3, kEarly, kLate);
  const Curve c = montecarlo_curve(mid, opt, "mid");
  INFO("draws weighed " << c.draws_weighed << ", ess " << c.points[0].ess);
  CHECK(c.draws_weighed < 4096);
  CHECK(c.points[0].ess >= 1000.0);
  // A lone separation's own count is the curve's (no outside source).
  CHECK(c.points[0].draws == c.draws_weighed);
  CHECK(c.points[0].rounds == 1);
  CHECK(c.points[0].mass_lo95 <= 10.0);
  CHECK(c.points[0].mass_hi95 >= 10.0);
  const AnomalyData loud = data_for(o, 5.0, 10.0, 1.0, 50.0, 0.01, 0.05, kEarly, kLate);
  const Curve h = montecarlo_curve(loud, opt, "loud");
  CHECK(h.draws_weighed > 4096);       // the first round in full, then adaptive rounds
  CHECK(h.draws_weighed <= 4 * 4096);  // at most three of them
  CHECK(h.points[0].draws == h.draws_weighed);
  CHECK(h.points[0].rounds >= 2);
  CHECK(h.points[0].rounds <= 4);
}

TEST_CASE("effective orbits: between ess / z samples and ess, near ess / z samples at high S/N", "[curve]") {
  // Each draw's summed weight squared lies between the sum of its z
  // samples' squared weights and z_samples times it (Cauchy-Schwarz), so
  // ess / z_samples <= ess_orbits <= ess at every point (exact, no outside
  // source). At S/N 76 a draw's z samples carry nearly the same weight
  // and mass, and the effective number of orbits is close to ess / 8
  // (measured 7.7-8.0 on the bench stars, docs/performance.md "Stop 36";
  // no outside source). Flat weights give the same ratio: without signal
  // the ratio says nothing of how alike the samples' masses are.
  CurveOptions opt;
  opt.refine_rounds = 0;
  const double P = period_from_a(5.0, 1.0);
  const Orbit<double> o{P, 0.3, 1.0, 2.0, 0.5, 1.0, 2016.0};
  const Curve quiet = no_signal_curve(opt);
  opt.a_au = {5.0};
  const Curve loud = montecarlo_curve(data_for(o, 5.0, 10.0, 1.0, 50.0, 0.01, 0.05, kEarly, kLate), opt, "loud");
  for (const Curve* c : {&quiet, &loud})
    for (const auto& p : c->points) {
      INFO("a " << p.a_au << " ess " << p.ess << " orbits " << p.ess_orbits);
      CHECK(p.ess_orbits >= p.ess / opt.z_samples * (1.0 - 1e-12));
      CHECK(p.ess_orbits <= p.ess * (1.0 + 1e-12));
    }
  const double loud_ratio = loud.points[0].ess / loud.points[0].ess_orbits;
  INFO("ess / ess_orbits at S/N 76: " << loud_ratio);
  CHECK(loud_ratio > 7.0);
  // Other methods have no draws.
  CurveOptions an;
  an.a_au = {5.0};
  const CurvePoint analytic = analytic_curve(no_signal_data(), an).points[0];
  CHECK(!present(analytic.ess_orbits));
  CHECK(analytic.draws == 0);
  CHECK(analytic.rounds == 0);
}

TEST_CASE("single stars: false-detection rate matches the chosen sigma", "[curve]") {
  // A star is a detection when sig_joint >= --detect-sigma (3): for single
  // stars the rate is 2 Phi(-3) = 0.27 % (chi2(4) converted to a two-sided
  // Gaussian tail; statistics, common practice).
  SurveyModel m;
  m.n_stars = 30000;
  m.seed = 313;
  m.companion_fraction = 0.0;
  long detections = 0;
  StarRecord s;
  SimTruth t;
  for (long i = 0; i < m.n_stars; ++i) {
    const ScreenRow r = test::simulate_and_screen(m, i, s, t);
    REQUIRE(r.ok());
    bool ok;
    const AnomalyData d = anomaly_data(s, r.result, kAbsent, kAbsent, ok);
    detections += d.sig_joint >= CurveOptions{}.prior.detect_sigma;
  }
  CHECK(double(detections) / m.n_stars == Approx(0.0027).margin(0.0011));
}

namespace {
// The coverage of the bands of 1000 seeded systems of the calibration
// population at observed S/N >= min_sig (log-uniform 1-200 MJup, isotropic,
// e uniform 0-0.95; default draws), checked against 68 +- 6 % and
// 95 +- 3 % (Bayesian coverage; statistics, common practice).
Coverage check_detection_coverage(double min_sig) {
  CurveOptions opt;
  opt.prior.m_min_mjup = 1;
  opt.prior.m_max_mjup = 200;
  const Coverage c = curve_coverage(coverage_survey(opt, 1.0, 50.0, 99), opt, 1000, min_sig);
  INFO("S/N >= " << min_sig << ": 68 % band " << c.in68 << ", 95 % band " << c.in95 << ", S/N up to "
                 << c.max_sig << ", median effective orbits " << c.median_ess_orbits);
  CHECK(c.systems == 1000);
  CHECK(c.in68 == Approx(0.68).margin(0.06));
  CHECK(c.in95 == Approx(0.95).margin(0.03));
  return c;
}
}  // namespace

TEST_CASE("calibration: bands cover injected masses at their nominal rates", "[curve][calibration]") {
  // 1000 seeded systems whose masses and orbits follow the curve's own prior
  // (log-uniform 1-200 MJup, isotropic, e uniform 0-0.95), selected on observed
  // S/N > 6; the true mass must lie in the 68 % band in 68 +- 6 % and in the 95 %
  // band in 95 +- 3 % of cases (Bayesian coverage; statistics, common practice).
  // With 400 systems (binomial error 1.1 points at 95 %) the first 400 sat
  // low for every engine: the stop-27 engine gave 92.5, 91.8 and 91.0 % with
  // curve seeds 1-3, within 0.3 of the bound; with 1000 (0.7 points) it
  // gives 93.9 and 93.0 % (bench/curve_calibration 1000 4096 --seed N).
  const Coverage c = check_detection_coverage(6.0);
  CHECK(c.max_sig > 300);
  // The target of 1,000 effective samples stands for about 125 independent
  // orbits at S/N ~ 10 (docs/method.md, "Draws in blocks"; our design, no
  // outside source); measured: a median of 197 over these systems, on which
  // the bands' coverage rests (docs/performance.md, "Stop 42").
  CHECK(c.median_ess_orbits > 125.0);
  CHECK(c.median_ess_orbits < 1000.0);
}

TEST_CASE("calibration: strong detections, whose omega comes from its conditional, cover at their nominal rates",
          "[curve][calibration]") {
  // As above for the systems at S/N >= 20 alone, where the curve draws
  // omega from a table of its conditional instead of its prior
  // (docs/method.md, "Omega from its conditional"): 68 +- 6 % and
  // 95 +- 3 % (Bayesian coverage; statistics, common practice). Measured on
  // 5000 such systems (bench/curve_calibration 5000 4096): 67.8 % and
  // 94.2 %; with omega from its prior 67.8 % and 93.8 %.
  check_detection_coverage(20.0);
}

TEST_CASE("calibration: the strongest detections, whose z samples each take their own omega, cover within bounds",
          "[curve][calibration]") {
  // As above for the systems at S/N >= 200 alone, where the draws weighed
  // with their total mass fixed give each z sample its own omega
  // (docs/method.md, "Omega from its conditional"): 68 +- 6 % and
  // 95 +- 3 % (Bayesian coverage; statistics, common practice). Measured
  // on these 1000 systems: 64.6 % and 93.4 %; with one omega per draw
  // 64.6 % and 92.4 %; plain prior sampling with 131,072 draws 66.5 % and
  // 94.1 % (bench/curve_calibration 1000 4096 --plain 131072;
  // docs/performance.md, "Stop 42").
  check_detection_coverage(200.0);
}

TEST_CASE("calibration: upper limits hold injected masses at their nominal rates", "[curve][calibration]") {
  // As above for upper limits: 1000 systems whose masses follow the upper
  // limits' own prior (uniform in 0-200 MJup), selected on observed S/N
  // below --detect-sigma (3); the truth must lie below the 68 % limit in
  // 68 +- 6 % and below the 95 % limit in 95 +- 3 % of cases (Bayesian
  // coverage; statistics, common practice). Measured on 5000 such systems
  // (bench/curve_calibration 5000 4096): 67.4 % and 94.7 %; before the
  // defensive z samples 66.5 % and 93.5 %, and 91.1 % at the 95 % limit
  // where the period at the tabulated host mass is below 5 yr.
  CurveOptions opt;
  opt.prior.m_min_mjup = 1;
  opt.prior.m_max_mjup = 200;
  const Coverage c = curve_coverage(coverage_survey(opt, 1.0, 50.0, 99, true), opt, 1000, 0.0, {},
                                    opt.prior.detect_sigma);
  INFO("68 % limit: " << c.in68 << ", 95 % limit: " << c.in95);
  CHECK(c.in68 == Approx(0.68).margin(0.06));
  CHECK(c.in95 == Approx(0.95).margin(0.03));
}

namespace {
// Brute-force reference for the analytic relation: every root in q of
// f 2 pi q a parallax eta(P) / P = speed, by a dense scan (linear and log
// grids, 4e5 points) and bisection. eta is computed here from the closed-form
// smearing factor g(x) = 3 (sin x - x cos x) / x^3, x = pi W / P
// (docs/method.md, Sect. 6), not through the library's code.
std::vector<double> brute_force_roots(const AnomalyData& d, double a_au, double speed, double f) {
  const double W = d.late.end_yr - d.late.start_yr, B = d.late.ref_epoch_yr - d.early.ref_epoch_yr;
  auto model = [&](double q) {
    // Kepler's third law in AU, yr, Msun (the library's GM_sun constant).
    const double P = units::kTwoPi * std::sqrt(a_au * a_au * a_au / (units::kGMSunAu3Yr2 * d.host_mass_msun / (1 - q)));
    const double x = units::kPi * W / P;
    const double g = 3.0 * (std::sin(x) - x * std::cos(x)) / (x * x * x);
    const double xb = units::kPi * B / P, s = std::sin(xb) / xb;
    const double eta = std::sqrt(std::max(g * g + s * s - 2 * g * s * std::cos(xb), 0.0));
    return f * units::kTwoPi * q * a_au * d.parallax_mas * eta / P - speed;
  };
  std::vector<double> grid;
  for (int k = 0; k < 200000; ++k) grid.push_back(1e-12 * std::pow(1e9, k / 199999.0));  // 1e-12 to 1e-3
  for (int k = 1; k <= 200000; ++k) grid.push_back(1e-3 + (0.5 - 1e-3) * k / 200000.0);
  std::vector<double> roots;
  for (std::size_t k = 0; k + 1 < grid.size(); ++k) {
    double lo = grid[k], hi = grid[k + 1];
    const double flo = model(lo);
    if ((flo > 0) == (model(hi) > 0)) continue;
    for (int it = 0; it < 200; ++it) {
      const double mid = 0.5 * (lo + hi);
      ((model(mid) > 0) == (flo > 0) ? lo : hi) = mid;
    }
    roots.push_back(d.host_mass_msun * lo / (1 - lo) * units::kMjupPerMsun);
  }
  return roots;
}
}  // namespace

TEST_CASE("analytic curve: every root of the relation when the period is shorter than the window", "[curve]") {
  // A strong late anomaly at periods below the late window (2.84 yr): the
  // smearing factor oscillates and the relation has several roots in q.
  const Orbit<double> o{0.6, 0.0, 0.5, 0.3, 0.2, 1.0, 2016.0};
  AnomalyData d = data_for(o, 1.0, 50.0, 1.0, 30.0, 0.02, 0.5, kEarly, kLate);
  d.dpm << 3.0, 1.0, 0.0, 0.0;  // mas/yr
  d.sig_joint = 100.0;
  CurveOptions opt;
  opt.a_au = {0.5, 0.8, 1.0, 1.5};
  const Curve c = analytic_curve(d, opt);
  const double amp = d.dpm.head<2>().norm();
  const double fq[5] = {0.975, 0.84, 0.5, 0.16, 0.025};
  int multiple = 0;
  for (const auto& p : c.points) {
    const double cols[5] = {p.mass_lo95, p.mass_lo68, p.mass_med, p.mass_hi68, p.mass_hi95};
    for (int k = 0; k < 5; ++k) {
      const std::vector<double> ref = brute_force_roots(d, p.a_au, amp, projection_factor_quantile(fq[k]));
      INFO("a = " << p.a_au << " AU, column " << k << ": " << ref.size() << " roots");
      REQUIRE(p.roots_mjup[k].size() == ref.size());
      for (std::size_t r = 0; r < ref.size(); ++r) CHECK(p.roots_mjup[k][r] == Approx(ref[r]).epsilon(1e-7));
      if (ref.empty()) {
        CHECK(std::isnan(cols[k]));
      } else {
        CHECK(cols[k] == p.roots_mjup[k].front());  // the smallest root, never an iterate
      }
      multiple += ref.size() > 1;
    }
    const bool has_multi = std::any_of(p.roots_mjup.begin(), p.roots_mjup.end(), [](auto& r) { return r.size() > 1; });
    CHECK((std::find(p.notes.begin(), p.notes.end(), "multiple_solutions") != p.notes.end()) == has_multi);
  }
  CHECK(multiple > 0);  // the case exercises several roots
  // An anomaly no companion lighter than its host can produce: no root, flagged.
  d.dpm << 1e6, 0.0, 0.0, 0.0;
  const Curve none = analytic_curve(d, opt);
  for (const auto& p : none.points) {
    CHECK(std::isnan(p.mass_med));
    CHECK(std::find(p.notes.begin(), p.notes.end(), "not_converged") != p.notes.end());
  }
}

TEST_CASE("period correction: the derivative in ln P against finite differences of the model", "[curve]") {
  // Reference: the five-point central difference of model_anomaly in ln P
  // with step h = 0.01 (1 - e) / w, w = 2 pi baseline / P + 2 the model's
  // rate per unit ln P (faster by up to 1 / (1 - e) next to periastron):
  // truncation below 1e-8 of the derivative. Beyond P = 200 yr the window
  // fits cancel to ~1e-9 of the model, and the differences' round-off over
  // h sets the tolerance (common practice, no source). Periods from a tenth
  // of the windows to 100 times the baseline, e up to 0.95.
  std::mt19937_64 g(12);
  std::uniform_real_distribution<double> u(0, 1);
  double worst_short = 0, worst_long = 0;
  for (int n = 0; n < 200; ++n) {
    const double P = std::exp(std::log(0.3) + u(g) * std::log(2500.0 / 0.3));
    const double e = n % 5 == 0 ? 0.95 * u(g) : 0.5 * u(g);
    const Orbit<double> o{P, e, std::acos(2 * u(g) - 1), units::kTwoPi * u(g), units::kTwoPi * u(g),
                          units::kTwoPi * u(g), kLate.ref_epoch_yr};
    const double w = units::kTwoPi * (kLate.ref_epoch_yr - kEarly.ref_epoch_yr) / P + 2.0;
    const double h = 0.01 * (1 - e) / w;
    auto at = [&](double x) {
      Orbit<double> s = o;
      s.period_yr = P * std::exp(x);
      return model_anomaly(s, 5.0, 0.01, 20.0, kEarly, kLate);
    };
    const Eigen::Vector4d fd = (-at(2 * h) + 8 * at(h) - 8 * at(-h) + at(-2 * h)) / (12 * h);
    const Eigen::Vector4d an = model_anomaly_dlnp(o, 5.0, 0.01, 20.0, kEarly, kLate);
    const double rel = (an - fd).norm() / an.norm();
    (P < 200 ? worst_short : worst_long) = std::max(P < 200 ? worst_short : worst_long, rel);
    INFO("P = " << P << " yr, e = " << e << ": analytic " << an.transpose() << ", differences " << fd.transpose());
    CHECK(rel < (P < 200 ? 1e-6 : 1e-3));
  }
  INFO("worst relative difference: " << worst_short << " below 200 yr, " << worst_long << " beyond");
  CHECK(worst_short > 0.0);  // computed independently, never bit-equal
}

namespace {
// Plain prior sampling of one separation, every parameter drawn from the
// prior (the host mass from its normal, the companion's mass from the mass
// prior, the model at each draw's own period): the log10 evidence against
// no companion with its standard error, and weighted mass quantiles (MJup).
struct PlainSampling {
  double log10_bayes, log10_bayes_error;
  std::vector<double> mass_quantiles;
};
// Eccentricities above kCurveMaxEcc have no likelihood (the curve's cut), or
// with `clamp_ecc` are computed at kCurveMaxEcc (what the curve once did).
PlainSampling plain_sampling(const AnomalyData& d, double a_au, const MassPrior& mp, const Distribution& ecc_prior,
                             int n, const std::vector<double>& probs, bool clamp_ecc = false) {
  const Eigen::Matrix4d cinv = d.cov.inverse();
  const double chi2_data = d.dpm.dot(cinv * d.dpm);
  Rng rng(2027);
  double sum = 0, sum2 = 0;
  std::vector<std::pair<double, double>> pairs;
  for (int k = 0; k < n; ++k) {
    double m1;
    do m1 = d.host_mass_msun + d.host_mass_error_msun * rng.normal(); while (!(m1 > 0.01));
    const double m2_mjup = mp.upper_limit() ? mp.m_max_mjup * rng.uniform_open()
                                            : rng.log_uniform(mp.m_min_mjup, mp.m_max_mjup);
    const double m2 = m2_mjup / units::kMjupPerMsun;
    const double ecc_drawn = ecc_prior.draw(rng);
    const double ecc = std::min(ecc_drawn, kCurveMaxEcc);
    const Orbit<double> s{period_from_a(a_au, m1 + m2), ecc, std::acos(rng.uniform(-1, 1)),
                          units::kTwoPi * rng.uniform(), units::kTwoPi * rng.uniform(),
                          units::kTwoPi * rng.uniform(), d.late.ref_epoch_yr};
    const Eigen::Vector4d r = d.dpm - model_anomaly(s, a_au, m2 / (m1 + m2), d.parallax_mas, d.early, d.late);
    const double l = ecc_drawn <= kCurveMaxEcc || clamp_ecc ? std::exp(-0.5 * (r.dot(cinv * r) - chi2_data)) : 0.0;
    sum += l;
    sum2 += l * l;
    pairs.emplace_back(m2_mjup, l);
  }
  const double mean = sum / n, se = std::sqrt((sum2 / n - mean * mean) / n);
  return {std::log10(mean), se / mean / std::log(10.0), weighted_quantiles(pairs, sum, probs)};
}

// The single-separation evidence tests' star: a 6-MJup companion at 6 AU on
// an orbit of eccentricity `ecc`, and the curve options for that separation
// alone (mass prior 1-100 MJup).
struct EvidenceCase {
  AnomalyData d;
  CurveOptions opt;
};
EvidenceCase evidence_case(double ecc) {
  Orbit<double> truth{0.0, ecc, 1.0, 2.0, 0.7, 1.1, kLate.ref_epoch_yr};
  const double a_au = 6.0, m1 = 1.0, plx = 25.0;
  truth.period_yr = period_from_a(a_au, m1 + 6.0 / units::kMjupPerMsun);
  EvidenceCase e{data_for(truth, a_au, 6.0, m1, plx, 0.05, 0.5, kEarly, kLate), {}};
  e.d.dpm += Eigen::Vector4d(0.03, -0.04, 0.2, 0.1);  // a noise draw (fixed)
  e.opt.a_au = {a_au};
  e.opt.refine_rounds = 0;
  e.opt.prior.m_min_mjup = 1;
  e.opt.prior.m_max_mjup = 100;
  return e;
}
}  // namespace

TEST_CASE("Bayes factor: the curve's importance-sampling evidence equals plain prior sampling", "[curve]") {
  // Reference: the marginal likelihood as the plain Monte Carlo mean of the
  // likelihood over 2e5 draws from the same prior (every parameter drawn,
  // the model evaluated at each draw's own period; common practice, no
  // source), at one separation, against the curve's estimate; the tolerance
  // is 4 combined standard errors.
  const auto [d, opt] = evidence_case(0.3);
  const Curve c = montecarlo_curve(d, opt, "evidence");
  const PlainSampling ref = plain_sampling(d, opt.a_au[0], opt.prior.mass_prior(false), opt.prior.ecc, 200000, {});
  const double plain = ref.log10_bayes, plain_err = ref.log10_bayes_error;
  INFO("curve log10 B = " << c.log10_bayes << " +- " << c.log10_bayes_error << ", plain " << plain << " +- "
                          << plain_err);
  CHECK(plain > 1.0);  // a clear detection: the test compares a real evidence
  CHECK(std::abs(c.log10_bayes - plain) < 4.0 * std::hypot(c.log10_bayes_error, plain_err));
  CHECK(c.log10_bayes_error < 0.05);
}

// A detection whose posterior spans several separations of a 1-100 AU grid
// (S/N 4.5 at 3 AU and 10 MJup, 14.5 at 20 AU and 40 MJup).
AnomalyData evidence_star(double a_au, double m2_mjup) {
  Orbit<double> truth{0.0, 0.3, 1.0, 2.0, 0.7, 1.1, kLate.ref_epoch_yr};
  const double m1 = 1.0, plx = 25.0;
  truth.period_yr = period_from_a(a_au, m1 + m2_mjup / units::kMjupPerMsun);
  AnomalyData d = data_for(truth, a_au, m2_mjup, m1, plx, 0.1, 0.8, kEarly, kLate);
  d.dpm += Eigen::Vector4d(0.05, -0.08, 0.3, 0.5);  // a noise draw (fixed)
  d.host_mass_error_msun = 0.1;
  return d;
}

TEST_CASE("plain sampler: the reference mode weighs every prior draw and agrees with plain sampling", "[curve]") {
  // CurveOptions::plain_sampler is the reference that bench/curve_calibration
  // checks the adaptive sampler against at high S/N. Here it is checked in
  // turn against plain prior sampling of every parameter (common practice,
  // no source; 4e5 draws): evidence within 4 combined standard errors, mass
  // quantiles within 8 % (as in "total mass per draw"). It weighs all its
  // draws, with no early stop, where the adaptive sampler stops at its
  // target.
  auto [d, opt] = evidence_case(0.3);
  opt.draws = 32768;
  const Curve adaptive = montecarlo_curve(d, opt, "plain");
  opt.plain_sampler = true;
  const Curve c = montecarlo_curve(d, opt, "plain");
  REQUIRE(c.points.size() == 1);
  CHECK(c.draws_weighed == opt.draws);
  CHECK(adaptive.draws_weighed < opt.draws / 4);
  const PlainSampling ref =
      plain_sampling(d, opt.a_au[0], opt.prior.mass_prior(false), opt.prior.ecc, 400000, {0.16, 0.5, 0.84});
  INFO("reference mode log10 B = " << c.log10_bayes << " +- " << c.log10_bayes_error << ", plain " << ref.log10_bayes
                                   << " +- " << ref.log10_bayes_error);
  CHECK(ref.log10_bayes > 1.0);  // a clear detection
  CHECK(std::abs(c.log10_bayes - ref.log10_bayes) < 4.0 * std::hypot(c.log10_bayes_error, ref.log10_bayes_error));
  const CurvePoint& p = c.points[0];
  CHECK(p.mass_lo68 == Approx(ref.mass_quantiles[0]).epsilon(0.08));
  CHECK(p.mass_med == Approx(ref.mass_quantiles[1]).epsilon(0.08));
  CHECK(p.mass_hi68 == Approx(ref.mass_quantiles[2]).epsilon(0.08));
}

TEST_CASE("omega per z sample: at S/N >= 200 each kept draw's orbit reproduces the data", "[curve]") {
  // From S/N 200 on, a draw weighed with its total mass fixed gives each of
  // its z samples its own omega (docs/method.md, "Omega from its
  // conditional"). Each kept draw must then carry the omega its own z was
  // fitted with: its orbit, run through the window model, must reproduce
  // the anomaly to the chi-squared of a posterior draw (four data, a
  // model that fits them exactly: about chi2 with 4 degrees of freedom;
  // common practice, no source). One omega mixed up between samples gives
  // chi2 of order the data's own, here above 10^5.
  Orbit<double> truth{0.0, 0.4, 1.0, 2.0, 0.7, 1.1, kLate.ref_epoch_yr};
  const double a_au = 4.0, m1 = 1.0, plx = 50.0, m2_mjup = 60.0;
  truth.period_yr = period_from_a(a_au, m1 + m2_mjup / units::kMjupPerMsun);
  AnomalyData d = data_for(truth, a_au, m2_mjup, m1, plx, 0.02, 0.1, kEarly, kLate);
  d.dpm += Eigen::Vector4d(0.01, -0.02, 0.07, -0.1);  // a noise draw (fixed)
  d.host_mass_error_msun = 0.05;
  const Eigen::Matrix4d cinv = d.cov.inverse();
  const double snr = std::sqrt(d.dpm.dot(cinv * d.dpm));
  CurveOptions opt;
  opt.a_au = {a_au};
  opt.refine_rounds = 0;
  opt.keep_draws = true;
  const Curve c = montecarlo_curve(d, opt, "omega-per-sample");
  REQUIRE(snr >= 200.0);
  REQUIRE(c.draws.size() > 100);
  double mean_chi2 = 0.0, max_chi2 = 0.0, weight = 0.0;
  std::set<double> omegas;
  for (const OrbitDraw& k : c.draws) {
    const Orbit<double> o{k.period_yr, k.ecc, units::deg_to_rad(k.inc_deg), units::deg_to_rad(k.arg_peri_deg),
                          units::deg_to_rad(k.node_deg), units::deg_to_rad(k.mean_anom_deg), k.ref_epoch_yr};
    const double m2 = k.mass_mjup / units::kMjupPerMsun;
    const Eigen::Vector4d r = d.dpm - model_anomaly(o, k.a_au, m2 / (k.host_mass_msun + m2), k.parallax_mas,
                                                    d.early, d.late);
    const double chi2 = r.dot(cinv * r);
    mean_chi2 += k.weight * chi2;
    weight += k.weight;
    max_chi2 = std::max(max_chi2, chi2);
    omegas.insert(k.arg_peri_deg);
  }
  mean_chi2 /= weight;
  INFO("S/N " << snr << ", " << c.draws.size() << " kept draws with " << omegas.size()
              << " distinct omegas: weighted mean chi2 " << mean_chi2 << ", largest " << max_chi2);
  CHECK(mean_chi2 < 12.0);
  CHECK(max_chi2 < 60.0);
}

TEST_CASE("Bayes factor: an eccentricity prior beyond 0.99 is cut there, as by plain sampling", "[curve]") {
  // Reference: plain prior sampling as above (2e5 draws) with the draws
  // above e = 0.99 given no likelihood; the curve must agree within 4
  // combined standard errors and differ by more from the same sampling with
  // those draws computed at e = 0.99 (the curve's former clamp; common
  // practice, no source). Half the prior uniform:0.98,0.999 lies above.
  auto [d, opt] = evidence_case(0.95);
  opt.prior.ecc = Distribution::parse("uniform:0.98,0.999", "--ecc");
  const Curve c = montecarlo_curve(d, opt, "eccentric");
  const double a_au = opt.a_au[0];
  const PlainSampling cut = plain_sampling(d, a_au, opt.prior.mass_prior(false), opt.prior.ecc, 200000, {});
  const PlainSampling clamp = plain_sampling(d, a_au, opt.prior.mass_prior(false), opt.prior.ecc, 200000, {}, true);
  INFO("curve log10 B = " << c.log10_bayes << " +- " << c.log10_bayes_error << ", plain (cut) " << cut.log10_bayes
                          << " +- " << cut.log10_bayes_error << ", plain (clamped) " << clamp.log10_bayes);
  CHECK(cut.log10_bayes > 1.0);
  CHECK(std::abs(c.log10_bayes - cut.log10_bayes) < 4.0 * std::hypot(c.log10_bayes_error, cut.log10_bayes_error));
  CHECK(std::abs(c.log10_bayes - clamp.log10_bayes) > 4.0 * std::hypot(c.log10_bayes_error, clamp.log10_bayes_error));
}

TEST_CASE("Bayes factor: its quoted error matches its scatter between seeds", "[curve]") {
  // Reference: the scatter of log10 B over 24 curve seeds (common practice,
  // no source), in units of each seed's quoted error, pooled over two stars
  // (46 degrees of freedom: the ratio is known to about 10 %). Whole
  // curves, whose separations share their random numbers: the separations'
  // errors combined as independent gave a ratio of 2.0-2.2 on these stars
  // (and 4-7 with the samples' own ESS, on simulated stars at S/N 10-30);
  // the estimate over shared keys 1.2-1.3.
  const auto star = evidence_star;
  CurveOptions opt;
  opt.a_au = log_grid(1.0, 100.0, 16);
  double sum_z2 = 0.0;
  int dof = 0;
  for (const AnomalyData& d : {star(3.0, 10.0), star(20.0, 40.0)}) {
    const double chi2 = d.dpm.dot(d.cov.inverse() * d.dpm);
    CHECK(chi2 > 15.0);  // a detection, whose posterior spans several separations
    std::vector<double> b, e;
    for (unsigned seed = 1; seed <= 24; ++seed) {
      opt.seed = seed;
      const Curve c = montecarlo_curve(d, opt, "scatter");
      b.push_back(c.log10_bayes);
      e.push_back(c.log10_bayes_error);
    }
    double mean = 0;
    for (double v : b) mean += v / b.size();
    for (std::size_t k = 0; k < b.size(); ++k) sum_z2 += (b[k] - mean) * (b[k] - mean) / (e[k] * e[k]);
    dof += static_cast<int>(b.size()) - 1;
  }
  const double ratio = std::sqrt(sum_z2 / dof);
  INFO("scatter / quoted error: " << ratio);
  CHECK(ratio > 0.7);
  CHECK(ratio < 1.6);
}

TEST_CASE("Bayes factor: few draws give the same evidence as many", "[curve]") {
  // Reference: the same star's log10 B at 4,096 draws, the mean of 16 seeds
  // (itself checked against plain prior sampling by the test above); the
  // mean over 32 seeds at 256 draws must agree within 4 combined standard
  // errors (common practice, no source). At few draws the kernel rounds
  // weigh most of the draws: when kernel draws beyond |cos i| = 1 were
  // clamped to the pole and weighed as if drawn there, the mean was 0.049
  // dex high (41.642 +- 0.002 against 41.593 +- 0.002, 24 seeds each).
  const AnomalyData d = evidence_star(20.0, 40.0);
  CurveOptions opt;
  opt.a_au = log_grid(1.0, 100.0, 16);
  opt.quantile_errors = false;
  auto mean_log10_bayes = [&](int draws, unsigned seeds, double& se) {
    opt.draws = draws;
    double s = 0.0, s2 = 0.0;
    for (unsigned seed = 1; seed <= seeds; ++seed) {
      opt.seed = seed;
      const double b = montecarlo_curve(d, opt, "few draws").log10_bayes;
      s += b;
      s2 += b * b;
    }
    const double mean = s / seeds;
    se = std::sqrt((s2 / seeds - mean * mean) / (seeds - 1));
    return mean;
  };
  double se_few = 0.0, se_many = 0.0;
  const double few = mean_log10_bayes(256, 32, se_few), many = mean_log10_bayes(4096, 16, se_many);
  INFO("log10 B at 256 draws " << few << " +- " << se_few << ", at 4096 " << many << " +- " << se_many);
  CHECK(many > 40.0);  // a strong detection: most of its draws come from kernel rounds
  CHECK(std::abs(few - many) < 4.0 * std::hypot(se_few, se_many));
}

TEST_CASE("mass quantiles: their quoted errors match their scatter between seeds", "[curve]") {
  // Reference: the standard deviation of each quantile over 16 curve seeds
  // (common practice, no source) against the root mean square of its
  // quoted error, per column (one quantile of one system), over twelve
  // systems of each coverage population at their true a (upper limits: 2
  // columns each, detections 5). The upper quantiles' scatter is heavy
  // tailed (one seed that samples the tail sets it), so one column's ratio
  // is uncertain by much more than a chi-squared with 15 degrees of freedom
  // would say: with three systems, as this test had, the pooled ratio of
  // an unchanged engine ranged over 0.56-1.11 between eight sets of 16
  // seeds, outside 0.7-1.4 in four. With twelve systems, over six sets of
  // 16 seeds of that engine: the median column's ratio 0.86-1.08 (upper
  // limits) and 0.88-1.03 (detections), the pooled ratio 0.83-0.99 and
  // 0.95-1.13. With the z samples of a draw taken as independent, the
  // detections' median 2.43 and pooled 2.37 (their samples carry nearly
  // the same mass).
  for (const bool upper : {true, false}) {
    CurveOptions opt;
    opt.prior.m_min_mjup = 1;
    opt.prior.m_max_mjup = 200;
    opt.refine_rounds = 0;
    const SurveyModel m = coverage_survey(opt, 1.0, 50.0, 99, upper);
    double sum_var = 0.0, sum_e2 = 0.0;
    std::vector<double> column_ratio;
    int systems = 0, columns = 0;
    for (long i = 0; systems < 12; ++i) {
      const CoverageSystem c = coverage_system(m, i);
      if (!c.ok || !c.t.companion || !(upper ? c.sig_joint < 3.0 : c.sig_joint >= 6.0)) continue;
      ++systems;
      opt.a_au = {c.t.a_au};
      std::vector<std::array<double, 5>> v, e;
      for (unsigned seed = 1; seed <= 16; ++seed) {
        opt.seed = seed;
        const CurvePoint p = montecarlo_curve(c.d, opt, c.id).points[0];
        v.push_back({p.mass_lo95, p.mass_lo68, p.mass_med, p.mass_hi68, p.mass_hi95});
        e.push_back(p.mass_error);
      }
      for (int k = upper ? 3 : 0; k < 5; ++k) {
        ++columns;
        // A seed whose quantile had one sample spanning its error, or whose
        // point has fewer than 100 effective samples, quotes none: measured,
        // 54-60 of the detections' 60 columns keep every error.
        if (std::any_of(e.begin(), e.end(), [k](const auto& x) { return !(x[k] > 0.0); })) continue;
        double mean = 0, var = 0, e2 = 0;
        for (const auto& x : v) mean += x[k] / v.size();
        for (std::size_t j = 0; j < v.size(); ++j) {
          var += (v[j][k] - mean) * (v[j][k] - mean) / (v.size() - 1);
          e2 += e[j][k] * e[j][k] / v.size();
        }
        sum_var += var;
        sum_e2 += e2;
        column_ratio.push_back(std::sqrt(var / e2));
      }
    }
    INFO((upper ? "upper limits" : "detections") << ": columns with every error " << column_ratio.size() << " of "
                                                 << columns);
    REQUIRE(column_ratio.size() >= 0.8 * columns);
    std::sort(column_ratio.begin(), column_ratio.end());
    const double median = column_ratio[column_ratio.size() / 2], pooled = std::sqrt(sum_var / sum_e2);
    INFO("scatter / quoted error, median column " << median << ", pooled " << pooled);
    CHECK(median > 0.8);
    CHECK(median < 1.25);
    CHECK(pooled > 0.7);
    CHECK(pooled < 1.4);
  }
  // Only asked for: no errors, the same quantiles.
  CurveOptions opt;
  opt.a_au = {5.0};
  opt.refine_rounds = 0;
  Orbit<double> truth{0.0, 0.2, 0.8, 1.0, 2.0, 0.4, kLate.ref_epoch_yr};
  truth.period_yr = period_from_a(5.0, 1.0 + 20.0 / units::kMjupPerMsun);
  const AnomalyData d = data_for(truth, 5.0, 20.0, 1.0, 30.0, 0.1, 0.5, kEarly, kLate);
  const CurvePoint with = montecarlo_curve(d, opt, "errors").points[0];
  opt.quantile_errors = false;
  const CurvePoint without = montecarlo_curve(d, opt, "errors").points[0];
  CHECK(with.mass_error[2] > 0.0);
  CHECK(std::isnan(without.mass_error[2]));
  CHECK(with.mass_med == without.mass_med);
}

TEST_CASE("quantile tolerance: an upper limit's tail is drawn until its error meets it", "[curve]") {
  // Star 486 of coverage_survey(..., 99, true), P = 62 yr, S/N 1.05: its
  // 95 % limit sits in a long tail (68 % limit 1.5 MJup, 95 % about 6) and
  // scattered by 60 % between seeds at the defaults. With a tolerance of
  // 5 % the quoted error must meet it or the four rounds' budget be spent
  // (here it is: the quoted errors end at 6-12 %, conservative against the
  // scatter's 5 %), and the scatter between eight seeds must fall at least
  // twofold (measured: 3.9 -> 0.3 MJup; common practice, no source: the
  // scatter between seeds).
  CurveOptions opt;
  opt.prior.m_min_mjup = 1;
  opt.prior.m_max_mjup = 200;
  opt.refine_rounds = 0;
  const CoverageSystem c = coverage_system(coverage_survey(opt, 1.0, 50.0, 99, true), 486);
  REQUIRE(c.ok);
  REQUIRE(c.sig_joint < 3.0);
  opt.a_au = {c.t.a_au};
  auto scatter = [&](double tol) {
    opt.quantile_tolerance = tol;
    std::vector<double> v;
    for (unsigned seed = 1; seed <= 8; ++seed) {
      opt.seed = seed;
      const Curve curve = montecarlo_curve(c.d, opt, c.id);
      const CurvePoint& p = curve.points[0];
      if (tol > 0) CHECK((p.mass_error[4] <= tol * p.mass_hi95 || curve.draws_weighed == 4L * opt.draws));
      v.push_back(p.mass_hi95);
    }
    double mean = 0, var = 0;
    for (double x : v) mean += x / v.size();
    for (double x : v) var += (x - mean) * (x - mean) / (v.size() - 1);
    return std::sqrt(var);
  };
  const double sd_default = scatter(0.0), sd_tol = scatter(0.05);
  INFO("95 % limit scatter " << sd_default << " -> " << sd_tol << " MJup");
  CHECK(sd_tol < 0.5 * sd_default);
}

TEST_CASE("upper limit at a short period: the heavy companions the data allow are found", "[curve]") {
  // Reference: plain prior sampling of every parameter at the true a
  // (common practice, no source), 4e5 draws, for an injected system of the
  // upper-limit coverage population at P = 1.3 yr and S/N 1.3 (star 108 of
  // coverage_survey(..., 99, true)). Companions of 100-200 MJup move the
  // period (m1 0.73 Msun) towards a zero of the late window's averaging and
  // hold half the posterior, far from the Gaussian likelihood in z at the
  // period of the best z: drawing every z sample from that Gaussian gave
  // 68 % and 95 % limits of 35 and 128 MJup against 143 and 191, and
  // weighing every draw at one total mass about the best z 26 and 98.
  // Measured with the prior's samples (by periods: 144 and 195; each at its
  // own total mass, as now: 143 and 195).
  CurveOptions opt;
  opt.prior.m_min_mjup = 1;
  opt.prior.m_max_mjup = 200;
  const CoverageSystem sys = coverage_system(coverage_survey(opt, 1.0, 50.0, 99, true), 108);
  REQUIRE(sys.ok);
  const AnomalyData& d = sys.d;
  const SimTruth& t = sys.t;
  CHECK(sys.sig_joint < 3.0);  // an upper limit
  CHECK(t.period_yr < 1.5);
  opt.a_au = {t.a_au};
  opt.refine_rounds = 0;
  const Curve c = montecarlo_curve(d, opt, sys.id);
  REQUIRE(c.upper_limit);
  const PlainSampling ref = plain_sampling(d, t.a_au, opt.prior.mass_prior(true), opt.prior.ecc, 400000, {0.68, 0.95});
  INFO("curve " << c.points[0].mass_hi68 << " / " << c.points[0].mass_hi95 << ", plain " << ref.mass_quantiles[0]
                << " / " << ref.mass_quantiles[1]);
  CHECK(ref.mass_quantiles[0] > 100.0);  // the heavy mode holds the 68 % limit
  CHECK(c.points[0].mass_hi68 == Approx(ref.mass_quantiles[0]).epsilon(0.08));
  CHECK(c.points[0].mass_hi95 == Approx(ref.mass_quantiles[1]).epsilon(0.08));
  CHECK(std::abs(c.log10_bayes - ref.log10_bayes) < 4.0 * std::hypot(c.log10_bayes_error, ref.log10_bayes_error));
}

TEST_CASE("total mass per draw: curves agree with plain prior sampling", "[curve]") {
  // Reference: plain prior sampling of every parameter, the host mass from
  // its normal included (common practice, no source), 4e5 draws at one
  // separation. The evidence agrees within 4 combined standard errors; the
  // mass quantiles within 8 % (over curve seeds 1-4 and reference seeds
  // 2027-2030 the largest gap was 6 %, the engine without the total-mass
  // weighing's 4 %); for the upper limit (whose tails are checked in "upper
  // limit at a short period"), the evidence alone. At 1.3 AU
  // (P = 1.5 yr against a 25-yr baseline) every draw is weighed with its
  // total mass fixed (an upper limit's at two total masses), unless the host
  // mass is known to 0.6 % (then by periods throughout); at 5 AU the draws are shared between the two
  // weighings by their eccentricity, which a wrong constant in either would
  // bias (a factor of 263 on one side moved log10 B there by 0.16 and the
  // 84 % quantile by 15 %).
  const double m1 = 0.9, plx = 40.0;
  CurveOptions opt;
  opt.refine_rounds = 0;
  opt.prior.m_min_mjup = 1;
  opt.prior.m_max_mjup = 150;
  auto data = [&](double a_au, double m2_mjup) {
    Orbit<double> truth{0.0, 0.2, 0.8, 1.0, 2.0, 0.4, kLate.ref_epoch_yr};
    truth.period_yr = period_from_a(a_au, m1 + m2_mjup / units::kMjupPerMsun);
    AnomalyData d = data_for(truth, a_au, m2_mjup, m1, plx, 0.15, 0.5, kEarly, kLate);
    d.host_mass_error_msun = 0.06;
    return d;
  };
  // all_total: every draw weighed with its total mass fixed (two window
  // evaluations each, four for an upper limit: one per prior sample); none:
  // every draw by periods (more than three).
  enum class Weighing { all_total, shared, none_total };
  auto compare = [&](const AnomalyData& d, double a_au, Weighing weighing) {
    opt.a_au = {a_au};
    const Curve c = montecarlo_curve(d, opt, "total-mass");
    REQUIRE(c.points.size() == 1);
    if (weighing == Weighing::all_total) CHECK(c.window_evaluations == (c.upper_limit ? 4 : 2) * c.draws_weighed);
    if (weighing == Weighing::none_total) CHECK(c.window_evaluations > 3 * c.draws_weighed);
    const CurvePoint& p = c.points[0];
    const PlainSampling ref =
        plain_sampling(d, a_au, opt.prior.mass_prior(c.upper_limit), opt.prior.ecc, 400000, {0.16, 0.5, 0.84});
    INFO("curve log10 B = " << c.log10_bayes << " +- " << c.log10_bayes_error << ", plain " << ref.log10_bayes
                            << " +- " << ref.log10_bayes_error);
    CHECK(std::abs(c.log10_bayes - ref.log10_bayes) < 4.0 * std::hypot(c.log10_bayes_error, ref.log10_bayes_error));
    if (c.upper_limit) return;  // its 95 % tail scatters by +-20 % between seeds (docs/performance.md)
    CHECK(ref.log10_bayes > 0.5);  // a real evidence to compare
    CHECK(p.mass_lo68 == Approx(ref.mass_quantiles[0]).epsilon(0.08));
    CHECK(p.mass_med == Approx(ref.mass_quantiles[1]).epsilon(0.08));
    CHECK(p.mass_hi68 == Approx(ref.mass_quantiles[2]).epsilon(0.08));
  };
  SECTION("short period, a detection") {
    AnomalyData d = data(1.3, 40.0);
    d.dpm += Eigen::Vector4d(0.02, -0.03, 0.3, -0.2);  // a noise draw (fixed)
    compare(d, 1.3, Weighing::all_total);
  }
  SECTION("short period, a precise host mass: weighed by periods") {
    AnomalyData d = data(1.3, 40.0);
    d.dpm += Eigen::Vector4d(0.02, -0.03, 0.3, -0.2);
    d.host_mass_error_msun = 0.005;  // below kMinHostSpread q_max m1 = 0.0148 Msun
    compare(d, 1.3, Weighing::none_total);
  }
  SECTION("both weighings at one separation") {
    AnomalyData d = data(5.0, 4.0);
    d.dpm += Eigen::Vector4d(0.02, -0.03, 0.3, -0.2);
    compare(d, 5.0, Weighing::shared);
  }
  SECTION("a separation the anomaly cannot tell: z samples from the log-uniform prior") {
    // At 0.3 AU (P = 0.17 yr) the windows average the orbit out, the
    // likelihood in z is broad, and the z samples come from the mass prior
    // (not narrow_gaussian): its log-uniform draw is what sets the bands.
    AnomalyData d = data(5.0, 4.0);
    d.dpm += Eigen::Vector4d(0.02, -0.03, 0.3, -0.2);
    opt.a_au = {0.3};
    const Curve c = montecarlo_curve(d, opt, "total-mass");
    REQUIRE(c.points.size() == 1);
    REQUIRE(!c.upper_limit);
    const CurvePoint& p = c.points[0];
    const PlainSampling ref =
        plain_sampling(d, 0.3, opt.prior.mass_prior(false), opt.prior.ecc, 400000, {0.16, 0.5, 0.84});
    INFO("curve " << p.mass_lo68 << " / " << p.mass_med << " / " << p.mass_hi68 << ", plain "
                  << ref.mass_quantiles[0] << " / " << ref.mass_quantiles[1] << " / " << ref.mass_quantiles[2]);
    CHECK(ref.mass_quantiles[2] > 30.0);  // the upper half of the prior's range holds weight
    CHECK(std::abs(c.log10_bayes - ref.log10_bayes) < 4.0 * std::hypot(c.log10_bayes_error, ref.log10_bayes_error));
    CHECK(p.mass_lo68 == Approx(ref.mass_quantiles[0]).epsilon(0.08));
    CHECK(p.mass_med == Approx(ref.mass_quantiles[1]).epsilon(0.08));
    CHECK(p.mass_hi68 == Approx(ref.mass_quantiles[2]).epsilon(0.08));
  }
  SECTION("short period, an upper limit (uniform mass prior)") {
    AnomalyData d = data(1.3, 0.0);
    d.dpm << 0.04, -0.02, 0.4, 0.3;
    d.sig_joint = 1.5;
    compare(d, 1.3, Weighing::all_total);
  }
}

TEST_CASE("p_real: reliability on a survey drawn from the prior", "[curve][calibration]") {
  // Stars with companions at the occurrence F = 0.02 from the curve's own
  // prior (log-uniform 1-200 MJup and 1-50 AU, isotropic, the e prior),
  // the rest single; those at sig_joint >= 3 binned by p_real. In each bin
  // the number with an injected companion must match the sum of p_real
  // within 2 standard deviations of that sum (Poisson-binomial, sum of
  // p (1 - p)) plus a half for discreteness (a reliability diagram; e.g.
  // Wilks 2011, Statistical Methods in the Atmospheric Sciences, ch. 8),
  // and the mean p_real the observed purity within 0.05 (the definition of
  // a calibrated probability; common practice, no source).
  CurveOptions opt;
  opt.draws = 512;
  opt.prior.m_min_mjup = 1;
  opt.prior.m_max_mjup = 200;
  opt.a_au = log_grid(1.0, 50.0, 12);
  SurveyModel m = coverage_survey(opt, 1.0, 50.0, 7);
  m.companion_fraction = 0.02;
  const Reliability r = p_real_reliability(m, opt, 20000, 3.0);
  int noise = 0;
  for (int b = 0; b < Reliability::kBins; ++b) {
    noise += r.stars[b] - r.real[b];
    INFO("bin " << b << ": " << r.stars[b] << " stars, " << r.real[b] << " with a companion, expected " << r.sum_p[b]
                << " +- " << std::sqrt(r.sum_pq[b]));
    CHECK(std::abs(r.real[b] - r.sum_p[b]) <= 2.0 * std::sqrt(r.sum_pq[b]) + 0.5);
  }
  double expected = 0.0;
  for (double v : r.sum_p) expected += v;
  const int n = r.total();
  INFO("mean p_real " << expected / n << ", purity " << static_cast<double>(n - noise) / n);
  CHECK(std::abs(expected - (n - noise)) / n < 0.05);
  // Both kinds are there in numbers: noise excursions above 3 sigma and companions.
  CHECK(noise >= 30);
  CHECK(r.total() - noise >= 100);
  // The ambiguous middle is populated.
  CHECK(r.stars[1] + r.stars[2] + r.stars[3] >= 15);
}

TEST_CASE("analytic curve: no weight, and a note where it exceeds the prior", "[curve]") {
  // The analytic relation is not a posterior (docs/formats.md): its points
  // carry no weight, and masses above --m-max are flagged (common practice,
  // no source). A 50 MJup companion at 8 AU against a 10 MJup prior bound.
  Orbit<double> o{period_from_a(8.0, 1.0), 0.0, 1.0, 0.0, 0.5, 2.0, kLate.ref_epoch_yr};
  const AnomalyData d = data_for(o, 8.0, 50.0, 1.0, 30.0, 0.02, 0.3, kEarly, kLate);
  CurveOptions opt;
  opt.a_au = {6.0, 8.0, 10.0};
  opt.prior.m_max_mjup = 10.0;
  const Curve c = analytic_curve(d, opt);
  for (const auto& p : c.points) {
    CHECK(std::isnan(p.weight));
    REQUIRE(present(p.mass_med));
    CHECK(p.mass_med > 10.0);
    CHECK(has_note(p.notes, "above_prior_max"));
  }
  opt.prior.m_max_mjup = 1e4;
  for (const auto& p : analytic_curve(d, opt).points) CHECK_FALSE(has_note(p.notes, "above_prior_max"));
}
