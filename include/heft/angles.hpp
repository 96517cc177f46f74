#pragma once
/// \file angles.hpp
/// Angle reduction, the one place it is written: to [0, 2 pi) or [0, 360)
/// for angles that are stored or printed, to [-pi, pi] for differences.

#include <cmath>

#include "heft/units.hpp"

namespace heft {

/// x reduced to [0, period) exactly (std::fmod is exact), period > 0.
inline double wrap_positive(double x, double period) {
  const double y = std::fmod(x, period);
  return y < 0 ? y + period : y;
}
/// An angle in radians reduced to [0, 2 pi).
inline double wrap_2pi(double x_rad) { return wrap_positive(x_rad, units::kTwoPi); }
/// An angle in degrees reduced to [0, 360).
inline double wrap_360(double x_deg) { return wrap_positive(x_deg, 360.0); }
/// The difference of two angles (radians) reduced to [-pi, pi], exactly
/// (IEEE remainder).
inline double wrap_pi(double x_rad) { return std::remainder(x_rad, units::kTwoPi); }

}  // namespace heft
