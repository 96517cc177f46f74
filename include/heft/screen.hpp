#pragma once
/// \file screen.hpp
/// Screening one star: calibration, radial-velocity choice, anomaly, and its
/// row in the screen table (CSV and JSON).

#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "heft/anomaly.hpp"
#include "heft/calibrate.hpp"
#include "heft/catalog.hpp"
#include "heft/status.hpp"

namespace heft {

/// Options of the screen stage (units in the names).
struct ScreenOptions {
  EpochCalibration early, late;
  double assume_rv_km_s = 0.0;   ///< rv of a star without one
  /// Prior width of that assumed rv; absent (NaN, the default) = the
  /// kinematic width of rv_prior_sigma_km_s.
  double rv_sigma_km_s = kAbsent;
};

/// Default prior width (km/s) of the radial velocity of a star without one,
/// from its late-catalogue kinematics: sqrt(s0^2 + v_t^2 / 2), with
/// s0 = units::kRvPriorFloorKmS and v_t the tangential speed (km/s) from the
/// late PM and parallax (parallax floored at 3 sigma, so a poor parallax
/// cannot make v_t infinite).
///
/// Notes:
/// 1. The model: the star's heliocentric velocity is isotropic about the
///    Sun's with per-axis dispersion s^2, estimated from the two observed
///    tangential components (v_t^2 / 2, the maximum-likelihood per-axis
///    variance of two Gaussian components), plus the disc floor s0. A star
///    crossing the sky at 300 km/s is then not assumed to have |rv| < 30.
/// 2. docs/method.md, Sect. 2 states it; --rv-sigma overrides it.
double rv_prior_sigma_km_s(const Astrometry& late);

/// One screened star.
struct ScreenRow {
  std::string id;
  RowStatus status;
  /// Informational flags (never change the exit code), e.g. "no_rv".
  Notes notes;
  AnomalyResult result;
  bool ok() const { return status.ok(); }
};

/// Appends the plausibility notes of a valid star: `implausible_pm` (total
/// PM of either catalogue above units::kImplausiblePmMasYr),
/// `implausible_parallax` (above units::kImplausibleParallaxMas),
/// `implausible_vtan` (tangential speed above units::kImplausibleVtanKmS
/// where the parallax has S/N > 5). Notes, not errors: such a row is
/// screened as usual, most likely a cross-match or unit mistake to check.
void add_plausibility_notes(const StarRecord& star, std::vector<std::string>& notes);

/// Screens one star. `bad_reason` non-empty marks the row bad_input.
/// Notes: `no_rv` (assumed RV with its prior), `rv_prior_dominates` (that
/// prior carries more than units::kRvDominatesShare of the anomaly
/// covariance: the star's significance mostly reflects the unknown RV),
/// `rv_error_missing`, `no_spin_bin`, and add_plausibility_notes.
ScreenRow screen_star(const StarRecord& star, const std::string& bad_reason,
                      const ScreenOptions& opt);

/// The screen table's columns with their units, in output order.
const std::vector<ColumnUnit>& screen_column_units();
/// The screen table's column names, in output order.
const std::vector<std::string>& screen_columns();
/// Header line of the screen table (with newline).
std::string screen_header();
/// Appends one row (with newline); numbers empty unless status is ok.
void append_screen_row(std::string& out, const ScreenRow& row);
/// The same row as a JSON object (null numbers unless ok).
nlohmann::ordered_json screen_row_json(const ScreenRow& row);

}  // namespace heft
