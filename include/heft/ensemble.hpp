#pragma once
/// \file ensemble.hpp
/// Affine-invariant ensemble sampler with the stretch move (Goodman & Weare
/// 2010, Comm. App. Math. Comp. Sci. 5, 65), parallel over each half of the
/// ensemble as in Foreman-Mackey et al. 2013 (PASP 125, 306), and the
/// integrated autocorrelation time with Sokal's automatic window (Sokal
/// 1997, "Monte Carlo methods in statistical mechanics", Sect. 3).

#include <Eigen/Core>
#include <cstdint>
#include <functional>
#include <vector>

namespace heft {

struct EnsembleOptions {
  int steps = 20000;       ///< ensemble steps after burn-in
  int burn = 5000;         ///< ensemble steps discarded first
  int thin = 50;           ///< keep every thin-th step
  double stretch = 2.0;    ///< scale a of the stretch move, z ~ 1/sqrt(z) on [1/a, a]
  std::uint64_t seed = 1;
  /// During burn-in, move walkers stranded far below the ensemble's median
  /// log density onto better ones (for starts that are not yet posterior
  /// draws; it would distort starts that are).
  bool rescue = true;
};

struct EnsembleChain {
  int dim = 0, walkers = 0;
  /// Kept positions after burn-in and thinning, one row each (step-major,
  /// walker-minor), and their log densities.
  Eigen::MatrixXd samples;
  std::vector<double> log_prob;
  double acceptance = 0.0;   ///< fraction of accepted moves after burn-in
  /// Integrated autocorrelation time of each parameter, in ensemble steps,
  /// from the unthinned post-burn-in chain.
  std::vector<double> iat_steps;
};

/// Runs the sampler from `start` (one walker per column; an even number
/// >= 2 dim, all with finite log density). `log_prob` returns -inf outside
/// the support and must be safe to call concurrently. The result depends
/// on `seed` only, not on the number of threads: every walker draws from
/// its own random stream.
EnsembleChain run_ensemble(const std::function<double(const double*)>& log_prob,
                           const Eigen::MatrixXd& start, const EnsembleOptions& opt);

/// Integrated autocorrelation time (in steps) of one parameter from
/// `series` (steps x walkers): the walker-averaged normalised
/// autocorrelation function (by FFT), summed up to the smallest window
/// M >= 5 tau(M).
double integrated_autocorr_time(const Eigen::MatrixXd& series);

}  // namespace heft
