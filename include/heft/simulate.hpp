#pragma once
/// \file simulate.hpp
/// Synthetic catalogue entries: error models with random correlations, and
/// noise drawn from each entry's full covariance.

#include <Eigen/Core>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "heft/catalog.hpp"
#include "heft/propagate.hpp"
#include "heft/kepler.hpp"
#include "heft/prior.hpp"
#include "heft/rng.hpp"
#include "heft/starfile.hpp"

namespace heft {

/// Error model of one catalogue (log-uniform errors between the bounds).
struct CatalogueModel {
  double epoch_yr;
  double window_start_yr, window_end_yr;
  double pos_error_lo_mas, pos_error_hi_mas;      ///< alpha*, delta, parallax
  double pm_error_lo_mas_yr, pm_error_hi_mas_yr;
  double corr_scale = 0.3;  ///< spread of the random correlations (0: none)
};

/// Defaults of the two space-astrometry catalogues (values from memory):
/// early at 1991.25, window 1989.85-1993.21, errors 0.5-1 mas, mas/yr;
/// late at 2016.0, window 2014.57-2017.41, errors 0.02-0.05.
CatalogueModel default_early_model();
CatalogueModel default_late_model();

/// A random covariance (alpha*, delta, parallax [mas], pmra, pmdec [mas/yr])
/// from `model`: log-uniform errors and a random correlation matrix
/// R = normalise((I + s N)(I + s N)^T), N standard normal, s = corr_scale.
Eigen::Matrix<double, 5, 5> random_covariance(const CatalogueModel& model, Rng& rng);

/// A catalogue entry whose values are `truth` (at model.epoch_yr) plus, when
/// `noise`, a deviate of the entry's random covariance.
Astrometry make_astrometry(const SkyState<double>& truth, const CatalogueModel& model, Rng& rng,
                           bool noise = true);

/// Adds a deviate of a.covariance() to the five values of `a`.
void add_noise(Astrometry& a, Rng& rng);

}  // namespace heft

namespace heft {

/// Everything that defines a synthetic two-epoch survey.
struct SurveyModel {
  long n_stars = 1000;
  std::uint64_t seed = 1;
  std::string id_prefix = "SIM-";
  Distribution host_mass_msun{Distribution::Kind::kLogUniform, 0.5, 1.5};
  double host_mass_rel_error = 0.1;      ///< catalogue mass error (fraction)
  Distribution distance_pc{Distribution::Kind::kUniform, 20.0, 200.0};
  /// Sky: a cap of radius sky_radius_deg around (sky_ra_deg, sky_dec_deg),
  /// uniform on the sphere when the radius is >= 180.
  double sky_ra_deg = 0.0, sky_dec_deg = 0.0, sky_radius_deg = 180.0;
  /// Space motion: mean velocity (km/s; towards east, north, receding) and
  /// isotropic dispersion.
  double v_east_km_s = 0.0, v_north_km_s = 0.0, v_radial_km_s = 0.0, v_sigma_km_s = 20.0;
  double rv_fraction = 0.3;    ///< share of stars with a measured RV
  double rv_error_km_s = 0.5;
  double companion_fraction = 0.1;
  Distribution companion_mass_mjup{Distribution::Kind::kLogUniform, 1.0, 80.0};
  Distribution a_au{Distribution::Kind::kLogUniform, 1.0, 100.0};
  Distribution ecc{Distribution::Kind::kUniform, 0.0, 0.8};
  double age_myr = kAbsent;
  CatalogueModel early = default_early_model(), late = default_late_model();
};

/// What was injected into one simulated star.
struct SimTruth {
  std::string id;
  double host_mass_msun, parallax_mas, distance_pc, rv_km_s;
  bool companion;
  double mass_mjup, a_au, period_yr, ecc, inc_deg, arg_peri_deg, node_deg, mean_anom_late_deg;
  /// Noiseless anomalies (mas/yr): the screen's anomaly of the noiseless catalogues.
  double dpm_late_ra, dpm_late_dec, dpm_early_ra, dpm_early_dec;
};

/// Simulates star number `index` of the survey from its own random stream
/// (seed, id), so results do not depend on order, threads or shards.
/// With `noise_seed`, what is measured after the catalogue covariances are
/// drawn (the catalogue values' noise, the tabulated host mass, whether and
/// what RV was measured) comes from the stream (noise_seed, id) instead:
/// the same star, truth and covariances under another realisation of the
/// noise, for studies of one system.
void simulate_star(const SurveyModel& model, long index, StarRecord& star, SimTruth& truth,
                   std::optional<std::uint64_t> noise_seed = std::nullopt);

/// The injected companion's relative orbit (reference epoch: the late
/// catalogue epoch `late_epoch_yr`); t.companion must be true.
Orbit<double> truth_orbit(const SimTruth& t, double late_epoch_yr);

/// An imaging epoch of the injected companion: separation and position
/// angle at epoch_yr with Gaussian errors (mas, deg).
RelativeEpoch observe_companion(const SimTruth& t, double late_epoch_yr, double epoch_yr,
                                double sep_error_mas, double pa_error_deg, Rng& rng);

/// The follow-up star file of a simulated star with a companion: its
/// catalogue row, a normal host-mass prior from its mass columns, and one
/// relative-astrometry epoch per entry of `epochs_yr` (observe_companion,
/// in order, from `rng`).
StarFile follow_up_star_file(const StarRecord& star, const SimTruth& t, const std::vector<double>& epochs_yr,
                             double sep_error_mas, double pa_error_deg, Rng& rng);

/// Truth table header and rows (CSV, with newline).
/// The truth table's columns with their units, in output order.
const std::vector<ColumnUnit>& truth_column_units();
std::string truth_header();
void append_truth_row(std::string& out, const SimTruth& t);

/// Id of star `index`: prefix + zero-padded number.
std::string simulated_id(const SurveyModel& model, long index);

}  // namespace heft
