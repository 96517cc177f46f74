#pragma once
/// \file figures.hpp
/// heft's figures as SVG documents, shared by `heft plot` and the plan
/// report: a star's mass-separation constraints and its companion's sky map.

#include <string>
#include <vector>

#include "heft/curve.hpp"
#include "heft/io.hpp"
#include "heft/predict.hpp"

namespace heft {

/// What goes on a curve figure beside the bands.
struct CurveFigureOptions {
  double iwa_mas = 0.0, owa_mas = 0.0;  ///< working angles on the angular axis (0: none)
  double prior_min_mjup = kAbsent, prior_max_mjup = kAbsent;  ///< the mass prior's bounds (absent: not drawn)
  double truth_a_au = kAbsent, truth_mass_mjup = kAbsent;     ///< an injected companion (absent: none)
  std::string id_prefix;  ///< see LogLogPlot::id_prefix
};

/// Mass against semi-major axis (log-log) of one star's curve: the 68 % and
/// 95 % bands (or the allowed region of an upper limit), the median, each
/// separation's posterior weight as bars, the angular axis (a x parallax),
/// the working angles and the deuterium and hydrogen burning masses.
/// InputError naming `source` when no point has a finite mass.
std::string curve_svg(const std::vector<CurvePoint>& points, const std::string& id, const CurveFigureOptions& opt,
                      const std::string& source);

/// The sky map of a SkyGrid: density, 68 % and 95 % credible contours,
/// working-angle circles (0: none), compass; the star id and date in the title.
std::string sky_svg(const SkyGrid& grid, double iwa_mas, double owa_mas, const std::string& title_prefix,
                    const std::string& id_prefix = "");

}  // namespace heft
