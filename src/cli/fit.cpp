// heft fit: the deep single-star Keplerian fit of a JSON star file.

#include <omp.h>

#include <cstdio>
#include <memory>

#include "cli/commands.hpp"
#include "heft/error.hpp"
#include "heft/fit.hpp"
#include "heft/io.hpp"
#include "heft/stats.hpp"
#include "heft/version.hpp"

namespace heft::cli {
namespace {

struct FitCliOptions {
  std::string input, output = "-", samples, profile, ecc;
  std::string late_spin_table;
  ScreenOptions screen;
  WindowDefaults windows;
  FitOptions fit;
  double a_min_au = 0.5, a_max_au = 500.0;
  int n_a = 32;
  int threads = 0;
  bool no_sample = false, quiet = false;
};

int run_fit_command(FitCliOptions o) {
  require_distinct_outputs({{"-o", o.output}, {"--samples", o.samples}, {"--profile", o.profile}});
  const ScreenOptions sopt = resolve_screen_options(o.screen, o.late_spin_table);
  FitOptions fopt = o.fit;
  resolve_prior_options(fopt.prior, o.ecc);
  if (fopt.prior.ecc.kind == Distribution::Kind::kFixed)
    throw CLI::ValidationError("--ecc: the fit needs a prior, not a fixed value");
  fopt.a_min_au = o.a_min_au;
  fopt.a_max_au = o.a_max_au;
  fopt.sample = !o.no_sample;
  if (!(fopt.a_min_au < fopt.a_max_au)) throw CLI::ValidationError("--a-min must be below --a-max");
  if (!(fopt.jitter_min_m_s < fopt.jitter_max_m_s)) throw CLI::ValidationError("--jitter-min must be below --jitter-max");
  if (fopt.walkers % 2 != 0) throw CLI::ValidationError("--walkers must be even");
  if (o.threads > 0) omp_set_num_threads(o.threads);

  InputFile in(o.input);
  const StarFile f = read_star_file(in.stream(), in.name(), o.windows);
  if (f.instruments.size() > static_cast<std::size_t>(kMaxInstruments))
    throw InputError::at_json(in.name(), "/radial_velocities",
                              "at most " + std::to_string(kMaxInstruments) + " instrument labels");
  const ScreenRow row = screen_star(f.star, "", sopt);
  if (!row.ok()) throw NumericError(f.star.id, "screen", row.status.text());
  const FitModel model(f, row.result, fopt);
  if (fopt.sample && fopt.walkers != 0 && fopt.walkers < 2 * model.n_params())
    throw CLI::ValidationError("--walkers must be at least twice the number of parameters (" +
                               std::to_string(2 * model.n_params()) + ")");

  AtomicOutput out(o.output);
  std::unique_ptr<TableOutput> samples, profile;
  if (!o.samples.empty())
    samples = std::make_unique<TableOutput>(o.samples, format_for(o.samples), draw_column_units());
  if (!o.profile.empty())
    profile = std::make_unique<TableOutput>(o.profile, format_for(o.profile), curve_column_units());

  std::unique_ptr<ProgressBar> bar;
  const FitResult r = run_fit(model, fopt, f.star.id, [&](long done, long total) {
    if (!bar) bar = std::make_unique<ProgressBar>("fit", total, o.quiet);
    bar->update(done);
  });
  if (bar) bar->finish();
  const nlohmann::ordered_json j = fit_json(model, f, row, r, in.name());
  if (samples) {  // the header alone with --no-sample
    std::string buf = draws_header();
    if (r.sampled)
      for (const OrbitDraw& d : posterior_draws(model, r)) append_draw_row(buf, f.star.id, d);
    samples->write(buf);
  }
  if (profile) {
    const Curve pc = profile_curve(model, log_grid(fopt.a_min_au, fopt.a_max_au, o.n_a), fopt, f.star.id);
    std::string buf = curve_header();
    append_curve_rows(buf, f.star.id, pc);
    profile->write(buf);
  }
  out.write(j.dump(1) + "\n");
  if (samples) samples->commit();
  if (profile) profile->commit();
  out.commit();
  if (!o.quiet) {
    for (const auto& w : j["warnings"]) message("fit", "warning: " + w.get<std::string>());
    if (r.sampled) {
      // The posterior summary: median, 68 % and 95 % intervals.
      const auto& q = j["posterior"]["quantiles"];
      auto fmt = [](double v) {
        char b[32];
        std::snprintf(b, sizeof b, "%.3g", v);
        return std::string(b);
      };
      for (const auto& [key, label] : {std::pair{"mass_mjup", "mass (MJup)"}, {"a_au", "a (AU)"},
                                       {"period_yr", "period (yr)"}, {"ecc", "e"}, {"inc_deg", "i (deg)"}}) {
        const auto& x = q[key];
        if (!x.contains("q50") || x["q50"].is_null()) {
          if (x.contains("q95") && !x["q95"].is_null())
            message("fit", std::string(label) + ": below " + fmt(x["q68"].get<double>()) + " (68 %), " +
                               fmt(x["q95"].get<double>()) + " (95 %)");
          continue;
        }
        message("fit", std::string(label) + ": " + fmt(x["q50"].get<double>()) + "  68 %: " + fmt(x["q16"].get<double>()) +
                           "-" + fmt(x["q84"].get<double>()) + "  95 %: " + fmt(x["q2.5"].get<double>()) + "-" +
                           fmt(x["q97.5"].get<double>()));
      }
    }
    message("fit", f.star.id + ": " + std::to_string(r.minima.size()) + " distinct minima (basins the data tell apart" +
                       (r.minima_dropped ? "; " + std::to_string(r.minima_dropped) + " more far above the best, not kept" : "") +
                       "), best -2 ln L " + format_double(std::round(r.minima.front().m2lnl * 100) / 100));
  }
  return kOk;
}

}  // namespace

void setup_fit(CLI::App& app, Runner& run) {
  auto o = std::make_shared<FitCliOptions>();
  FitOptions& f = o->fit;
  CLI::App* sub = app.add_subcommand(
      "fit",
      "Deep Keplerian fit of one star (JSON star file: catalogue solutions, host-mass prior, relative "
      "astrometry, RVs): local minima (Ceres) from starts drawn half from the imaged positions and motion "
      "and half from the prior (all from the prior without imaging), and the posterior from independent ensembles of walkers (stretch and "
      "differential-evolution moves) in the companion's relative position and velocity at the mean "
      "imaging epoch; R-hat across the chains and autocorrelation times checked. A progress bar on a "
      "terminal.");
  sub->add_option("star", o->input, "star file (JSON, docs/formats.md; '-' = stdin)")->required();
  sub->add_option("-o,--output", o->output, "fit result (JSON); default stdout");
  sub->add_option("--samples", o->samples, "posterior orbit draws (CSV, the table heft predict reads)");
  sub->add_option("--profile", o->profile,
                  "profile-likelihood mass-separation curve (CSV, the schema of heft curve)");
  sub->add_option("--a-min", o->a_min_au, "lower bound of the log-uniform prior on a (AU)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--a-max", o->a_max_au, "upper bound of the prior on a (AU)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--n-a", o->n_a, "points of the log grid in a for --profile")
      ->check(CLI::Range(1, 10000))->capture_default_str();
  sub->add_option("--jitter-min", f.jitter_min_m_s, "lower bound of the log-uniform RV jitter prior (m/s)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--jitter-max", f.jitter_max_m_s, "upper bound of the RV jitter prior (m/s)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  add_prior_options(sub, f.prior, o->ecc,
                    "without relative astrometry and below this sig_joint: upper limit (mass prior uniform)");
  sub->add_option("--starts", f.starts, "optimiser starts (with imaging half from the imaged positions and motion, half from the prior)")
      ->check(CLI::Range(1, 100000))->capture_default_str();
  sub->add_option("--walkers", f.walkers, "walkers per chain (even, >= 2 x parameters; 0 = the even max(32, 2 x parameters))")
      ->check(CLI::Range(0, 100000))->capture_default_str();
  sub->add_option("--chains", f.sampler.chains, "independent chains (ensembles), for R-hat; run in parallel")
      ->check(CLI::Range(1, 64))->capture_default_str();
  sub->add_option("--temperatures", f.sampler.temperatures,
                  "levels of the parallel-tempering ladder per chain (1 = none); hotter levels let walkers cross between modes")
      ->check(CLI::Range(1, 64))->capture_default_str();
  sub->add_option("--t-max", f.sampler.t_max, "temperature of the hottest level (likelihood^(1/T_max)); levels geometric in between")
      ->check(CLI::Range(1.0, 1e12))->capture_default_str();
  sub->add_option("--steps", f.sampler.steps, "ensemble steps per chain after burn-in")
      ->check(CLI::Range(10, 100000000))->capture_default_str();
  sub->add_option("--burn", f.sampler.burn, "ensemble steps discarded as burn-in")
      ->check(CLI::NonNegativeNumber)->capture_default_str();
  sub->add_option("--thin", f.sampler.thin, "keep every N-th step")->check(CLI::Range(1, 1000000))->capture_default_str();
  sub->add_flag("--no-sample", o->no_sample, "optimise only (minima and covariances, no posterior)");
  sub->add_option("--seed", f.seed, "random seed")->capture_default_str();
  add_screen_options(sub, o->screen, o->windows, o->late_spin_table);
  sub->add_option("-j,--threads", o->threads, "threads (default: all cores); output is identical")
      ->check(CLI::NonNegativeNumber);
  sub->add_flag("-q,--quiet", o->quiet, "no informational messages");
  sub->footer(
      "Parameters: ln mass (MJup), ln a (AU), sqrt(e) cos/sin omega, cos i, Omega, mean longitude at the "
      "mean epoch of the relative astrometry, else the late catalogue epoch (rad), host mass (Msun), parallax "
      "(mas), barycentric pmra/pmdec (mas/yr), per instrument an RV offset (m/s) and ln jitter (ln m/s). "
      "Priors: " + fit_prior_help() + ". Output quantiles q2.5/q16/q50/q84/q97.5 of mass (MJup), a (AU), "
      "P (yr), e, i (deg), host mass (Msun), parallax (mas); an upper limit gives the mass's q68 and q95. "
      "Exit 3 when no start reaches a finite posterior.");
  sub->callback([o, &run] { run = [o] { return run_fit_command(*o); }; });
}

}  // namespace heft::cli
