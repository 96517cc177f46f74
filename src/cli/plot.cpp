// heft plot: SVG figures of heft outputs. `heft plot curve`: the companion
// mass-separation constraints of one star.

#include <memory>

#include "cli/commands.hpp"
#include "heft/curve.hpp"
#include "heft/error.hpp"
#include "heft/figures.hpp"
#include "heft/io.hpp"
#include "heft/predict.hpp"
#include "heft/simulate.hpp"

namespace heft::cli {
namespace {

struct PlotCurveOptions {
  std::string input, output = "-", id, truth;
  bool quiet = false;
  double iwa_mas = 0.0, owa_mas = 0.0;
  double prior_min_mjup = kAbsent, prior_max_mjup = kAbsent;
};

struct PlotSkyOptions {
  std::string input, output = "-", id;
  bool quiet = false;
  double date_yr = kAbsent, iwa_mas = 0.0, owa_mas = 0.0;
};

// The density map of one star and date from heft predict --grid.
int run_plot_sky(const PlotSkyOptions& o) {
  TableInput in(o.input, grid_column_units());
  const SkyGrid g = read_sky_grid(in.stream(), in.name(), o.id, o.date_yr);
  write_file_atomic(o.output, sky_svg(g, o.iwa_mas, o.owa_mas, "heft predict: "));
  return kOk;
}

int run_plot_curve(const PlotCurveOptions& o) {
  TableInput in(o.input, curve_column_units());
  std::string id = o.id;
  const std::vector<CurvePoint> rows = read_curve_table(in.stream(), in.name(), id);
  CurveFigureOptions f;
  f.iwa_mas = o.iwa_mas;
  f.owa_mas = o.owa_mas;
  f.prior_min_mjup = o.prior_min_mjup;
  f.prior_max_mjup = o.prior_max_mjup;
  if (!o.truth.empty() && !injected_companion(o.truth, id, f.truth_a_au, f.truth_mass_mjup))
    f.truth_a_au = f.truth_mass_mjup = kAbsent;
  write_file_atomic(o.output, curve_svg(rows, id, f, in.name()));
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
