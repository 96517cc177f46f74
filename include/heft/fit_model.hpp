#pragma once
/// \file fit_model.hpp
/// The deep fit's model: the parameter layout, the options, and the
/// negative log posterior of one star as a sum of per-observation pieces
/// (the catalogue proper motions through the window model, each relative-
/// astrometry epoch, each host RV, the priors), templated for Ceres Jets.
/// fit_residuals.hpp adds each piece to a Ceres problem as its own residual
/// block. Model, priors and their references: docs/method.md, Sect. 9.

#include <ceres/jet.h>

#include <Eigen/Core>
#include <cmath>
#include <string>
#include <vector>

#include "heft/curve.hpp"
#include "heft/draws.hpp"
#include "heft/ensemble.hpp"
#include "heft/prior.hpp"
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
inline constexpr int kMaxFitParams = kFitCore + 2 * kMaxInstruments;
/// Jet of the gradient objective (all parameters) and of Ceres' dynamic
/// autodiff cost functions (derivative stride kResidualStride).
using FitJet = ceres::Jet<double, kMaxFitParams>;
inline constexpr int kResidualStride = 4;
using StrideJet = ceres::Jet<double, kResidualStride>;

struct FitOptions {
  /// Mass and eccentricity priors, detect_sigma: without relative astrometry
  /// and with sig_joint below detect_sigma the mass prior is uniform on
  /// [0, m_max] and the result an upper limit (as in heft curve).
  PriorOptions prior;
  double a_min_au = 0.5, a_max_au = 500.0;      ///< log-uniform prior on a
  double jitter_min_m_s = 0.01, jitter_max_m_s = 1000.0;  ///< log-uniform jitter prior
  int starts = 64;
  std::uint64_t seed = 1;
  /// Walkers per chain (EnsembleOptions::chains); 0: automatic, the even
  /// max(32, 2 x parameters) (walkers_per_chain).
  int walkers = 0;
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
  int n_relative() const { return static_cast<int>(rel_.size()); }
  int n_rv() const { return static_cast<int>(rv_.size()); }
  /// 6 proper motions, 2 per relative epoch, 1 per RV, host-mass and
  /// parallax priors.
  int n_residuals() const { return n_res_; }
  bool upper_limit() const { return mass_prior_.upper_limit(); }
  const MassPrior& mass_prior() const { return mass_prior_; }
  /// Epoch of the mean longitude kLambda: the mean epoch of the relative
  /// astrometry, else the late catalogue epoch.
  double ref_epoch_yr() const { return phase_epoch_yr_; }
  /// Lower end of the mass prior in ln mass (MassPrior::floor_mjup).
  double mass_floor_mjup() const { return mass_prior_.floor_mjup(); }

  /// Whitened residuals r (n_residuals(), in the order of the pieces below)
  /// and the rest of the negative log posterior `extra` (RV log-normalisers,
  /// non-Gaussian prior terms), so that -ln posterior = r.r / 2 + extra +
  /// const. Returns false outside the prior support or where a value is not
  /// finite.
  template <typename T>
  bool evaluate(const T* p, T* r, T& extra) const;

  /// The pieces of evaluate(), one per observation type; each takes the
  /// orbit of p (orbit_at) and writes its whitened residuals.
  /// Inside the prior's support (bounds of every parameter)?
  bool in_support(const double* p) const;
  /// The same at the values of Jets.
  template <typename T>
  bool in_support(const T* p) const {
    double v[kMaxFitParams];
    for (int i = 0; i < n_params(); ++i) v[i] = scalar_of(p[i]);
    return in_support(static_cast<const double*>(v));
  }
  template <typename T>
  Orbit<T> orbit_at(const T* p) const;
  /// The six catalogue proper motions (pml_late, dpm_late, dpm_early).
  template <typename T>
  void anomaly_residuals(const Orbit<T>& o, const T* p, T r[6]) const;
  /// Relative-astrometry epoch k: two decorrelated residuals.
  template <typename T>
  void relative_residuals(const Orbit<T>& o, const T* p, int k, T r[2]) const;
  /// Host RV k; adds its log-normaliser to `extra`.
  template <typename T>
  T rv_residual(const Orbit<T>& o, const T* p, int k, T& extra) const;
  /// Host-mass and parallax priors as two residuals; the non-Gaussian prior
  /// terms (log-normal host mass, eccentricity, mass) into `extra`.
  template <typename T>
  void prior_residuals(const T* p, T r[2], T& extra) const;

