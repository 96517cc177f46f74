#pragma once
/// \file fit_residuals.hpp
/// The deep fit as a Ceres least-squares problem: one autodiff cost functor
/// per observation type (the catalogue proper-motion anomaly, a relative-
/// astrometry epoch, a host RV) and one for the Gaussian priors, each added
/// as its own residual block over the same two parameter blocks (the core
/// parameters with the RV offsets; the ln jitters, held constant).

#include <Eigen/Core>
#include <vector>

#include "heft/fit_model.hpp"

// Not <ceres/ceres.h>: it brings glog, whose CHECK macro would replace
// Catch's in every test that includes a heft header.
namespace ceres {
class Problem;
}  // namespace ceres

namespace heft {

/// Parameters held fixed (the profile's a and mass) by index.
struct Pinned {
  std::vector<int> index;
  std::vector<double> value;
  template <typename T>
  void apply(T* p) const {
    for (std::size_t k = 0; k < index.size(); ++k) p[index[k]] = T(value[k]);
  }
  bool contains(int i) const;
};

/// The full parameter vector from the two blocks, with the pins applied.
template <typename T>
void gather_params(const FitModel& m, const Pinned& pinned, T const* const* blocks, T* p) {
  const int nc = kFitCore + m.n_instruments();
  for (int i = 0; i < nc; ++i) p[i] = blocks[0][i];
  for (int i = nc; i < m.n_params(); ++i) p[i] = blocks[1][i - nc];
  pinned.apply(p);
}

/// What every residual functor shares: gather the parameters from the
/// blocks, then the observation's own residuals (Derived::residuals).
template <typename Derived>
struct BlockResidual {
  const FitModel* model;
  const Pinned* pinned;
  template <typename T>
  bool operator()(T const* const* blocks, T* r) const {
    T p[kMaxFitParams];
    gather_params(*model, *pinned, blocks, p);
    return static_cast<const Derived&>(*this).residuals(p, r);
  }
};

/// The six whitened catalogue proper motions (FitModel::anomaly_residuals).
struct AnomalyResidual : BlockResidual<AnomalyResidual> {
  static constexpr int kSize = 6;
  template <typename T>
  bool residuals(const T* p, T* r) const {
    model->anomaly_residuals(model->orbit_at(p), p, r);
    return true;
  }
};

/// One relative-astrometry epoch (FitModel::relative_residuals).
struct RelativeResidual : BlockResidual<RelativeResidual> {
  static constexpr int kSize = 2;
  int epoch;
  template <typename T>
  bool residuals(const T* p, T* r) const {
    model->relative_residuals(model->orbit_at(p), p, epoch, r);
    return true;
  }
};

/// One host RV (FitModel::rv_residual); its log-normaliser is constant
/// while the jitters are held.
struct RvResidual : BlockResidual<RvResidual> {
  static constexpr int kSize = 1;
  int index;
  template <typename T>
  bool residuals(const T* p, T* r) const {
    T extra(0.0);
    r[0] = model->rv_residual(model->orbit_at(p), p, index, extra);
    return true;
  }
};

/// The host-mass and parallax priors; also the prior's support, so that a
/// step outside it fails the whole evaluation.
struct PriorResidual : BlockResidual<PriorResidual> {
  static constexpr int kSize = 2;
  template <typename T>
  bool residuals(const T* p, T* r) const {
    if (!model->in_support(p)) return false;
    T extra(0.0);
    model->prior_residuals(p, r, extra);
    return true;
  }
};

/// Adds every residual block of `m` at parameters `p` (core and RV offsets
/// in one block, the ln jitters in a second one held constant). `p` and
/// `pinned` must outlive the problem.
void add_residual_blocks(ceres::Problem& problem, const FitModel& m, const Pinned& pinned, Eigen::VectorXd& p);

}  // namespace heft
