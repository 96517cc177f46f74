#pragma once
/// \file fit.hpp
/// Deep single-star Keplerian fit: the proper-motion anomaly through the
/// window model, relative astrometry of the companion and the host's radial
/// velocities, fitted jointly. The parts: the model and its parameter
/// layout (fit_model.hpp), one Ceres residual functor per observation type
/// (fit_residuals.hpp), the multi-start optimiser and covariances
/// (fit_optimize.hpp), the sampler starts and pooling (fit_sampler.hpp),
/// the profile curve (fit_profile.hpp). This header runs them in order and
/// writes the result (the JSON of `heft fit`, the posterior draws).
///
/// Model, priors and their references: docs/method.md, Sect. 9.

#include <nlohmann/json.hpp>
#include <functional>
#include <string>
#include <vector>

#include "heft/calibration.hpp"
#include "heft/fit_model.hpp"
#include "heft/fit_optimize.hpp"
#include "heft/fit_profile.hpp"
#include "heft/fit_sampler.hpp"

namespace heft {

struct FitResult {
  std::vector<FitMinimum> minima;  ///< best first, merged (merge_minima), within kMinimumDeltaKept of the best
  int minima_dropped = 0;          ///< minima further above the best
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

/// Multi-start optimisation, distinct minima with Ceres covariances, then
/// (opt.sample) the ensemble sampler: with relative astrometry one ensemble
/// per mode, the modes weighted by their Laplace evidence; without, one
/// ensemble started from heft curve's importance-weighted draws.
/// `progress(done, total)` reports the sampler's steps (from any thread,
/// one at a time). Warnings: chains under 50 autocorrelation times, R-hat
/// above kMaxRhat.
FitResult run_fit(const FitModel& model, const FitOptions& opt, const std::string& rng_id,
                  const std::function<void(long, long)>& progress = {});

/// Minima whose -2 ln posterior exceeds the best's by more than this are
/// not kept (their posterior weight is below e^-25).
inline constexpr double kMinimumDeltaKept = 50.0;

/// Chains whose Gelman-Rubin R-hat exceeds this on any parameter get a
/// warning (Vehtari et al. 2021, Bayesian Anal. 16, 667, recommend 1.01).
inline constexpr double kMaxRhat = 1.01;

/// The posterior samples as orbit draws, each with its sample weight (the
/// `--samples` table of heft fit, the table heft predict reads).
std::vector<OrbitDraw> posterior_draws(const FitModel& model, const FitResult& r);

/// Weighted posterior quantiles of the fitted quantities written by heft
/// fit (mass_mjup, a_au, period_yr, ecc, inc_deg, host_mass_msun,
/// parallax_mas): keys q2.5, q16, q50, q84, q97.5; for an upper limit the
/// mass gets q68 and q95 only.
nlohmann::ordered_json posterior_quantiles(const FitResult& r, const std::vector<OrbitDraw>& draws);

/// Whether an injected truth's mass, a, e and host mass (in that order)
/// lie inside the draws' central 68 % and 95 % weighted intervals: the
/// check of a coverage study.
struct TruthInIntervals {
  static constexpr int kQuantities = 4;
  bool in68[kQuantities], in95[kQuantities];
};
TruthInIntervals truth_in_intervals(const std::vector<OrbitDraw>& draws, const SimTruth& truth);

/// The fit's options for the systems of fit_coverage_survey: its mass, a
/// and e priors are the survey's distributions; the rest default.
FitOptions fit_coverage_options(const SurveyModel& survey);

/// The priors of a run, with their values (the JSON "priors" object).
nlohmann::ordered_json fit_priors_json(const FitModel& model, const StarFile& f);

/// The whole result of `heft fit` as JSON (docs/formats.md, "fit result"):
/// the star, data counts, the best minimum with its covariance, every
/// distinct minimum, the posterior summary, warnings, priors and the run.
/// `row` is the star's screen row, `input` the star file's name.
nlohmann::ordered_json fit_json(const FitModel& model, const StarFile& f, const ScreenRow& row, const FitResult& r,
                                const std::string& input);

}  // namespace heft
