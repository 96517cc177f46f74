#pragma once
/// \file calibration.hpp
/// Coverage studies: simulate companions from a curve's own prior, screen
/// them, compute their curves and count how often the bands hold the truth
/// (the calibration contract of docs/method.md, Sect. 8; used by the test
/// suite and bench/curve_calibration).

#include <cstdint>
#include <limits>
#include <vector>

#include "heft/curve.hpp"
#include "heft/rng.hpp"
#include "heft/screen.hpp"
#include "heft/simulate.hpp"

namespace heft {

/// Coverage of the Monte Carlo bands on injected systems (a sensitivity and
/// calibration study): companions drawn by `survey`, kept when their observed
/// sig_joint is in [min_sig, max_sig), each curve evaluated at its true a
/// only; or, with `grid` given, on that grid with the true a inserted
/// (refined as opt.refine_rounds says) and read at the true a, so that its
/// rounds start from the neighbouring separations' proposals as in a whole
/// curve. An upper limit's bands are [0, mass_hi68] and [0, mass_hi95].
struct Coverage {
  int systems = 0;
  double in68 = 0.0, in95 = 0.0;  ///< fractions with the true mass inside the band
  double max_sig = 0.0;
  /// Per system, in order, whether its 95 % band held the truth: two
  /// studies of the same systems compare system by system (paired).
  std::vector<bool> held95;
  /// The median over systems of the effective number of orbits at the true
  /// a (CurvePoint::ess_orbits), on which the bands' coverage at high S/N
  /// depends (docs/performance.md, "Stop 42").
  double median_ess_orbits = 0.0;
};
Coverage curve_coverage(const SurveyModel& survey, const CurveOptions& opt, int n_systems,
                        double min_sig, const std::vector<double>& grid = {},
                        double max_sig = std::numeric_limits<double>::infinity());

/// Reliability of p_real (docs/method.md, Sect. 10): stars of `survey`
/// (whose companion fraction is the occurrence) with sig_joint >= min_sig,
/// each with its curve on `opt.a_au`, binned by p_real. Calibrated when,
/// in every bin, the fraction of stars with an injected companion matches
/// the mean p_real.
struct Reliability {
  static constexpr int kBins = 5;  ///< p_real in [0, 0.2), ..., [0.8, 1]
  int stars[kBins] = {}, real[kBins] = {};
  double sum_p[kBins] = {};   ///< expected number of real companions per bin
  double sum_pq[kBins] = {};  ///< its variance, the sum of p (1 - p)
  int total() const;
};
Reliability p_real_reliability(const SurveyModel& survey, const CurveOptions& opt, long n_stars,
                               double min_sig);

/// A survey of companions drawn from the prior of `opt` (log-uniform mass in
/// [m_min, m_max], or with `upper_limit` the upper limits' uniform mass in
/// [0, m_max]; e from opt.ecc, isotropic) with a log-uniform in [a_lo, a_hi],
/// hosts at 10-60 pc with 5 % mass errors and RVs: the population for which
/// curve_coverage must give nominal coverage.
SurveyModel coverage_survey(const CurveOptions& opt, double a_lo_au, double a_hi_au,
                            std::uint64_t seed, bool upper_limit = false);

/// The deep fit's coverage population (docs/performance.md, "Deep fit";
/// tests/fit_test.cpp and bench/fit_bench): companions drawn from the prior
/// the study gives the fit (mass log-uniform 5-100 MJup, a log-uniform
/// 3-30 AU, e uniform 0-0.95, isotropic) around hosts at 20-60 pc with 5 %
/// mass errors.
SurveyModel fit_coverage_survey(std::uint64_t seed);

/// One system of that study: star `index` of `survey`, screened, with three
/// imaging epochs of its companion over `arc_yr` from 2025.0 (2 mas,
/// 0.3 deg) whose noise comes from `noise`, the stream (noise_seed, star
/// id), left where the imaging noise ended for the caller's further draws.
/// False (and `out` partly filled) when the star does not screen.
struct InjectedFollowUp {
  SimTruth truth;
  ScreenRow row;
  StarFile file;
};
bool injected_follow_up(const SurveyModel& survey, long index, double arc_yr, std::uint64_t noise_seed,
                        InjectedFollowUp& out, Rng& noise);

}  // namespace heft
