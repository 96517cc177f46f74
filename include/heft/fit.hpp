#pragma once
/// \file fit.hpp
/// Deep single-star Keplerian fit: the proper-motion anomaly through the
/// window model (window.hpp), relative astrometry of the companion and the
/// host's radial velocities, fitted jointly. Ceres finds every local
/// minimum from many starts; an affine-invariant ensemble sampler
/// (ensemble.hpp) gives the posterior; a profile likelihood gives
/// mass-separation curves in the schema of curve.hpp.
///
/// Model, priors and their references: docs/method.md, Sect. 9.

#include <Eigen/Core>
#include <cmath>
#include <string>
#include <vector>

#include "heft/curve.hpp"
#include "heft/draws.hpp"
#include "heft/ensemble.hpp"
#include "heft/screen.hpp"
#include "heft/starfile.hpp"

namespace heft {

/// Layout of the parameter vector. After the core come one RV offset (m/s)
/// per instrument, then one ln jitter (ln m/s) per instrument.
enum FitParam : int {
  kLnMass = 0,  ///< ln of the companion mass in MJup
  kLnA,         ///< ln of the relative semi-major axis in AU
  kSqrtECos,    ///< sqrt(e) cos omega (companion's omega)
  kSqrtESin,    ///< sqrt(e) sin omega
  kCosInc,      ///< cos i
  kNode,        ///< Omega (rad)
  kLambda,      ///< mean longitude M + omega + Omega at FitModel::ref_epoch_yr() (rad)
  kHostMass,    ///< host mass (Msun)
  kParallax,    ///< parallax (mas)
  kPmra,        ///< barycentric mu_alpha* at the late epoch (mas/yr)
  kPmdec,       ///< barycentric mu_delta (mas/yr)
  kFitCore
};

/// At most this many RV instruments (each adds an offset and a jitter).
inline constexpr int kMaxInstruments = 6;
/// Posterior modes sampled with imaging: at most kMaxModes, each with a
/// Laplace evidence at least kMinModeEvidenceRatio times the strongest's.
inline constexpr std::size_t kMaxModes = 4;
inline constexpr double kMinModeEvidenceRatio = 1e-2;
inline constexpr int kMaxFitParams = kFitCore + 2 * kMaxInstruments;

struct FitOptions {
  double m_min_mjup = 0.1, m_max_mjup = 200.0;  ///< log-uniform mass prior (detections)
  double a_min_au = 0.5, a_max_au = 500.0;      ///< log-uniform prior on a
  Distribution ecc{Distribution::Kind::kUniform, 0.0, 0.95};
  double jitter_min_m_s = 0.01, jitter_max_m_s = 1000.0;  ///< log-uniform jitter prior
  /// Without relative astrometry and with sig_joint below this, the mass
  /// prior is uniform on [0, m_max] and the result an upper limit (as in
  /// heft curve).
  double detect_sigma = 3.0;
  int starts = 64;
  std::uint64_t seed = 1;
  int walkers = 64;
  EnsembleOptions sampler;
  bool sample = true;
};

/// The negative log posterior of one star, templated for Ceres Jets.
class FitModel {
 public:
  /// `anomaly` is the screen's result for f.star (status ok).
  FitModel(const StarFile& f, const AnomalyResult& anomaly, const FitOptions& opt);

  int n_params() const { return kFitCore + 2 * n_inst_; }
  int n_instruments() const { return n_inst_; }
  int n_residuals() const { return n_res_; }
  bool upper_limit() const { return upper_limit_; }
  /// Epoch of the mean longitude kLambda: the mean epoch of the relative
  /// astrometry, else the late catalogue epoch.
  double ref_epoch_yr() const { return phase_epoch_yr_; }
  /// Lower end of the mass prior (MJup): m_min, or 1e-4 m_max for upper limits.
  double mass_floor_mjup() const { return std::exp(ln_m_lo_); }

  /// Whitened residuals r (n_residuals(): 6 proper motions, 2 per relative
  /// epoch, 1 per RV, host-mass and parallax priors) and the rest of the
  /// negative log posterior `extra` (RV log-normalisers, non-Gaussian prior
  /// terms), so that -ln posterior = r.r / 2 + extra + const.
  /// Returns false outside the prior support.
  template <typename T>
  bool evaluate(const T* p, T* r, T& extra) const;

  /// -ln posterior (+inf outside the support) and -2 ln L: every whitened
  /// residual squared (data and the Gaussian host-mass and parallax
  /// constraints) plus the RV log-normalisers; constants dropped.
  double neg_log_post(const double* p, double* m2lnl = nullptr) const;

  /// A start drawn from the prior (orientation, phase, e, mass, a; a near
  /// the imaged separation when there is relative astrometry).
  Eigen::VectorXd prior_draw(Rng& rng) const;

