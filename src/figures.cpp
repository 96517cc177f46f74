#include "heft/figures.hpp"

#include <algorithm>
#include <cmath>

#include "heft/error.hpp"
#include "heft/svg.hpp"

namespace heft {

std::string curve_svg(const std::vector<CurvePoint>& rows, const std::string& id, const CurveFigureOptions& o,
                      const std::string& source) {
  const bool upper = std::none_of(rows.begin(), rows.end(), [](const CurvePoint& r) { return present(r.mass_med); });
  double y_lo = 1e300, y_hi = 0;
  for (const auto& r : rows)
    for (double y : {r.mass_lo95, r.mass_med, r.mass_hi95})
      if (present(y) && y > 0) {
        y_lo = std::min(y_lo, y);
        y_hi = std::max(y_hi, y);
      }
  if (!(y_hi > 0)) throw InputError(source, 0, 0, "no finite masses to plot");
  y_lo = std::min(y_lo, 5.0);
  y_hi = std::max(y_hi, 150.0);
  y_lo = std::pow(10.0, std::floor(std::log10(y_lo)));
  y_hi = std::pow(10.0, std::ceil(std::log10(y_hi)));
  const double x_lo = std::pow(10.0, std::floor(std::log10(rows.front().a_au)));
  const double x_hi = std::pow(10.0, std::ceil(std::log10(rows.back().a_au)));
  LogLogPlot plot(x_lo, x_hi, y_lo, y_hi, "semi-major axis a (AU)", "companion mass (Jupiter masses)",
                  "heft curve: " + id + (upper ? " (upper limits)" : "") + ", dark companion assumed");
  plot.id_prefix(o.id_prefix);
  const double mas_per_au = rows.front().sep_mas / rows.front().a_au;
  plot.top_axis(mas_per_au, "angular semi-major axis a x parallax (mas)");
  auto band = [&](double CurvePoint::*lo, double CurvePoint::*hi, const std::string& colour, double op) {
    std::vector<std::pair<double, double>> pts;
    for (const auto& r : rows)
      if (present(r.*hi)) pts.emplace_back(r.a_au, r.*hi);
    for (auto it = rows.rbegin(); it != rows.rend(); ++it)
      if (present((*it).*hi)) pts.emplace_back(it->a_au, lo && (*it).*lo > 0 ? (*it).*lo : y_lo);
    plot.band(pts, colour, op);
  };
  if (upper) {
    band(nullptr, &CurvePoint::mass_hi95, "#9ecae1", 0.6);
    band(nullptr, &CurvePoint::mass_hi68, "#3182bd", 0.6);
    plot.legend("#9ecae1", "allowed at 95 % (below the edge)");
    plot.legend("#3182bd", "allowed at 68 %");
  } else {
    band(&CurvePoint::mass_lo95, &CurvePoint::mass_hi95, "#9ecae1", 0.6);
    band(&CurvePoint::mass_lo68, &CurvePoint::mass_hi68, "#3182bd", 0.6);
    std::vector<std::pair<double, double>> med;
    for (const auto& r : rows)
      if (present(r.mass_med)) med.emplace_back(r.a_au, r.mass_med);
    plot.line(med, "#08306b", 2.0);
    plot.legend("#9ecae1", "95 % band");
    plot.legend("#3182bd", "68 % band");
    plot.legend("#08306b", "median");
  }
  // Each separation's posterior weight, relative to the largest.
  double w_max = 0.0;
  for (const auto& r : rows)
    if (present(r.weight)) w_max = std::max(w_max, r.weight);
  if (w_max > 0) {
    std::vector<std::pair<double, double>> bars;
    for (const auto& r : rows)
      if (present(r.weight)) bars.emplace_back(r.a_au, r.weight / w_max);
    plot.bars(bars, "#fd8d3c");
    plot.legend("#fd8d3c", "posterior weight of a (bars, relative)");
  }
  // The working angles on the angular axis: a x parallax = angle.
  if (o.iwa_mas > 0) plot.vline(o.iwa_mas / mas_per_au, "inner working angle", "#a63603");
  if (o.owa_mas > 0) plot.vline(o.owa_mas / mas_per_au, "outer working angle", "#54278f");
  // Where a band reaches the prior's bounds, the data do not constrain it.
  if (present(o.prior_min_mjup)) plot.hline(o.prior_min_mjup, "prior lower bound", "#636363");
  if (present(o.prior_max_mjup)) plot.hline(o.prior_max_mjup, "prior upper bound", "#636363");
  if (present(o.truth_a_au) && present(o.truth_mass_mjup))
    plot.marker(o.truth_a_au, o.truth_mass_mjup, "injected companion", "#cb181d");
  // Deuterium and hydrogen burning limits (~13 and ~80 MJup; common practice).
  plot.hline(13.0, "deuterium burning ~13 MJup", "#a63603");
  plot.hline(80.0, "hydrogen burning ~80 MJup", "#54278f");
  return plot.str();
}

std::string sky_svg(const SkyGrid& g, double iwa_mas, double owa_mas, const std::string& title_prefix,
                    const std::string& id_prefix) {
  SkyMap map(g.half_mas, title_prefix + g.id + " at " + format_double(g.date_yr));
  map.id_prefix(id_prefix);
  map.image(g.density, g.n);
  map.credible_contours(g.density, g.n);
  if (iwa_mas > 0) map.circle(iwa_mas, "inner working angle", "#a63603", true);
  if (owa_mas > 0) map.circle(owa_mas, "outer working angle", "#54278f", true);
  return map.str();
}

}  // namespace heft
