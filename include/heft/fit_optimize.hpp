#pragma once
/// \file fit_optimize.hpp
/// The deep fit's optimiser: local minima of the negative log posterior
/// from many starts (Levenberg-Marquardt on the residual blocks of
/// fit_residuals.hpp, then Ceres' gradient-problem solver on the whole
/// negative log posterior), merged when they coincide, with Ceres
/// covariances and linearised errors of the derived orbit values.

#include <Eigen/Core>
#include <string>
#include <vector>

#include "heft/fit_model.hpp"
#include "heft/fit_residuals.hpp"

namespace heft {

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

/// `n` optimiser starts: with relative astrometry a third each from the
/// observables (FitModel::observable_draw), through the imaged positions
/// (FitModel::thiele_innes_draw) and from the prior; all from the prior
/// without imaging.
std::vector<Eigen::VectorXd> draw_starts(const FitModel& m, int n, Rng& rng);

/// Minimises from every start (in parallel; the result does not depend on
/// the thread count) with `pinned` held, and returns the distinct minima,
/// best first. Two minima are the same when their -2 ln posterior agree to
/// 0.02 and their parameters to 0.01 (0.02 rad in the angles); `hits`
/// counts the starts that reached each.
std::vector<FitMinimum> find_minima(const FitModel& m, const Pinned& pinned,
                                    const std::vector<Eigen::VectorXd>& starts);

/// Ceres covariance of the core parameters and offsets at a minimum
/// (jitters held at their values) and the derived values with their
/// linearised errors; a degenerate covariance sets `flag` instead of failing.
void finish_minimum(const FitModel& m, FitMinimum& mn);

/// Minima closer than this squared Mahalanobis distance to a better one
/// (in its covariance, angles wrapped) are the same basin.
inline constexpr double kSameMinimumMahalanobis2 = 9.0;

/// Squared Mahalanobis distance of parameters `p` from a minimum at `at` in
/// the core and the RV offsets (the first `nc` parameters; Omega and the
/// mean longitude wrapped), with `chol` the Cholesky factor of the
/// minimum's covariance.
double distance2_to_minimum(const Eigen::VectorXd& p, const Eigen::VectorXd& at, const Eigen::MatrixXd& chol, int nc);

/// Distinct minima in the statistical sense: each minimum (best first, with
/// finish_minimum applied) joins the first better one whose covariance puts
/// it within kSameMinimumMahalanobis2 (its hits added); what remains are
/// basins the data tell apart. Not a claim that every local minimum exists
/// or was found: the starts sample the observables, not the whole space.
std::vector<FitMinimum> merge_minima(const FitModel& m, std::vector<FitMinimum> minima);

}  // namespace heft
