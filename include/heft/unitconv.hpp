#pragma once
/// \file unitconv.hpp
/// Unit strings of table files (FITS TUNIT, ECSV `unit`, heft's own column
/// units) and conversion between units of one dimension.
///
/// Accepted spellings, case-insensitive, with the FITS standard 4.0 (Sect.
/// 4.3) and astropy forms of products and powers: "mas/yr", "mas yr-1",
/// "mas.yr**-1", "mas yr^-1"; "km/s", "km s-1"; "deg", "degree"; "arcsec",
/// "mas", "uas", "rad", "h" / "hourangle" (right ascension hours); "yr",
/// "a", "year" (Julian year, also as an epoch), "jd", "mjd" (as epochs);
/// "Msun", "solMass", "M_sun"; "Mjup", "jupiterMass", "M_jup"; "AU", "au";
/// "mag"; "Myr", "Gyr"; "" / "1" / "dimensionless" (and heft's "sigma").

#include <string>
#include <string_view>

namespace heft {

/// A unit as a multiple of its dimension's base unit, plus an offset for
/// the epoch units: value_in_base = value * scale + offset.
struct UnitScale {
  std::string dimension;  ///< "angle", "angle/time", "time", "speed", "mass", "length", "mag", "age", "1", "angle-2"
  double scale = 1.0;
  double offset = 0.0;
};

/// Parses a unit string; false when heft does not know it.
bool parse_unit(std::string_view text, UnitScale& out);

/// The factor and offset that convert a value in unit `from` to unit `to`:
/// to_value = from_value * scale + offset. False when either unit is
/// unknown or the dimensions differ.
bool unit_conversion(std::string_view from, std::string_view to, double& scale, double& offset);

}  // namespace heft
