// heft plot: SVG figures of heft outputs. `heft plot curve`: the companion
// mass-separation constraints of one star.

#include <algorithm>
#include <array>
#include <cmath>
#include <memory>

#include "cli/commands.hpp"
#include "heft/curve.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/predict.hpp"
#include "heft/simulate.hpp"
#include "heft/stats.hpp"
#include "heft/svg.hpp"

namespace heft::cli {
namespace {

struct PlotCurveOptions {
  std::string input, output = "-", id, truth;
  bool quiet = false;
  double iwa_mas = 0.0, owa_mas = 0.0;
  double prior_min_mjup = kAbsent, prior_max_mjup = kAbsent;
};

// The injected companion of star `id` from a heft simulate --truth table:
// false when the star has none.
bool truth_of(const std::string& path, const std::string& id, double& a_au, double& mass_mjup) {
  TableInput in(path, truth_column_units());
  ColumnTable t(in.stream(), in.name(), {"id", "companion", "a_au", "mass_mjup"});
  const int ii = t.index("id"), ic = t.index("companion"), ia = t.index("a_au"), im = t.index("mass_mjup");
  while (t.next()) {
    if (t.text(ii) != id) continue;
    if (t.number(ic) == 0) return false;
    a_au = t.number(ia);
    mass_mjup = t.number(im);
    return true;
  }
  throw InputError(in.name(), 0, 0, "no row for star '" + id + "'");
}


struct PlotSkyOptions {
  std::string input, output = "-", id;
  bool quiet = false;
  double date_yr = kAbsent, iwa_mas = 0.0, owa_mas = 0.0;
};

// The density map of one star and date from heft predict --grid.
int run_plot_sky(const PlotSkyOptions& o) {
  TableInput in(o.input, grid_column_units());
  const SkyGrid g = read_sky_grid(in.stream(), in.name(), o.id, o.date_yr);
  SkyMap map(g.half_mas, "heft predict: " + g.id + " at " + format_double(g.date_yr));
  map.image(g.density, g.n);
  map.credible_contours(g.density, g.n);
  if (o.iwa_mas > 0) map.circle(o.iwa_mas, "inner working angle", "#a63603", true);
  if (o.owa_mas > 0) map.circle(o.owa_mas, "outer working angle", "#54278f", true);
  write_file_atomic(o.output, map.str());
  return kOk;
}

int run_plot_curve(const PlotCurveOptions& o) {
  TableInput in(o.input, curve_column_units());
  std::string id = o.id;
  const std::vector<CurvePoint> rows = read_curve_table(in.stream(), in.name(), id);
  const bool upper = std::none_of(rows.begin(), rows.end(), [](const CurvePoint& r) { return present(r.mass_med); });
  double y_lo = 1e300, y_hi = 0;
  for (const auto& r : rows)
    for (double y : {r.mass_lo95, r.mass_med, r.mass_hi95})
      if (present(y) && y > 0) {
        y_lo = std::min(y_lo, y);
        y_hi = std::max(y_hi, y);
      }
  if (!(y_hi > 0)) throw InputError(in.name(), 0, 0, "no finite masses to plot");
  y_lo = std::min(y_lo, 5.0);
  y_hi = std::max(y_hi, 150.0);
  y_lo = std::pow(10.0, std::floor(std::log10(y_lo)));
  y_hi = std::pow(10.0, std::ceil(std::log10(y_hi)));
  const double x_lo = std::pow(10.0, std::floor(std::log10(rows.front().a_au)));
  const double x_hi = std::pow(10.0, std::ceil(std::log10(rows.back().a_au)));
  LogLogPlot plot(x_lo, x_hi, y_lo, y_hi, "semi-major axis a (AU)", "companion mass (Jupiter masses)",
                  "heft curve: " + id + (upper ? " (upper limits)" : "") + ", dark companion assumed");
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
  if (!o.truth.empty()) {
    double a = 0, m = 0;
    if (truth_of(o.truth, id, a, m)) plot.marker(a, m, "injected companion", "#cb181d");
  }
  // Deuterium and hydrogen burning limits (~13 and ~80 MJup; common practice).
  plot.hline(13.0, "deuterium burning ~13 MJup", "#a63603");
  plot.hline(80.0, "hydrogen burning ~80 MJup", "#54278f");
  write_file_atomic(o.output, plot.str());
  return kOk;
}

}  // namespace

void setup_plot(CLI::App& app, Runner& run) {
  CLI::App* plot = app.add_subcommand("plot", "SVG figures of heft outputs");
  plot->require_subcommand(1);
  auto o = std::make_shared<PlotCurveOptions>();
  CLI::App* sub = plot->add_subcommand(
      "curve", "Mass vs separation (log-log) with the 68 % and 95 % bands of a heft curve table");
  sub->add_option("curve", o->input, "curve table from heft curve (CSV; '-' = stdin)")->required();
  sub->add_option("--id", o->id, "star to plot (default: the first in the table)");
  sub->add_option("--iwa", o->iwa_mas, "inner working angle, drawn on the angular axis (mas)")->check(CLI::NonNegativeNumber);
  sub->add_option("--owa", o->owa_mas, "outer working angle, drawn on the angular axis (mas)")->check(CLI::NonNegativeNumber);
  add_pair_option(sub, "--prior-mass", o->prior_min_mjup, o->prior_max_mjup,
                  "the curve's mass prior MIN,MAX (MJup), drawn so that bands that reach it show");
  sub->add_option("--truth", o->truth, "heft simulate --truth table: mark the star's injected companion");
  sub->add_option("-o,--output", o->output, "SVG file; default stdout");
  sub->add_flag("-q,--quiet", o->quiet, "no messages (plot prints none but errors)");
  sub->callback([o, &run] { run = [o] { return run_plot_curve(*o); }; });

  auto k = std::make_shared<PlotSkyOptions>();
  CLI::App* sky = plot->add_subcommand(
      "sky", "Where the companion probably is at a date: the density map of heft predict --grid, north up, "
             "east left, star at the centre, working-angle circles.");
  sky->add_option("grid", k->input, "density map from heft predict --grid (CSV; '-' = stdin)")->required();
  sky->add_option("--id", k->id, "star to plot (default: the first in the map)");
  sky->add_option("--date", k->date_yr, "date to plot (decimal yr; default: the first in the map)");
  sky->add_option("--iwa", k->iwa_mas, "inner working angle circle (mas)")->check(CLI::NonNegativeNumber);
  sky->add_option("--owa", k->owa_mas, "outer working angle circle (mas)")->check(CLI::NonNegativeNumber);
  sky->add_option("-o,--output", k->output, "SVG file; default stdout");
  sky->add_flag("-q,--quiet", k->quiet, "no messages (plot prints none but errors)");
  sky->callback([k, &run] { run = [k] { return run_plot_sky(*k); }; });
}

}  // namespace heft::cli
