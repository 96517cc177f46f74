#pragma once
/// \file fit_sampler.hpp
/// The deep fit's posterior sampling: where the ensembles start (one per
/// imaged mode, weighted by its Laplace evidence; without imaging, heft
/// curve's importance-weighted draws), and the pooling of the ensembles
/// into one weighted chain. The sampler itself is ensemble.hpp.

#include <Eigen/Core>
#include <functional>
#include <string>
#include <vector>

#include "heft/ensemble.hpp"
#include "heft/fit_model.hpp"
#include "heft/fit_optimize.hpp"

namespace heft {

/// Posterior modes sampled with imaging: at most kMaxModes, each with a
/// Laplace evidence at least kMinModeEvidenceRatio times the strongest's.
inline constexpr std::size_t kMaxModes = 4;
inline constexpr double kMinModeEvidenceRatio = 1e-2;

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

/// The walkers of one ensemble (columns) and the mode they sample.
struct EnsembleStart {
  Eigen::MatrixXd walkers;
  ModeStart mode;
};

/// The mirror orbit (omega + pi, Omega + pi; the mean longitude unchanged):
/// the same sky motion with the line of sight reversed.
Eigen::VectorXd mirror_orbit(Eigen::VectorXd p);

/// With relative astrometry: the modes among `minima` as merge_minima
/// leaves them (without RVs a mirror orbit joins its mode), each weighted
/// by its Laplace evidence and started from N(p, C / 4) in the core and
/// +-0.1 in the ln jitters.
std::vector<EnsembleStart> mode_starts(const FitModel& m, const std::vector<FitMinimum>& minima, int walkers,
                                       Rng& rng);

/// Without relative astrometry: `walkers` picked from heft curve's Monte
/// Carlo posterior, reweighted by the RV likelihood; `ess` is the pool's
/// effective size. Throws NumericError when the pool is too small.
Eigen::MatrixXd walkers_from_curve(const FitModel& m, int walkers, Rng& rng, const std::string& rng_id,
                                   double& ess);

/// The posterior chain. With relative astrometry: one ensemble in the
/// observable coordinates, its walkers drawn from the modes by their
/// weights (stratified), every second sample mirrored without RVs; without:
/// one ensemble from heft curve's walkers in the parameters. `chain`
/// holds parameters; each kept sample's weight (summing to 1).
struct PooledChain {
  EnsembleChain chain;
  std::vector<double> sample_weight;
  std::vector<ModeStart> modes;
};
PooledChain sample_modes(const FitModel& m, std::vector<EnsembleStart> starts, const EnsembleOptions& opt,
                         Rng& rng, const std::function<void(long, long)>& progress = {});

}  // namespace heft