  /// Parameters of an orbit draw (e.g. from heft curve): the barycentric PM
  /// drawn given the orbit's reflex, RV offsets at their weighted best,
  /// jitters at the median RV error.
  Eigen::VectorXd from_orbit(const OrbitDraw& d, Rng& rng) const;
  /// -ln L of the radial velocities alone (0 without RVs).
  double rv_neg_log_like(const double* p) const;
  /// The anomaly as heft curve sees it (for its Monte Carlo draws).
  const AnomalyData& anomaly() const { return anomaly_; }
  const FitOptions& options() const { return opt_; }
  bool has_relative() const { return !rel_.empty(); }

  /// The posterior orbit at parameters p.
  OrbitDraw orbit(const double* p) const;
  std::vector<std::string> param_names() const;

  const std::vector<std::string>& instruments() const { return instruments_; }

 private:
  template <typename T>
  Orbit<T> orbit_at(const T* p) const;
  template <typename T>
  T rv_residual(const Orbit<T>& o, const T& a, const T& q, const T* p, const RvPoint& v, T& extra) const;
  template <typename T>
  void model_pm(const Orbit<T>& o, const T& a, const T& q, const T& plx, const T& pmra, const T& pmdec,
                T y[6]) const;

  Window early_, late_;
  double dt_yr_, phase_epoch_yr_;
  Eigen::Matrix<double, 6, 1> pm_obs_;
  Eigen::Matrix<double, 6, 6> pm_whiten_;  ///< L^-1 of the 6x6 covariance
  double plx_cat_, plx_sigma_;
  HostMassPrior host_;
  std::vector<RelativeEpoch> rel_;
  std::vector<RvPoint> rv_;
  std::vector<std::string> instruments_;
  std::vector<double> rv_mean_, rv_spread_;  ///< per instrument, for starts
  int n_inst_, n_res_;
  bool upper_limit_;
  FitOptions opt_;
  double ln_m_lo_, ln_m_hi_, ln_a_lo_, ln_a_hi_, ecc_max_;
  double ln_a_start_lo_, ln_a_start_hi_;
  AnomalyData anomaly_;
  Eigen::Vector2d pml_obs_;
  Eigen::Matrix2d pml_cov_;
};

/// One distinct local minimum of the negative log posterior.
struct FitMinimum {
  Eigen::VectorXd p;
  double m2lnl = 0.0;       ///< -2 ln L of the data
  double m2lnpost = 0.0;    ///< -2 ln posterior (up to a constant)
  int hits = 1;             ///< starts that converged here
  bool covariance_ok = false;
  /// Ceres covariance of the core parameters and RV offsets (jitters held
  /// at their best values); empty when not ok.
  Eigen::MatrixXd cov;
  std::string flag;         ///< why the covariance is missing
  /// Derived values and their linearised errors: mass_mjup, a_au, ecc,
  /// period_yr, inc_deg.
  Eigen::Matrix<double, 5, 1> derived, derived_sigma;
};

/// Names of FitMinimum::derived.
const std::vector<std::string>& derived_names();

/// A mode sampled by its own ensemble (runs with relative astrometry; one
/// mode of weight 1 otherwise).
struct ModeStart {
  double m2lnpost;  ///< at its minimum
  double weight;    ///< posterior weight (Laplace evidence share)
  int walkers;
  /// Holds its mirror orbit too (omega + pi, Omega + pi: the same likelihood
  /// without RVs): every second sample is mirrored.
  bool mirrored = false;
};

struct FitResult {
  std::vector<FitMinimum> minima;  ///< best first
  bool upper_limit = false;
  bool orbit_statistical = false;  ///< no relative astrometry
  bool sampled = false;
  /// The pooled chains of the modes (iat_steps: the largest over modes;
  /// acceptance: weighted by the modes) and each kept sample's weight
  /// (summing to 1).
  EnsembleChain chain;
  std::vector<double> sample_weight;
  double init_ess = 0.0;           ///< without imaging: effective size of the walkers' pool
  std::vector<ModeStart> modes;    ///< the sampled modes
  std::vector<std::string> warnings;
};

/// Multi-start optimisation (Levenberg-Marquardt on the residuals, then
/// Ceres' gradient-problem solver on the full negative log posterior),
/// distinct minima with Ceres covariances, then (opt.sample) the ensemble
/// sampler: with relative astrometry one ensemble per mode, the modes
/// weighted by their Laplace evidence; without, one ensemble started from
/// heft curve's importance-weighted draws.
FitResult run_fit(const FitModel& model, const FitOptions& opt, const std::string& rng_id);

/// Profile-likelihood curve: for each a of `a_au`, -2 ln L minimised over
/// all other parameters (multi-start), mass_med the best mass and the
/// 68 / 95 % bounds where Delta(-2 ln L) = 1 and 3.84 (NaN where the prior
/// bound is reached first); the weight of a point is its relative profile
/// likelihood exp(-(-2 ln L_min)/2), normalised.
Curve profile_curve(const FitModel& model, const std::vector<double>& a_au, const FitOptions& opt,
                    const std::string& rng_id);

/// A star of the canonical table as a star file: normal host-mass prior
/// from its mass columns or from the defaults; no follow-up data. `ok`
/// false when no host mass is known.
StarFile star_file_of(const StarRecord& star, double host_mass_msun, double host_mass_error_msun, bool& ok);

}  // namespace heft
