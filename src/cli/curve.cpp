// heft curve: companion mass-separation constraint curves from the anomaly.

#include <omp.h>

#include <algorithm>
#include <exception>
#include <fstream>
#include <memory>
#include <set>

#include "cli/commands.hpp"
#include "heft/curve.hpp"
#include "heft/error.hpp"
#include "heft/fit.hpp"
#include "heft/io.hpp"

namespace heft::cli {
namespace {

struct CurveCliOptions {
  std::string input, output = "-", json, keep_draws, id, ids, method = "montecarlo", ecc, format;
  std::string late_spin_table;
  ScreenOptions screen;
  WindowDefaults windows;
  CurveOptions curve;
  double host_mass_msun = kAbsent, host_mass_error_msun = kAbsent;
  double a_min_au = 0.5, a_max_au = 500.0;
  int n_a = kDefaultSeparations;
  std::vector<double> a_list;
  int threads = 0, starts = 16;
  bool quiet = false, all = false;
};

int run_curve(CurveCliOptions o) {
  require_distinct_outputs({{"-o", o.output}, {"--json", o.json}, {"--keep-draws", o.keep_draws}});
  const ScreenOptions sopt = resolve_screen_options(o.screen, o.late_spin_table);
  CurveOptions copt = o.curve;
  resolve_prior_options(copt.prior, o.ecc);
  if (!o.a_list.empty()) {
    copt.a_au = o.a_list;
    std::sort(copt.a_au.begin(), copt.a_au.end());
    copt.refine_rounds = 0;  // an explicit list is evaluated as given
  } else {
    if (!(o.a_min_au < o.a_max_au)) throw CLI::ValidationError("--a-min must be below --a-max");
    copt.a_au = log_grid(o.a_min_au, o.a_max_au, o.n_a);
  }
  copt.keep_draws = !o.keep_draws.empty();
  copt.quantile_errors = !o.json.empty();  // written only there
  if (o.method != "montecarlo") copt.refine_rounds = 0;
  if (copt.quantile_tolerance > 0 && o.method != "montecarlo")
    throw CLI::ValidationError("--quantile-tolerance applies to --method montecarlo only");
  if (o.method == "montecarlo") check_curve_eccentricity(copt.prior.ecc, "--ecc");
  if (o.threads > 0) omp_set_num_threads(o.threads);

  // A curve costs seconds: which stars is always said, never implied.
  if ((!o.id.empty()) + (!o.ids.empty()) + o.all != 1)
    throw CLI::ValidationError("choose the stars: --id ID, --ids FILE (one id per line) or --all (one of them)");
  std::set<std::string, std::less<>> wanted;  // found by string_view
  if (!o.id.empty()) wanted.insert(o.id);
  if (!o.ids.empty()) {
    InputFile f(o.ids);
    for (std::string line; std::getline(f.stream(), line);) {
      if (!line.empty() && line.back() == '\r') line.pop_back();
      if (!line.empty() && line[0] != '#') wanted.insert(line);
    }
    if (wanted.empty()) throw InputError(f.name(), 0, 0, "no ids (one per line, '#' lines are comments)");
  }
  TableInput in(o.input, star_column_units());
  // The bar's total: the ids asked for, or with --all the table's data
  // lines (a CSV file read once more, a converted table rewound; no bar
  // when streaming a pipe).
  auto data_lines = [](std::istream& text) {
    long n = 0;
    for (std::string line; std::getline(text, line);) n += !line.empty() && line[0] != '#';
    return std::max(0L, n - 1);  // the header
  };
  long total = static_cast<long>(wanted.size());
  if (o.all && in.format() != TableFormat::kCsv) {
    const auto start = in.stream().tellg();
    total = data_lines(in.stream());
    in.stream().clear();
    in.stream().seekg(start);
  } else if (o.all && o.input != "-") {
    std::ifstream file(o.input, std::ios::binary);
    total = data_lines(file);
  }
  ProgressBar bar("curve", total, o.quiet);
  StarTableReader reader(in.stream(), in.name(), o.windows);
  if (!o.all) reader.keep_ids([&](std::string_view id) { return wanted.count(id) > 0; });
  TableOutput out(o.output, format_for(o.output, o.format), curve_column_units());
  std::unique_ptr<AtomicOutput> json;
  std::unique_ptr<TableOutput> draws;
  if (!o.json.empty()) {
    json = std::make_unique<AtomicOutput>(o.json);
    json->write("{\"stars\":[\n");
  }
  if (copt.keep_draws) {
    draws = std::make_unique<TableOutput>(o.keep_draws, format_for(o.keep_draws), draw_column_units());
    draws->write(draws_header());
  }
  out.write(curve_header());
  StatusCounter counter;
  std::set<std::string> found;
  std::vector<std::string> warnings;
  long n_json = 0, done = 0;
  // One star's outputs, computed apart from the others.
  struct StarResult {
    RowStatus status;
    std::string rows, draw_rows, json, warning;
    std::exception_ptr error;
  };
  auto compute = [&](const StarRecord& star, const std::string& bad) {
    StarResult res;
    const ScreenRow row = screen_star(star, bad, sopt);
    res.status = row.status;
    AnomalyData d;
    if (row.ok()) {
      bool have_mass = false;
      d = anomaly_data(star, row.result, o.host_mass_msun, o.host_mass_error_msun, have_mass);
      if (!have_mass) res.status = RowStatus::bad_input("no_host_mass");
    }
    nlohmann::ordered_json j;
    j["id"] = star.id;
    j["status"] = res.status.text();
    if (res.status.ok()) {
      Curve c;
      if (o.method == "analytic") {
        c = analytic_curve(d, copt);
      } else if (o.method == "profile") {
        bool have = false;
        const StarFile f = star_file_of(star, o.host_mass_msun, o.host_mass_error_msun, have);
        FitOptions fo;
        fo.prior = copt.prior;
        fo.a_min_au = copt.a_au.front();
        fo.a_max_au = copt.a_au.back();
        fo.seed = copt.seed;
        fo.starts = o.starts;
        c = profile_curve(FitModel(f, row.result, fo), copt.a_au, fo, star.id);
      } else {
        c = montecarlo_curve(d, copt, star.id);
      }
      append_curve_rows(res.rows, star.id, c);
      if (draws)
        for (const auto& dr : c.draws) append_draw_row(res.draw_rows, star.id, dr);
      const bool low_ess = o.method == "montecarlo" && c.min_ess < kLowEss;
      if (low_ess && !o.quiet)  // printed after the progress bar is gone
        res.warning = "warning: star " + star.id + ": effective sample size " + format_double(std::round(c.min_ess)) +
                      " < " + format_double(kLowEss) + " at some separation; raise --draws";
      j["method"] = o.method;
      j["mode"] = c.upper_limit ? "upper_limit" : "detection";
      j["dark_companion_assumed"] = true;
      j["sig_joint"] = d.sig_joint;
      j["host_mass_msun"] = d.host_mass_msun;
      j["parallax_mas"] = d.parallax_mas;
      if (o.method == "montecarlo") {
        j["min_ess"] = c.min_ess;
        j["ess_warning"] = low_ess;
        j["log10_bayes"] = json_number(c.log10_bayes);
        j["log10_bayes_error"] = json_number(c.log10_bayes_error);
      }
      nlohmann::ordered_json pts = nlohmann::ordered_json::array();
      for (const auto& p : c.points)
        pts.push_back(curve_point_json(p, c.upper_limit, copt.quantile_errors && o.method == "montecarlo"));
      j["points"] = pts;
    }
    if (json) res.json = j.dump();
    return res;
  };
  // Stars are computed a batch at a time, one curve per thread, then
  // written in table order; a lone star's curve uses the threads itself.
  // (30 curves on two threads: 1.68x the speed of one core with the
  // threads inside each curve, 1.98x with a curve per thread.) Each curve
  // depends on its star and the seed alone, so the outputs do not depend
  // on the threads.
  std::vector<std::pair<StarRecord, std::string>> batch;
  const std::size_t batch_size = 16 * static_cast<std::size_t>(omp_get_max_threads());
  auto flush = [&] {
    std::vector<StarResult> res(batch.size());
    const long n = static_cast<long>(batch.size());
#pragma omp parallel for schedule(dynamic, 1) if (n > 1)
    for (long k = 0; k < n; ++k) {
      try {
        res[k] = compute(batch[k].first, batch[k].second);
      } catch (...) {
        res[k].error = std::current_exception();
      }
    }
    for (long k = 0; k < n; ++k) {
      StarResult& r = res[k];
      found.insert(batch[k].first.id);
      bar.update(++done);
      if (r.error) std::rethrow_exception(r.error);
      counter.add(r.status);
      if (!r.rows.empty()) out.write(r.rows);
      if (draws && !r.draw_rows.empty()) draws->write(r.draw_rows);
      if (!r.warning.empty()) warnings.push_back(std::move(r.warning));
      if (json) json->write(std::string(n_json++ ? ",\n" : "") + r.json);
    }
    batch.clear();
  };
  try {
    StarRecord star;
    std::string bad;
    while (reader.next(star, bad)) {
      batch.emplace_back(star, bad);
      if (batch.size() >= batch_size) flush();
    }
  } catch (...) {
    flush();  // the rows before a row that does not read come first, errors too
    throw;
  }
  flush();
  bar.finish();
  for (const auto& w : warnings) message("curve", w);
  std::string missing;
  for (const auto& id : wanted)
    if (!found.count(id)) missing += (missing.empty() ? "'" : ", '") + clip_for_message(id) + "'";
  if (!missing.empty()) throw InputError(in.name(), 0, 0, "no star with id " + missing);
  if (json) {
    nlohmann::ordered_json run = counter.run_json("curve", in.name());
    run["method"] = o.method;
    run["draws"] = copt.draws;
    run["quantile_tolerance"] = copt.quantile_tolerance;
    run["ecc_prior"] = copt.prior.ecc.str();
    run["mass_prior"] = {{"detection", copt.prior.mass_prior(false).describe()},
                         {"upper_limit", copt.prior.mass_prior(true).describe()},
                         {"m_min_mjup", copt.prior.m_min_mjup}, {"m_max_mjup", copt.prior.m_max_mjup}};
    run["a_prior"] = "log-uniform";
    run["detect_sigma"] = copt.prior.detect_sigma;
    run["seed"] = copt.seed;
    run["dark_companion_assumed"] = true;
    run["units"] = units_json(curve_column_units());
    json->write("\n],\n\"run\":" + run.dump() + "}\n");
    json->commit();
  }
  if (draws) draws->commit();
  out.commit();
  counter.print_summary("curve");
  if (!o.quiet) message("curve", std::to_string(counter.total()) + " stars");
  return counter.exit_code();
}

}  // namespace

void setup_curve(CLI::App& app, Runner& run) {
  auto o = std::make_shared<CurveCliOptions>();
  CurveOptions& c = o->curve;
  CLI::App* sub = app.add_subcommand(
      "curve",
      "Companion mass-separation constraints from each star's anomaly (dark companion assumed): "
      "posterior mass quantiles (MJup) per trial semi-major axis (AU).");
  sub->add_option("stars", o->input, "canonical star table (CSV; '-' = stdin)")->required();
  sub->add_option("--id", o->id, "the star to compute (or --ids, --all)");
  sub->add_option("--ids", o->ids, "file of star ids, one per line ('#' lines are comments)");
  sub->add_flag("--all", o->all, "every star of the table (seconds each; a progress bar on a terminal)");
  sub->add_option("-o,--output", o->output, "curve table (CSV, ECSV or FITS); default stdout");
  add_format_option(sub, o->format);
  sub->add_option("--json", o->json,
                  "also write the curves as JSON (mode, ESS and the draws of each separation, the mass "
                  "quantiles' Monte Carlo errors, priors)");
  sub->add_option("--keep-draws", o->keep_draws,
                  "write weighted posterior orbit draws (CSV, docs/formats.md) for heft predict");
  sub->add_option("--method", o->method,
                  "analytic (circular orbits), montecarlo (forward model, marginal posterior) or profile "
                  "(profile likelihood over all other elements, by Ceres)")
      ->check(CLI::IsMember({"analytic", "montecarlo", "profile"}))
      ->capture_default_str();
  sub->add_option("--host-mass", o->host_mass_msun, "host mass for stars without 'mass' (Msun)")
      ->check(CLI::PositiveNumber);
  sub->add_option("--host-mass-error", o->host_mass_error_msun, "its error (Msun)")
      ->check(CLI::NonNegativeNumber);
  sub->add_option("--a-min", o->a_min_au, "smallest trial semi-major axis (AU)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--a-max", o->a_max_au, "largest trial semi-major axis (AU)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--n-a", o->n_a, "points of the log grid in a (refined where needed)")
      ->check(CLI::Range(1, 100000))->capture_default_str();
  sub->add_option("--a-list", o->a_list, "explicit trial semi-major axes A1,A2,... (AU)")
      ->delimiter(',')
      ->check(CLI::PositiveNumber);
  add_draws_option(sub, c.draws);
  sub->add_option("--quantile-tolerance", c.quantile_tolerance,
                  "keep drawing (up to four rounds of --draws per separation) until the Monte Carlo error of the "
                  "95 % upper limit, or of a detection's 2.5 and 97.5 % quantiles, is at most this fraction of "
                  "their value (0: off; e.g. 0.05)")
      ->check(CLI::Range(0.0, 1.0))
      ->capture_default_str();
  add_prior_options(sub, c.prior, o->ecc, "below this sig_joint the curve is an upper limit (prior uniform in mass)");
  sub->add_option("--starts", o->starts, "optimiser starts per separation (profile method)")
      ->check(CLI::Range(1, 10000))->capture_default_str();
  sub->add_option("--seed", c.seed, "random seed (one stream per star id)")->capture_default_str();
  add_screen_options(sub, o->screen, o->windows, o->late_spin_table);
  sub->add_option("-j,--threads", o->threads, "threads (default: all cores); output is identical")
      ->check(CLI::NonNegativeNumber);
  sub->add_flag("-q,--quiet", o->quiet, "no informational messages and no progress bar");
  sub->footer(
      "Columns: id, a_au (AU), sep_mas (a x parallax, mas), period_yr, weight (posterior "
      "probability of the separation bin, log-uniform prior on a), mass_lo95, mass_lo68, mass_med, "
      "mass_hi68, mass_hi95 (MJup; 2.5/16/50/84/97.5 %). Upper limits: only mass_hi68, mass_hi95 "
      "(68 %, 95 %).");
  sub->callback([o, &run] { run = [o] { return run_curve(*o); }; });
}

}  // namespace heft::cli
