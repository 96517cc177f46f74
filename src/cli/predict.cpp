// heft predict: the companion's separation and position angle at dates.

#include <memory>

#include "cli/commands.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/predict.hpp"
#include "heft/version.hpp"

namespace heft::cli {
namespace {

struct PredictCliOptions {
  std::string input, output = "-", json, grid, id, format, date_grid_text;
  std::vector<double> dates, date_grid;
  PredictOptions predict;
  bool quiet = false;
};

int run_predict(PredictCliOptions o) {
  o.dates.insert(o.dates.end(), o.date_grid.begin(), o.date_grid.end());
  if (o.dates.empty()) throw CLI::ValidationError("a date is needed: --date D1,D2,... or --dates START:END:STEP");
  require_distinct_outputs({{"-o", o.output}, {"--json", o.json}, {"--grid", o.grid}});
  if (!(o.predict.iwa_mas < o.predict.owa_mas)) throw CLI::ValidationError("--iwa must be below --owa");
  TableInput in(o.input, draw_column_units());
  const std::vector<StarDraws> stars = read_draws(in.stream(), in.name());
  TableOutput out(o.output, format_for(o.output, o.format), prediction_column_units());
  std::unique_ptr<AtomicOutput> json;
  std::unique_ptr<TableOutput> grid;
  if (!o.json.empty()) json = std::make_unique<AtomicOutput>(o.json);
  if (!o.grid.empty()) grid = std::make_unique<TableOutput>(o.grid, format_for(o.grid), grid_column_units());
  out.write(prediction_header());
  if (grid) grid->write(grid_header());
  nlohmann::ordered_json jstars = nlohmann::ordered_json::array();
  bool found = false;
  for (const auto& st : stars) {
    if (!o.id.empty() && st.id != o.id) continue;
    found = true;
    for (double date : o.dates) {
      const SkyPrediction p = predict_sky(st.draws, date, o.predict);
      std::string row;
      append_prediction_row(row, st.id, st.draws.size(), p);
      out.write(row);
      if (grid) {
        std::string g;
        append_grid_rows(g, st.id, p);
        grid->write(g);
      }
      if (json)
        jstars.push_back(prediction_json(st.id, st.draws.size(), p));
    }
  }
  if (!o.id.empty() && !found) throw InputError(in.name(), 0, 0, "no draws of star '" + o.id + "'");
  if (json) {
    nlohmann::ordered_json j = {{"stars", jstars},
                                {"run", {{"heft_version", kVersion}, {"command", "predict"}, {"input", in.name()},
                                         {"units", units_json(prediction_column_units())}, {"iwa_mas", o.predict.iwa_mas},
                                         {"owa_mas", std::isfinite(o.predict.owa_mas) ? nlohmann::ordered_json(o.predict.owa_mas)
                                                                                      : nlohmann::ordered_json(nullptr)}}}};
    json->write(j.dump() + "\n");
    json->commit();
  }
  if (grid) grid->commit();
  out.commit();
  if (!o.quiet) message("predict", std::to_string(found ? stars.size() : 0) + " stars x " + std::to_string(o.dates.size()) + " dates");
  return kOk;
}

}  // namespace

void setup_predict(CLI::App& app, Runner& run) {
  auto o = std::make_shared<PredictCliOptions>();
  CLI::App* sub = app.add_subcommand(
      "predict",
      "Where the companion is at given dates, from weighted orbit draws (heft fit --samples, heft "
      "curve --keep-draws): separation (mas), position angle (deg) and the chance of lying between "
      "two working angles.");
  sub->add_option("draws", o->input, "orbit-draw table (CSV; '-' = stdin)")->required();
  sub->add_option("--date", o->dates, "dates D1,D2,... (decimal Julian years, 1900-2200; not MJD)")
      ->delimiter(',')
      ->check(CLI::Range(1900.0, 2200.0));
  add_date_grid_option(sub, o->date_grid, o->date_grid_text)
      ->description("also the dates of the grid START:END:STEP (decimal Julian years, 1900-2200): one row per "
                    "date, so p_in_wa against date");
  sub->add_option("--id", o->id, "only this star");
  sub->add_option("--iwa", o->predict.iwa_mas, "inner working angle (mas)")->check(CLI::NonNegativeNumber)->capture_default_str();
  sub->add_option("--owa", o->predict.owa_mas, "outer working angle (mas; default none)")->check(CLI::PositiveNumber);
  sub->add_option("-o,--output", o->output, "summary table (CSV, ECSV or FITS); default stdout");
  add_format_option(sub, o->format);
  sub->add_option("--json", o->json, "also write the summary as JSON");
  sub->add_option("--grid", o->grid, "2-D density map (CSV: id, date_yr, dra_mas, ddec_mas, density_per_mas2)");
  sub->add_option("--grid-size", o->predict.grid_n,
                  "cells per side of the map (default: at least 64 across the 68 % region, 101 to 301)")
      ->check(CLI::Range(4, 2000));
  sub->add_option("--grid-extent", o->predict.grid_half_mas,
                  "half width of the map (mas; default: 1.2 x the 99.5 % separation of the draws)")
      ->check(CLI::PositiveNumber);
  sub->add_flag("-q,--quiet", o->quiet, "no informational messages");
  sub->footer(
      "Columns: id, date_yr, n_draws, ess (effective draws), sep_lo95, sep_lo68, sep_med, sep_hi68, sep_hi95 "
      "(mas; 2.5/16/50/84/97.5 %), pa_mean_deg (circular mean), pa_resultant (mean resultant length), "
      "pa_modes_deg (modes, strongest first, '|'-separated), pa_arc68_start_deg and pa_arc68_width_deg "
      "(shortest arc holding 68 %, through increasing PA), p_in_wa (probability iwa <= sep <= owa).");
  sub->callback([o, &run] { run = [o] { return run_predict(*o); }; });
}

}  // namespace heft::cli
