#pragma once
/// \file curve.hpp
/// Companion mass-separation constraints from the proper-motion anomaly:
/// an analytic circular-orbit curve and a forward-model Monte Carlo
/// posterior with the node angle and mass ratio marginalised analytically.
///
/// Dark companion assumed: the catalogues see the host (photocentre = host).
/// References: Kervella et al. 2019, A&A 623, A72, Sect. 3; Kervella et al.
/// 2022, A&A 657, A7 (the anomaly-to-mass relation and window smearing);
/// the z-plane marginalisation is described in docs/method.md, Sect. 8.

#include <Eigen/Core>
#include <array>
#include <limits>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "heft/anomaly.hpp"
#include "heft/catalog.hpp"
#include "heft/draws.hpp"
#include "heft/kepler.hpp"
#include "heft/prior.hpp"
#include "heft/stats.hpp"  // log_grid for CurveOptions::a_au
#include "heft/status.hpp"
#include "heft/window.hpp"

namespace heft {

/// The observation a curve is computed from.
struct AnomalyData {
  Eigen::Vector4d dpm;   ///< (late ra, late dec, early ra, early dec), mas/yr
  Eigen::Matrix4d cov;   ///< its covariance, (mas/yr)^2
  double parallax_mas, parallax_error_mas;
  double host_mass_msun, host_mass_error_msun;
  double sig_joint;
  Window early, late;    ///< catalogue windows and reference epochs
};

/// Builds AnomalyData from a screened star (`row.ok()` required); the host
/// mass follows host_mass_prior (the star's, else `host_mass_msun`; `ok`
/// false when neither).
AnomalyData anomaly_data(const StarRecord& star, const AnomalyResult& r, double host_mass_msun,
                         double host_mass_error_msun, bool& ok);

/// Points of the default log grid of trial separations (`--n-a` of heft
/// curve and heft rank), refined where needed.
constexpr int kDefaultSeparations = 64;

/// Options of a curve (units in the names).
struct CurveOptions {
  std::vector<double> a_au;     ///< trial semi-major axes (sorted ascending)
  /// Orbit draws per separation and round, at most (common random numbers):
  /// a round weighs them in blocks (eighths of prior draws, quarters from a
  /// proposal) until the effective sample size reaches 1,000
  /// (docs/method.md, Sect. 8).
  int draws = 4096;
  int z_samples = 8;            ///< samples of z per draw
  PriorOptions prior;           ///< mass and eccentricity priors, detect_sigma
  int refine_rounds = 2;        ///< adaptive refinement of the a grid
  std::uint64_t seed = 1;
  bool keep_draws = false;
  /// Whether the mass quantiles' Monte Carlo errors are computed
  /// (CurvePoint::mass_error): one more selection over the samples of each
  /// separation.
  bool quantile_errors = true;
  /// Where positive, a separation's rounds go on past the effective-size
  /// target (within their four rounds of `draws`) until the Monte Carlo
  /// error of its outermost quantiles (an upper limit's 95 %, a detection's
  /// 2.5 and 97.5 %) is at most this fraction of their value.
  double quantile_tolerance = 0.0;
  /// The reference the adaptive sampler is checked against: every
  /// separation weighs all `draws` prior draws, with no proposal rounds,
  /// no neighbour's proposal and no early stop (plain importance sampling
  /// from the prior; omega still from its conditional where the S/N asks
  /// for it, an exact proposal). Costs `draws` draws per separation
  /// whatever the S/N; for bench/curve_calibration --plain, not for use.
  bool plain_sampler = false;
};

/// One separation of a curve. Masses in Jupiter masses; NaN where not given.
struct CurvePoint {
  double a_au, sep_mas, period_yr, weight;
  double mass_lo95, mass_lo68, mass_med, mass_hi68, mass_hi95;
  double ess;   ///< effective sample size of the weighted z samples
  /// Analytic curves: "multiple_solutions" when the circular-orbit relation
  /// has several roots in the mass ratio for some column (the smallest is
  /// given), "not_converged" when a column has no root with q <= 1/2.
  Notes notes;
  /// Analytic curves: every root (MJup, ascending) of the columns lo95, lo68,
  /// med, hi68, hi95 (empty for Monte Carlo curves).
  std::array<std::vector<double>, 5> roots_mjup;
  /// Monte Carlo curves: the standard errors of mass_lo95 ... mass_hi95
  /// (MJup), from the weighted samples alone (docs/method.md, "Errors of
  /// the mass quantiles"); kAbsent where the column is, below kLowEss
  /// effective samples, and where one sample holds the quantile.
  std::array<double, 5> mass_error{kAbsent, kAbsent, kAbsent, kAbsent, kAbsent};
  /// Monte Carlo curves: the effective number of orbit draws, each draw's z
  /// samples' weights summed (between ess / z_samples and ess; near
  /// ess / z_samples where a draw's samples weigh alike: from S/N about 10,
  /// where they also carry nearly the same mass, and where the weights are
  /// flat); kAbsent for other methods.
  double ess_orbits = kAbsent;
  /// Monte Carlo curves: the orbit draws weighed at this separation over
  /// all its rounds, and the number of those rounds (the first, of prior
  /// draws or from a neighbour's proposal, then up to three adaptive ones;
  /// docs/method.md, "Draws in blocks"); 0 for other methods.
  long draws = 0;
  int rounds = 0;
};

struct Curve {
  bool upper_limit = false;
  std::vector<CurvePoint> points;
  std::vector<OrbitDraw> draws;  ///< with keep_draws (for `heft predict`)
  double min_ess = 0.0;
  /// Work done (Monte Carlo curves): orbit draws weighed over all
  /// separations and adaptive rounds, and evaluations of the two-catalogue
  /// window model (each solves Kepler's equation four times).
  long draws_weighed = 0, window_evaluations = 0;
  /// Monte Carlo curves: log10 of the Bayes factor between "one companion
  /// drawn from the curve's prior" (mass, orbit, and a log-uniform in a over
  /// the grid) and "no companion" for the observed anomalies, and its Monte
  /// Carlo error (docs/method.md, Sect. 8); NaN when not computed.
  double log10_bayes = std::numeric_limits<double>::quiet_NaN();
  double log10_bayes_error = std::numeric_limits<double>::quiet_NaN();
};

/// Largest eccentricity of the Monte Carlo curve: its prior is cut above
/// (draws beyond have no weight; not renormalised, so the Bayes factor is
/// lower by the prior's share above). A prior with no mass at or below it
/// is computed at it (heft fit's starting draws); heft curve and heft rank
/// refuse such a prior (check_curve_eccentricity).
inline constexpr double kCurveMaxEcc = 0.99;
/// Whether the eccentricity prior has mass at or below kCurveMaxEcc.
bool curve_eccentricity_ok(const Distribution& ecc);
/// Throws UsageError naming `option` where it has not.
void check_curve_eccentricity(const Distribution& ecc, const std::string& option);

/// Effective sample size below which a Monte Carlo point's band is
/// unreliable: `heft curve` warns, and the grid is not refined for it.
inline constexpr double kLowEss = 100.0;

/// Forward-model Monte Carlo curve (docs/method.md, Sect. 8).
/// The model anomalies are linear in z = q (cos Omega, sin Omega), so each
/// draw of (i, omega, e, phase, host mass, parallax) is marginalised over z
/// exactly in its Gaussian part; the mass prior enters by importance
/// sampling of z; the period's dependence on m1 + m2 is corrected by
/// fixed-point iteration. `rng_id` names the random stream (the star id).
Curve montecarlo_curve(const AnomalyData& d, const CurveOptions& opt, const std::string& rng_id);

/// Analytic circular-orbit curve: the host's reflex speed 2 pi q a / P
/// (exact in q) times the window and long-baseline smearing of a circular
/// orbit and the statistical projection factor for isotropic orientations
/// (computed here), equated to the late anomaly.
///
/// Notes:
/// 1. The period depends on q through m1 + m2 = m1 / (1 - q), and the
///    smearing factor oscillates once the period is shorter than the window,
///    so the relation can have several roots in q. All are bracketed on a
///    dense log grid in q (analytic_relation_grid_points) and refined by
///    bisection; the smallest is the column's mass, the others are in
///    CurvePoint::roots_mjup with the note "multiple_solutions". Roots are
///    sought for q <= 1/2 (the host is the heavier body; beyond, the dark-
///    companion model does not apply); a column without one is NaN with
///    "not_converged".
/// 2. The relation is not a posterior: points have no weight (NaN, written
///    empty), and it ignores the mass prior; a point with a column above
///    the prior's m_max gets the note "above_prior_max".
Curve analytic_curve(const AnomalyData& d, const CurveOptions& opt);

/// The late-epoch anomaly (mas/yr) that the analytic relation predicts for
/// mass ratio q at a_au with projection factor f: f 2 pi q a parallax eta / P,
/// with P from m1 / (1 - q) and eta the window and baseline smearing.
double analytic_anomaly_mas_yr(const AnomalyData& d, double a_au, double q, double f);

/// Grid points in q (log-spaced from 1e-12 to 1/2) on which the analytic
/// relation is bracketed.
inline constexpr int kAnalyticGridPoints = 4000;

/// Quantiles of the projection factor |v_sky| / |v| of a circular orbit for
/// isotropic orientation and uniform phase (deterministic Monte Carlo with
/// 2^18 samples); p in (0, 1).
double projection_factor_quantile(double p);

/// Model anomaly (late ra, late dec, early ra, early dec; mas/yr) of one
/// companion through the window model, for tests and the simulator check.
Eigen::Vector4d model_anomaly(const Orbit<double>& o, double a_au, double q, double parallax_mas,
                              const Window& early, const Window& late);

/// Derivative of model_anomaly with respect to ln P (mas/yr per unit
/// ln P) with e, the angles, the mean anomaly at the reference epoch, a, q
/// and the parallax held fixed, from one evaluation of the window model
/// with its derivative (window_basis_pair_dlnp): the Monte Carlo curve
/// interpolates its period correction with it.
Eigen::Vector4d model_anomaly_dlnp(const Orbit<double>& o, double a_au, double q, double parallax_mas,
                                   const Window& early, const Window& late);


/// Reads the rows of one star from a curve table (the first star when `id`
/// is empty; `id` is set to it), sorted by a. Needs the columns id, a_au,
/// sep_mas and the five mass quantiles; empty masses read as NaN; `weight`
/// is read when present (in [0, 1]; empty or absent: NaN). Errors name
/// file, line and column.
std::vector<CurvePoint> read_curve_table(std::istream& in, const std::string& name, std::string& id);

/// One point of a curve as JSON (the `points` of `heft curve --json`): a_au,
/// sep_mas, period_yr, weight, the mass quantiles as "mass_mjup" (q2.5,
/// q16, q50, q84, q97.5; an upper limit's q68 and q95), with `errors` their
/// Monte Carlo errors as "mass_mjup_error" under the same keys (null where
/// absent), ess, ess_orbits (null for other methods than Monte Carlo),
/// notes, and for analytic curves with several roots
/// "roots_mjup" under the same keys.
nlohmann::ordered_json curve_point_json(const CurvePoint& p, bool upper_limit, bool errors);

/// The curve table's columns with their units, in output order.
const std::vector<ColumnUnit>& curve_column_units();
/// Header line of the curve table (with newline).
std::string curve_header();
void append_curve_rows(std::string& out, const std::string& id, const Curve& c);

}  // namespace heft
