// heft screen: proper-motion anomaly of every star of a canonical star table.

#include <omp.h>

#include <memory>

#include "cli/commands.hpp"
#include "heft/catalog.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/screen.hpp"

namespace heft::cli {
namespace {

struct ScreenCliOptions {
  std::string input;
  std::string output = "-";
  std::string json;
  std::string format;
  std::string late_spin_table;
  bool strict = false;
  int threads = 0;
  bool quiet = false;
  ScreenOptions screen;
  WindowDefaults windows;
};

nlohmann::ordered_json vec_json(const Eigen::Vector3d& v) { return {v.x(), v.y(), v.z()}; }

nlohmann::ordered_json calibration_json(const EpochCalibration& c) {
  nlohmann::ordered_json j;
  j["orient_mas"] = vec_json(c.orient_mas);
  j["spin_uas_yr"] = vec_json(c.spin_uas_yr);
  j["spin_table_bins"] = c.spin_table.size();
  j["inflate"] = c.inflate;
  j["floor_mas_yr"] = c.floor_mas_yr;
  return j;
}

int run_screen(const ScreenCliOptions& o) {
  require_distinct_outputs({{"-o", o.output}, {"--json", o.json}});
  const ScreenOptions opt = resolve_screen_options(o.screen, o.late_spin_table);
  if (o.threads > 0) omp_set_num_threads(o.threads);
  TableInput in(o.input, star_column_units());
  StarTableReader reader(in.stream(), in.name(), o.windows);
  for (const auto& c : reader.unknown_columns())
    message("screen", "warning: " + in.name() + ": column '" + clip_for_message(c) + "' is not canonical, ignored");
  TableOutput out(o.output, format_for(o.output, o.format), screen_column_units());
  std::unique_ptr<AtomicOutput> json;
  if (!o.json.empty()) {
    json = std::make_unique<AtomicOutput>(o.json);
    json->write("{\"stars\":[\n");
  }
  std::string buf = screen_header(), jbuf;
  StatusCounter counter;
  // Rows are parsed, screened and formatted in parallel a chunk at a time
  // and checked and written in file order (read_star_rows): the output and
  // the first error reported do not depend on the thread count.
  std::vector<ScreenRow> rows(kStarRowsChunk);
  std::vector<std::string> text(kStarRowsChunk), json_text(json ? kStarRowsChunk : 0);
  read_star_rows(
      reader, kStarRowsChunk,
      [&](std::size_t i, const ParsedStarRow& r) {
        rows[i] = screen_star(r.star, r.bad_reason, opt);
        text[i].clear();
        append_screen_row(text[i], rows[i]);
        if (json) json_text[i] = screen_row_json(rows[i]).dump();
      },
      [&](std::size_t i, const ParsedStarRow& r) {
        if (o.strict && !r.bad_reason.empty())
          throw InputError(in.name(), r.line, 0, "star '" + r.star.id + "': bad input: " + r.bad_reason);
        const ScreenRow& row = rows[i];
        if (o.strict && !row.ok())
          throw InputError(in.name(), r.line, 0, "star '" + row.id + "': " + row.status.text());
        counter.add(row.status);
        buf += text[i];
        if (json) {
          if (counter.total() > 1) jbuf += ",\n";
          jbuf += json_text[i];
        }
        if (buf.size() > (1u << 20)) {
          out.write(buf);
          buf.clear();
          if (json) {
            json->write(jbuf);
            jbuf.clear();
          }
        }
      });
  out.write(buf);
  if (json) {
    nlohmann::ordered_json run = counter.run_json("screen", in.name());
    nlohmann::ordered_json options;
    options["early"] = calibration_json(opt.early);
    options["late"] = calibration_json(opt.late);
    options["late_spin_table"] = o.late_spin_table;
    options["assume_rv_km_s"] = opt.assume_rv_km_s;
    options["rv_sigma_km_s"] = present(opt.rv_sigma_km_s) ? nlohmann::ordered_json(opt.rv_sigma_km_s) : nullptr;
    options["rv_prior"] = present(opt.rv_sigma_km_s) ? "fixed width rv_sigma_km_s"
                                                     : "kinematic: sqrt(30^2 + v_t^2/2) km/s (docs/method.md, Sect. 2)";
    options["default_windows_yr"] = {{o.windows.early_start_yr, o.windows.early_end_yr},
                                     {o.windows.late_start_yr, o.windows.late_end_yr}};
    options["strict"] = o.strict;
    run["options"] = options;
    run["units"] = units_json(screen_column_units());
    jbuf += "\n],\n\"run\":" + run.dump() + "}\n";
    json->write(jbuf);
    json->commit();
  }
  out.commit();
  counter.print_summary("screen");
  if (!o.quiet) message("screen", std::to_string(counter.total()) + " stars screened");
  return counter.exit_code();
}

}  // namespace

void setup_screen(CLI::App& app, Runner& run) {
  auto o = std::make_shared<ScreenCliOptions>();
  CLI::App* sub = app.add_subcommand(
      "screen",
      "Proper-motion anomaly of every star: long-baseline PM from the two positions, anomalies "
      "at both epochs with full covariances, chi2 and Gaussian-equivalent significance.");
  sub->add_option("stars", o->input, "canonical star table (CSV; '-' = stdin)")->required();
  sub->add_option("-o,--output", o->output, "anomaly table (CSV, ECSV or FITS); default stdout");
  add_format_option(sub, o->format);
  sub->add_option("--json", o->json, "also write the results as JSON (with a 'run' object)");
  add_screen_options(sub, o->screen, o->windows, o->late_spin_table);
  sub->add_flag("--strict", o->strict, "the first bad row is fatal (exit 2)");
  sub->add_option("-j,--threads", o->threads, "threads (default: all cores); output is identical")
      ->check(CLI::NonNegativeNumber);
  sub->add_flag("-q,--quiet", o->quiet, "no informational messages");
  std::string columns;
  for (const auto& c : screen_column_units())
    columns += (columns.empty() ? "" : ", ") + c.name + (c.unit.empty() ? "" : " [" + c.unit + "]");
  sub->footer("Columns: " + columns +
              ". Errors are 1 sigma; reflex_vel_late_m_s is the late anomaly as a speed (|dpm_late| A / "
              "parallax). Exit codes: 0 ok, 1 usage, 2 input error, 3 numerical failure, 4 some rows "
              "bad_input or failed.");
  sub->callback([o, &run] { run = [o] { return run_screen(*o); }; });
}

}  // namespace heft::cli
