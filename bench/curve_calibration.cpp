// curve_calibration: coverage of the Monte Carlo curve's bands on injected
// systems drawn from the curve's own prior, selected on observed S/N > 6, and
// the time of one star's curve at the defaults.
//
// Usage: curve_calibration [systems=400] [draws=2048]

#include <chrono>
#include <cstdio>
#include <cstdlib>

#include "heft/curve.hpp"
#include "heft/screen.hpp"

using namespace heft;

int main(int argc, char** argv) {
  const int n_sys = argc > 1 ? std::atoi(argv[1]) : 400;
  const int draws = argc > 2 ? std::atoi(argv[2]) : 2048;
  SurveyModel m;
  m.seed = 99;
  m.companion_fraction = 1.0;
  m.companion_mass_mjup = {Distribution::Kind::kLogUniform, 1, 200};
  m.a_au = {Distribution::Kind::kLogUniform, 1, 50};
  m.ecc = {Distribution::Kind::kUniform, 0, 0.95};
  m.distance_pc = {Distribution::Kind::kUniform, 10, 60};
  m.host_mass_rel_error = 0.05;
  m.rv_fraction = 1.0;
  CurveOptions o;
  o.draws = draws;
  o.m_min_mjup = 1;
  o.m_max_mjup = 200;
  const Coverage cov = curve_coverage(m, o, n_sys, 6.0);
  std::printf("%d systems (S/N 6 to %.0f), %d draws: 68 %% band covers %.1f %%, 95 %% band %.1f %%\n",
              cov.systems, cov.max_sig, draws, 100.0 * cov.in68, 100.0 * cov.in95);

  // One star's curve at the defaults (64 separations x 4096 draws).
  StarRecord s;
  SimTruth t;
  m.companion_mass_mjup = {Distribution::Kind::kFixed, 20, 0};
  simulate_star(m, 3, s, t);
  const ScreenRow r = screen_star(s, "", ScreenOptions{});
  bool ok;
  const AnomalyData d = anomaly_data(s, r.result, kAbsent, kAbsent, ok);
  o = CurveOptions{};
  o.a_au = log_grid(0.5, 500, 64);
  const auto t0 = std::chrono::steady_clock::now();
  const Curve c = montecarlo_curve(d, o, s.id);
  const double secs = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  std::printf("one curve at the defaults: %zu separations (after refinement), %.2f s (all threads)\n",
              c.points.size(), secs);
  return 0;
}
