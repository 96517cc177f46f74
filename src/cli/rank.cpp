// heft rank: a target list in, a ranked imaging plan out (screen, curves,
// sky prediction, score), multithreaded, shardable and resumable.

#include <omp.h>

#include <cstdio>
#include <memory>
#include <mutex>

#include "cli/commands.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/rank.hpp"
#include "heft/survey.hpp"

namespace heft::cli {
namespace {

struct RankCliOptions {
  std::string input, output = "-", json, shard = "1/1", contrast, mass_mag, ecc, format;
  std::string late_spin_table, dates;
  SurveyOptions survey;
  int threads = 0;
  bool resume = false, quiet = false;
};

int run_rank(RankCliOptions o) {
  SurveyOptions& so = o.survey;
  CurveOptions& c = so.rank.curve;
  resolve_prior_options(c.prior, o.ecc);
  check_curve_eccentricity(c.prior.ecc, "--ecc");
  if (!(so.a_min_au < so.a_max_au)) throw CLI::ValidationError("--a-min must be below --a-max");
  if (!(so.rank.iwa_mas < so.rank.owa_mas)) throw CLI::ValidationError("--iwa must be below --owa");
  if (!(so.rank.target_min_mjup < so.rank.target_max_mjup))
    throw CLI::ValidationError("--target-mass: MIN must be below MAX");
  if (o.contrast.empty() != o.mass_mag.empty())
    throw CLI::ValidationError("--contrast and --mass-mag go together (a detection probability needs both)");
  const OutputTarget target = resolve_output(o.output);
  if (o.resume && target.kind != OutputTarget::Kind::kFile)
    throw CLI::ValidationError("--resume needs -o FILE, a regular file (the checkpoint lives beside it)");
  require_distinct_outputs({{"-o", o.output}, {"--json", o.json}});
  if (!parse_shard(o.shard, so.shard_k, so.shard_n))
    throw CLI::ValidationError("--shard: expected K/N with 1 <= K <= N <= 1000000, got '" + o.shard + "'");
  if (o.threads > 0) omp_set_num_threads(o.threads);
  so.screen = resolve_screen_options(so.screen, o.late_spin_table);
  so.screen_fingerprint = screen_fingerprint(so.screen, so.windows);
  // Only a regular-file output has a checkpoint, beside its resolved path.
  if (target.kind == OutputTarget::Kind::kFile) so.checkpoint = target.path + ".checkpoint";
  so.resume = o.resume;
  std::unique_ptr<ContrastCurve> contrast;
  std::unique_ptr<MassMagnitude> mass_mag;
  if (!o.contrast.empty()) {
    TableInput f(o.contrast, {{"sep_mas", "mas"}, {"delta_mag", "mag"}});
    TableInput g(o.mass_mag, {{"mass_mjup", "Mjup"}, {"abs_mag", "mag"}});
    contrast = std::make_unique<ContrastCurve>(ContrastCurve::read(f.stream(), f.name()));
    mass_mag = std::make_unique<MassMagnitude>(MassMagnitude::read(g.stream(), g.name()));
    so.rank.contrast = contrast.get();
    so.rank.mass_mag = mass_mag.get();
    so.contrast_name = o.contrast;
    so.mass_mag_name = o.mass_mag;
  }

  TableInput in(o.input, star_column_units());
  std::unique_ptr<ProgressBar> bar;
  std::once_flag bar_made;  // the bar appears with the first finished curve, from any thread
  const SurveyRun run = run_survey(in.stream(), in.name(), so, [&](long done, long total) {
    std::call_once(bar_made, [&] { bar = std::make_unique<ProgressBar>("rank", total, o.quiet); });
    bar->update(done);
  });
  if (bar) bar->finish();
  if (o.resume && !o.quiet) {
    if (!run.checkpoint_found) message("rank", "no checkpoint " + so.checkpoint + ": starting afresh");
    if (run.checkpoint_dropped > 0)
      message("rank", so.checkpoint + ": " + std::to_string(run.checkpoint_dropped) +
                          " damaged or torn line(s) dropped; those stars are computed again");
  }
  if (!o.json.empty()) write_file_atomic(o.json, ranked_json(run.info, run.records));
  TableOutput table(o.output, format_for(o.output, o.format), rank_column_units());
  table.write(ranked_table(run.info, run.records));
  table.commit();
  if (!so.checkpoint.empty()) std::remove(so.checkpoint.c_str());
  StatusCounter counter;
  for (const auto& r : run.records) counter.add(r.status);
  counter.print_summary("rank");
  if (!o.quiet) {
    message("rank", std::to_string(run.records.size()) + " stars (shard " + run.info.fields.at("shard") + "), " +
                        std::to_string(run.curves) + " with curves");
    char b[200];
    std::snprintf(b, sizeof b,
                  "time: read + screen %.2f s; curves + predict %.2f s wall (thread sums: curves %.2f s, predict %.3f s)",
                  run.screen_s, run.stage2_s, run.curve_s, run.predict_s);
    message("rank", b);
  }
  return counter.exit_code();
}

}  // namespace

void setup_rank(CLI::App& app, Runner& run) {
  auto o = std::make_shared<RankCliOptions>();
  RankOptions& r = o->survey.rank;
  CurveOptions& c = r.curve;
  // Fewer draws than heft curve's 4,096, so that a 10^5-star survey with 1,000
  // curves takes under a minute on two cores (41 s; docs/performance.md).
  c.draws = 512;
  CLI::App* sub = app.add_subcommand(
      "rank",
      "Rank imaging candidates: screen every star, compute curves above --detect-sigma, predict the "
      "companion's sky position at --date and score the chance that it exists (p_real, from the "
      "Bayes factor and --occurrence) and lies between the working angles with a mass in the target "
      "window. Ranks follow p_detect with --contrast and --mass-mag, else score. p_stellar is the "
      "chance that the companion is heavier than 80 MJup (note stellar_mass_likely above 0.5): such "
      "a companion is a star whose own light dilutes the anomaly, which the curves do not model yet.");
  sub->add_option("stars", o->input, "canonical star table (CSV; '-' = stdin)")->required();
  sub->add_option("--date", r.date_yr, "planned imaging date (decimal Julian year, 1900-2200; not MJD)")
      ->check(CLI::Range(1900.0, 2200.0))
      ->required();
  add_date_grid_option(sub, r.dates_yr, o->dates)
      ->description("also find each star's best imaging date on the grid START:END:STEP (decimal Julian years, "
                    "1900-2200): columns best_date_yr, best_date_score and first_date_score (the ranking "
                    "quantity at the best and at the first date); each draw moves on its own orbit");
  sub->add_option("-o,--output", o->output, "ranked table (CSV, ECSV or FITS); default stdout");
  add_format_option(sub, o->format);
  sub->add_option("--json", o->json, "also write the ranked table as JSON");
  sub->add_option("--iwa", r.iwa_mas, "inner working angle (mas)")->check(CLI::NonNegativeNumber)->capture_default_str();
  sub->add_option("--owa", r.owa_mas, "outer working angle (mas; default none)")->check(CLI::PositiveNumber);
  add_pair_option(sub, "--target-mass", r.target_min_mjup, r.target_max_mjup,
                  "scoring window MIN,MAX of companion mass (MJup); not the prior")
      ->default_str("1,80");
  sub->add_option("--occurrence", r.occurrence,
                  "assumed fraction of stars hosting a companion inside the prior's mass and separation "
                  "ranges (0-1, exclusive): turns each star's Bayes factor into p_real, the probability "
                  "that its anomaly is a companion and not noise. An assumption: set it for your sample")
      ->check(CLI::Range(0.0, 1.0))
      ->check(CLI::Validator(
          [](const std::string& v) {
            const double f = std::stod(v);  // a number: CLI::Range has checked it
            return f > 0.0 && f < 1.0 ? std::string() : std::string("must be between 0 and 1, exclusive");
          },
          "", "exclusive"))
      ->capture_default_str();
  sub->add_option("--contrast", o->contrast,
                  "instrument contrast limit (CSV: sep_mas, delta_mag) for a detection probability");
  sub->add_option("--mass-mag", o->mass_mag,
                  "companion mass-magnitude relation in the same band (CSV: mass_mjup, abs_mag)");
  sub->add_option("--max-curves", o->survey.max_curves, "curves for at most the N most significant stars (0 = all)")
      ->check(CLI::NonNegativeNumber)->capture_default_str();
  sub->add_option("--host-mass", r.host_mass_msun, "host mass for stars without 'mass' (Msun)")->check(CLI::PositiveNumber);
  sub->add_option("--host-mass-error", r.host_mass_error_msun, "its error (Msun)")->check(CLI::NonNegativeNumber);
  sub->add_option("--a-min", o->survey.a_min_au, "smallest trial semi-major axis (AU)")->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--a-max", o->survey.a_max_au, "largest trial semi-major axis (AU)")->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--n-a", o->survey.n_a, "points of the log grid in a (refined where needed)")
      ->check(CLI::Range(2, 100000))->capture_default_str();
  add_draws_option(sub, c.draws);
  add_prior_options(sub, c.prior, o->ecc, "curves for stars with sig_joint at or above this (below: not scored)");
  sub->add_option("--seed", c.seed, "random seed (one stream per star id)")->capture_default_str();
  sub->add_option("--shard", o->shard, "process slice K of N (rows K, K+N, K+2N, ...; 1-based); join with heft merge")
      ->capture_default_str();
  sub->add_flag("--resume", o->resume, "continue a killed run from OUTPUT.checkpoint");
  add_screen_options(sub, o->survey.screen, o->survey.windows, o->late_spin_table);
  sub->add_option("-j,--threads", o->threads, "threads (default: all cores); output is identical")
      ->check(CLI::NonNegativeNumber);
  sub->add_flag("-q,--quiet", o->quiet, "no messages and no progress bar");
  sub->footer(
      "Columns: id, rank, score (P(iwa <= sep <= owa and mass in the target window) at --date), p_detect "
      "(P(in the working angles and brighter than the contrast limit); with --contrast and --mass-mag), "
      "sig_joint, a_best_au (separation of highest posterior weight), mass_lo68, mass_med, mass_hi68 (MJup, at "
      "a_best_au), sep_lo68, sep_med, sep_hi68 (predicted separation, mas), pa_mode_deg, pa_arc68_start_deg, "
      "pa_arc68_width_deg (position angle: strongest mode and shortest 68 % arc), status, notes. The first "
      "line ('# heft-rank ...') holds the run metadata. Exit 4 when some rows are bad or failed.");
  sub->callback([o, &run] { run = [o] { return run_rank(*o); }; });
}

}  // namespace heft::cli