  /// -ln posterior (+inf outside the support) and -2 ln L: every whitened
  /// residual squared (data and the Gaussian host-mass and parallax
  /// constraints) plus the RV log-normalisers; constants dropped.
  double neg_log_post(const double* p, double* m2lnl = nullptr) const;

  /// A start drawn from the prior (orientation, phase, e, mass, a; a near
  /// the imaged separation when there is relative astrometry).
  Eigen::VectorXd prior_draw(Rng& rng) const;

  /// With relative astrometry: a start drawn from the observables. The
  /// imaged positions fix the sky position and motion at ref_epoch_yr() (a
  /// weighted straight line, drawn within its errors); the line-of-sight
  /// offset z is uniform within 1.5 x the projected separation and the
  /// radial velocity uniform within the bound-orbit limit; masses, parallax,
  /// PM and RV terms as prior_draw. Falls back to prior_draw.
  Eigen::VectorXd observable_draw(Rng& rng) const;

  /// With relative astrometry (two epochs or more): a start whose sky orbit
  /// follows the imaged positions. e, the mean anomaly and a are drawn as
  /// in prior_draw; the orientation and a then come from the Thiele-Innes
  /// constants that fit the positions by weighted least squares at those
  /// (P, e, M) (the positions are linear in A, B, F, G; e.g. Heintz 1978,
  /// Double Stars), with the period refitted to the new a until a settles
  /// (at most eight fits); of 32 such candidates the one with the smallest
  /// chi^2 of the positions. These reach the basins of curved arcs, where a
  /// straight line does not.
  /// Falls back to prior_draw.
  Eigen::VectorXd thiele_innes_draw(Rng& rng) const;

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
  /// The imaged positions (x north, y east; mas) with one isotropic
  /// variance each (mas^2), at epochs relative to ref_epoch_yr().
  void imaged_positions(std::vector<double>& t, std::vector<double>& x, std::vector<double>& y,
                        std::vector<double>& s2) const;
  template <typename T>
  T rv_residual_at(const Orbit<T>& o, const T& a, const T& q, const T* p, const RvPoint& v, T& extra) const;
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
  MassPrior mass_prior_;
  FitOptions opt_;
  double ln_m_lo_, ln_m_hi_, ln_a_lo_, ln_a_hi_, ecc_max_;
  double ln_a_start_lo_, ln_a_start_hi_;
  AnomalyData anomaly_;
  Eigen::Vector2d pml_obs_;
  Eigen::Matrix2d pml_cov_;
};

/// The deep fit's sampling coordinates with relative astrometry: the
/// parameters with the slots kLnA ... kLambda holding the companion's
/// relative position (x north, y east, z away; mas) and velocity (mas/yr)
/// at FitModel::ref_epoch_yr() instead of its orbital elements.
Eigen::VectorXd observables_from_params(const FitModel& m, const Eigen::VectorXd& p);
/// The inverse: parameters p (n_params() values) from observables u, and
/// ln |d params / d u|; false where u is not a bound orbit (0 < e < 1).
bool params_from_observables(const FitModel& m, const double* u, double* p, double& log_jacobian);


/// Walkers per chain of a run: FitOptions::walkers, or when 0 the even
/// max(32, 2 x parameters).
int walkers_per_chain(const FitModel& m, const FitOptions& opt);

/// A star of the canonical table as a star file: normal host-mass prior
/// from its mass columns or from the defaults; no follow-up data. `ok`
/// false when no host mass is known.
StarFile star_file_of(const StarRecord& star, double host_mass_msun, double host_mass_error_msun, bool& ok);

/// What the fit's priors are, in words (the --help footer; the JSON "priors"
/// object states the same with the run's values).
std::string fit_prior_help();

}  // namespace heft
