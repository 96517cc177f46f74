#pragma once
/// \file draws.hpp
/// Weighted orbit draws: the one table through which `heft curve
/// --keep-draws` and `heft fit --samples` hand posterior orbits to
/// `heft predict` (docs/formats.md, "Orbit draws").

#include <iosfwd>
#include <string>
#include <vector>

#include "heft/io.hpp"

namespace heft {

/// One posterior draw of a companion's relative orbit (conventions of
/// docs/orbits.md). Angles in degrees; `mean_anom_deg` at `ref_epoch_yr`.
struct OrbitDraw {
  double a_au, mass_mjup, ecc, inc_deg, arg_peri_deg, node_deg, mean_anom_deg;
  double ref_epoch_yr, period_yr, parallax_mas, host_mass_msun;
  double weight;  ///< sums to 1 over a star's draws
};

/// Header line (with newline) of the orbit-draw table: id, then the fields
/// of OrbitDraw in declaration order.
/// The orbit-draw table's columns with their units, in output order.
const std::vector<ColumnUnit>& draw_column_units();
std::string draws_header();
void append_draw_row(std::string& out, const std::string& id, const OrbitDraw& d);

/// The draws of one star.
struct StarDraws {
  std::string id;
  std::vector<OrbitDraw> draws;
};

/// Reads an orbit-draw table; rows of one star must be contiguous. Throws
/// InputError naming file, line and column for a missing column, a bad
/// number, a value outside its domain (a, P, parallax, host mass > 0,
/// 0 <= e < 1, 0 <= i <= 180, weight >= 0) or a star whose rows are split.
std::vector<StarDraws> read_draws(std::istream& in, const std::string& name);

}  // namespace heft
