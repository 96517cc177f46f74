#include "heft/calibration.hpp"

#include <algorithm>
#include <cmath>
#include <stdexcept>

#include "heft/screen.hpp"

namespace heft {

Coverage curve_coverage(const SurveyModel& survey, const CurveOptions& opt, int n_systems,
                        double min_sig, const std::vector<double>& grid, double max_sig) {
  Coverage cov;
  int in68 = 0;
  std::vector<double> orbits;
  for (long i = 0; cov.systems < n_systems; ++i) {
    StarRecord s;
    SimTruth t;
    simulate_star(survey, i, s, t);
    const ScreenRow row = screen_star(s, validate_star(s), ScreenOptions{});
    if (!row.ok() || !t.companion || !(row.result.sig_joint >= min_sig && row.result.sig_joint < max_sig)) continue;
    const AnomalyResult& r = row.result;
    bool ok = false;
    const AnomalyData d = anomaly_data(s, r, kAbsent, kAbsent, ok);
    CurveOptions o = opt;
    o.a_au = {t.a_au};
    if (grid.empty()) {
      o.refine_rounds = 0;
    } else {
      o.a_au.insert(o.a_au.end(), grid.begin(), grid.end());
      std::sort(o.a_au.begin(), o.a_au.end());
    }
    const Curve c = montecarlo_curve(d, o, s.id);
    const auto at_truth = std::find_if(c.points.begin(), c.points.end(),
                                       [&](const CurvePoint& p) { return p.a_au == t.a_au; });
    if (at_truth == c.points.end()) throw std::logic_error("curve_coverage: the true a is not among the curve's points");
    const CurvePoint& p = *at_truth;
    const bool upper = c.upper_limit;
    in68 += (upper || t.mass_mjup >= p.mass_lo68) && t.mass_mjup <= p.mass_hi68;
    cov.held95.push_back((upper || t.mass_mjup >= p.mass_lo95) && t.mass_mjup <= p.mass_hi95);
    if (std::isfinite(p.ess_orbits)) orbits.push_back(p.ess_orbits);
    cov.max_sig = std::max(cov.max_sig, r.sig_joint);
    ++cov.systems;
  }
  if (!orbits.empty()) {
    auto mid = orbits.begin() + static_cast<std::ptrdiff_t>(orbits.size() / 2);
    std::nth_element(orbits.begin(), mid, orbits.end());
    cov.median_ess_orbits = *mid;
  }
  cov.in68 = static_cast<double>(in68) / cov.systems;
  cov.in95 = static_cast<double>(std::count(cov.held95.begin(), cov.held95.end(), true)) / cov.systems;
  return cov;
}

int Reliability::total() const {
  int n = 0;
  for (int b = 0; b < kBins; ++b) n += stars[b];
  return n;
}

Reliability p_real_reliability(const SurveyModel& survey, const CurveOptions& opt, long n_stars,
                               double min_sig) {
  Reliability rel;
  for (long i = 0; i < n_stars; ++i) {
    StarRecord s;
    SimTruth t;
    simulate_star(survey, i, s, t);
    const ScreenRow row = screen_star(s, validate_star(s), ScreenOptions{});
    if (!row.ok() || !(row.result.sig_joint >= min_sig)) continue;
    bool ok = false;
    const AnomalyData d = anomaly_data(s, row.result, kAbsent, kAbsent, ok);
    const double p = probability_real(montecarlo_curve(d, opt, s.id).log10_bayes, survey.companion_fraction);
    if (!present(p)) continue;
    const int b = std::min(Reliability::kBins - 1, static_cast<int>(p * Reliability::kBins));
    ++rel.stars[b];
    rel.real[b] += t.companion;
    rel.sum_p[b] += p;
    rel.sum_pq[b] += p * (1.0 - p);
  }
  return rel;
}

SurveyModel coverage_survey(const CurveOptions& opt, double a_lo_au, double a_hi_au,
                            std::uint64_t seed, bool upper_limit) {
  SurveyModel m;
  m.seed = seed;
  m.companion_fraction = 1.0;
  m.companion_mass_mjup = upper_limit
                              ? Distribution{Distribution::Kind::kUniform, 0.0, opt.prior.m_max_mjup}
                              : Distribution{Distribution::Kind::kLogUniform, opt.prior.m_min_mjup, opt.prior.m_max_mjup};
  m.a_au = {Distribution::Kind::kLogUniform, a_lo_au, a_hi_au};
  m.ecc = opt.prior.ecc;
  m.distance_pc = {Distribution::Kind::kUniform, 10, 60};
  m.host_mass_rel_error = 0.05;
  m.rv_fraction = 1.0;
  return m;
}

SurveyModel fit_coverage_survey(std::uint64_t seed) {
  SurveyModel m;
  m.seed = seed;
  m.companion_fraction = 1.0;
  m.companion_mass_mjup = {Distribution::Kind::kLogUniform, 5.0, 100.0};
  m.a_au = {Distribution::Kind::kLogUniform, 3.0, 30.0};
  m.ecc = {Distribution::Kind::kUniform, 0.0, 0.95};
  m.distance_pc = {Distribution::Kind::kUniform, 20.0, 60.0};
  m.host_mass_rel_error = 0.05;
  return m;
}

bool injected_follow_up(const SurveyModel& survey, long index, double arc_yr, std::uint64_t noise_seed,
                        InjectedFollowUp& out, Rng& noise) {
  StarRecord star;
  simulate_star(survey, index, star, out.truth);
  out.row = screen_star(star, "", ScreenOptions{});
  if (!out.row.ok()) return false;
  noise = Rng::for_star(noise_seed, star.id);
  out.file = follow_up_star_file(star, out.truth, {2025.0, 2025.0 + arc_yr / 2, 2025.0 + arc_yr}, 2.0, 0.3, noise);
  return true;
}

}  // namespace heft
