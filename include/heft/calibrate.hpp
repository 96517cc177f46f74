#pragma once
/// \file calibrate.hpp
/// Frame and error calibration of one catalogue before the anomaly is
/// computed: rigid-rotation corrections (orientation offset at the
/// catalogue epoch, spin, spin by magnitude bin), error inflation and a
/// systematic floor on the proper-motion errors.
///
/// Sign convention (docs/method.md): a catalogue whose frame is rotated by
/// the small vector w relative to the reference frame shows the spurious
/// pattern (Lindegren et al. 2018, A&A 616, A2, Eq. 5)
///   d_alpha* = -wX sin(dec) cos(ra) - wY sin(dec) sin(ra) + wZ cos(dec),
///   d_delta  =  wX sin(ra)          - wY cos(ra),
/// in proper motion for a spin and in position for an orientation offset;
/// heft subtracts it, as Cantat-Gaudin & Brandt (2021, A&A 649, A124) do for
/// the bright-star spin of the late catalogue.

#include <Eigen/Core>
#include <string>
#include <vector>

#include "heft/catalog.hpp"

namespace heft {

/// Spin of the frame for stars with mag_lo <= mag < mag_hi (uas/yr).
struct SpinBin {
  double mag_lo, mag_hi;
  Eigen::Vector3d spin_uas_yr;
};

/// Calibration of one catalogue.
struct EpochCalibration {
  Eigen::Vector3d orient_mas = Eigen::Vector3d::Zero();    ///< at the catalogue epoch
  Eigen::Vector3d spin_uas_yr = Eigen::Vector3d::Zero();   ///< all stars
  std::vector<SpinBin> spin_table;                         ///< added, by magnitude
  double inflate = 1.0;        ///< errors x inflate (covariance x inflate^2)
  double floor_mas_yr = 0.0;   ///< added in quadrature to the PM errors
};

/// The rotation pattern of the header note for vector w at (ra, dec):
/// returns (d_alpha*, d_delta) in the unit of w.
Eigen::Vector2d rotation_pattern(const Eigen::Vector3d& w, double ra_rad, double dec_rad);

/// Applies `cal` to `a` in place. `mag` selects the spin-table bin (NaN:
/// none); `in_table` is set false when a table is given but no bin holds the
/// star (the caller notes it).
void apply_calibration(const EpochCalibration& cal, double mag, Astrometry& a, bool& in_table);

/// Reads a spin table: CSV with columns mag_min, mag_max, wx, wy, wz (uas/yr).
/// Throws InputError naming file, line and column.
std::vector<SpinBin> read_spin_table(const std::string& path);

}  // namespace heft
