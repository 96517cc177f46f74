#pragma once
/// \file simulate.hpp
/// Synthetic catalogue entries: error models with random correlations, and
/// noise drawn from each entry's full covariance.

#include <Eigen/Core>

#include "heft/catalog.hpp"
#include "heft/propagate.hpp"
#include "heft/rng.hpp"

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
