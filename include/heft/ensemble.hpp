#pragma once
/// \file ensemble.hpp
/// Ensemble sampler: independent ensembles (chains) of walkers, each moved
/// half against half (Foreman-Mackey et al. 2013, PASP 125, 306) by a
/// mixture of the affine-invariant stretch move (Goodman & Weare 2010,
/// Comm. App. Math. Comp. Sci. 5, 65) and the differential-evolution move
/// (ter Braak 2006, Stat. Comput. 16, 239), which follows correlated and
/// curved densities better and, at unit scale, jumps between modes. The
/// chains run in parallel, one per thread at a time. With temperatures > 1
/// each chain is a parallel-tempered ladder of ensembles (Swendsen & Wang
/// 1986, Phys. Rev. Lett. 57, 2607; Geyer 1991; with ensembles per level as
/// in Vousden, Farr & Mandel 2016, MNRAS 455, 1919): level l samples
/// prior x likelihood^beta_l, neighbours swap walkers, and only beta = 1 is
/// kept, so modes that no move at beta = 1 can join get their weights from
/// the hot levels. Diagnostics: the
/// integrated autocorrelation time with Sokal's automatic window (Sokal
/// 1997, "Monte Carlo methods in statistical mechanics", Sect. 3) and the
/// Gelman-Rubin R-hat across the chains (Gelman & Rubin 1992, Stat. Sci. 7,
/// 457).

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
  double de_fraction = 0.5;  ///< share of differential-evolution moves (the rest: stretch)
  int chains = 4;          ///< independent ensembles; the start's columns split evenly
  std::uint64_t seed = 1;
  /// During burn-in, move walkers stranded far below the ensemble's median
  /// log density onto better ones (for starts that are not yet posterior
  /// draws; it would distort starts that are).
  bool rescue = true;
  /// Levels of the tempering ladder per chain (1: no tempering). The inverse
  /// temperatures are geometric from 1 down to 1 / t_max.
  int temperatures = 1;
  double t_max = 50.0;  ///< temperature of the hottest level
};

struct EnsembleChain {
  int dim = 0, walkers = 0;  ///< walkers: of all chains
  int chains = 1;
  /// Kept positions after burn-in and thinning, one row each (step-major,
  /// walker-minor), and their log densities.
  Eigen::MatrixXd samples;
  std::vector<double> log_prob;
  double acceptance = 0.0;   ///< fraction of accepted moves after burn-in
  /// Integrated autocorrelation time of each parameter, in ensemble steps,
  /// from the unthinned post-burn-in chain.
  std::vector<double> iat_steps;
  /// Gelman-Rubin R-hat of each parameter across the chains (empty for one
  /// chain); near 1 when the chains agree.
  std::vector<double> rhat;
  /// With tempering: the inverse temperatures, coldest first, and the
  /// fraction of accepted swaps between level l and l + 1 after burn-in.
  std::vector<double> beta, swap_acceptance;
};

/// The density the sampler sees: returns ln prior + ln likelihood (-inf
/// outside the support) and writes ln likelihood to `log_like`; a tempered
/// level samples ln prior + beta ln likelihood. Constants may be dropped
/// from either part.
using LogDensity = std::function<double(const double* x, double& log_like)>;

/// Runs the sampler from `start` (one walker per column, chain after chain:
/// opt.chains blocks of an even number >= 2 dim of walkers, all with finite
/// log density). `log_prob` returns -inf outside the support and must be
/// safe to call concurrently. Kept samples are step-major, then walker
/// (chain after chain). The result depends on `seed` only, not on the
/// number of threads: every walker draws from its own random stream.
/// `progress(done, total)` reports ensemble steps, from any thread (one at
/// a time). With opt.temperatures = L > 1 every chain also runs L - 1
/// hotter ensembles started from the same walkers; a step moves every
/// level, then offers each walker of each level a swap with a random walker
/// of the next hotter one (accepted with probability min(1, exp((beta_cold
/// - beta_hot)(ln L_hot - ln L_cold)))). Level 1 alone gives the same
/// result as no tempering.
EnsembleChain run_ensemble(const LogDensity& log_density, const Eigen::MatrixXd& start, const EnsembleOptions& opt,
                           const std::function<void(long, long)>& progress = {});
/// The same for a density without a prior/likelihood split: a tempered level
/// samples density^beta.
EnsembleChain run_ensemble(const std::function<double(const double*)>& log_prob, const Eigen::MatrixXd& start,
                           const EnsembleOptions& opt, const std::function<void(long, long)>& progress = {});

/// Gelman-Rubin potential scale reduction of one quantity over independent
/// chains (each a matrix of its samples, any shape): sqrt(((n-1)/n W + B/n)
/// / W) with W the mean within-chain variance and B/n the variance of the
/// chain means (Gelman & Rubin 1992, Stat. Sci. 7, 457, eq. 3 without the
/// degrees-of-freedom factor).
double gelman_rubin(const std::vector<Eigen::MatrixXd>& chains);

/// Integrated autocorrelation time (in steps) of one parameter from
/// `series` (steps x walkers): the walker-averaged normalised
/// autocorrelation function (by FFT), summed up to the smallest window
/// M >= 5 tau(M).
double integrated_autocorr_time(const Eigen::MatrixXd& series);

}  // namespace heft
