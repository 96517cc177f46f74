// heft fit: the deep single-star Keplerian fit of a JSON star file.

#include <omp.h>

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
  std::string input, output = "-", samples, profile, ecc = "uniform:0,0.95";
  std::string late_spin_table;
  ScreenOptions screen;
  WindowDefaults windows;
  FitOptions fit;
  double a_min_au = 0.5, a_max_au = 500.0;
  int n_a = 32;
  int threads = 0;
  bool no_sample = false, quiet = false;
};

using ojson = nlohmann::ordered_json;

ojson num(double v) { return std::isfinite(v) ? ojson(v) : ojson(nullptr); }

ojson minimum_json(const FitModel& m, const FitMinimum& mn, bool with_cov) {
  ojson j;
  j["m2lnl"] = mn.m2lnl;
  j["m2lnpost"] = mn.m2lnpost;
  j["hits"] = mn.hits;
  ojson p, d, ds;
  const auto names = m.param_names();
  for (int i = 0; i < m.n_params(); ++i) p[names[i]] = mn.p[i];
  const OrbitDraw o = m.orbit(mn.p.data());
  j["orbit"] = {{"mass_mjup", o.mass_mjup},     {"a_au", o.a_au},         {"period_yr", o.period_yr},
                {"ecc", o.ecc},                 {"inc_deg", o.inc_deg},   {"arg_peri_deg", o.arg_peri_deg},
                {"node_deg", o.node_deg},       {"mean_anom_deg", o.mean_anom_deg},
                {"ref_epoch_yr", o.ref_epoch_yr}, {"host_mass_msun", o.host_mass_msun},
                {"parallax_mas", o.parallax_mas}};
  for (int k = 0; k < 5; ++k) ds[derived_names()[k]] = num(mn.derived_sigma[k]);
  j["sigma"] = ds;
  j["covariance"] = mn.covariance_ok ? "ok" : mn.flag;
  j["params"] = p;
  if (with_cov && mn.covariance_ok) {
    ojson rows = ojson::array();
    for (int r = 0; r < mn.cov.rows(); ++r) {
      ojson row = ojson::array();
      for (int c = 0; c < mn.cov.cols(); ++c) row.push_back(mn.cov(r, c));
      rows.push_back(row);
    }
    j["covariance_params"] = std::vector<std::string>(names.begin(), names.begin() + mn.cov.rows());
    j["covariance_matrix"] = rows;
  }
  return j;
}

// Quantile of (value, weight) pairs whose weights sum to 1.
double quantile(std::vector<std::pair<double, double>> v, double p) {
  std::sort(v.begin(), v.end());
  return weighted_quantile(v, 1.0, p);
}

int run_fit_command(FitCliOptions o) {
  require_distinct_outputs({{"-o", o.output}, {"--samples", o.samples}, {"--profile", o.profile}});
  const ScreenOptions sopt = resolve_screen_options(o.screen, o.late_spin_table);
  FitOptions fopt = o.fit;
  fopt.ecc = Distribution::parse(o.ecc, "--ecc");
  if (fopt.ecc.kind == Distribution::Kind::kFixed) throw CLI::ValidationError("--ecc: the fit needs a prior, not a fixed value");
  fopt.a_min_au = o.a_min_au;
  fopt.a_max_au = o.a_max_au;
  fopt.sample = !o.no_sample;
  if (!(fopt.m_min_mjup < fopt.m_max_mjup)) throw CLI::ValidationError("--m-min must be below --m-max");
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
  if (fopt.sample && fopt.walkers < 2 * model.n_params())
    throw CLI::ValidationError("--walkers must be at least twice the number of parameters (" +
                               std::to_string(2 * model.n_params()) + ")");

  AtomicOutput out(o.output);
  std::unique_ptr<AtomicOutput> samples, profile;
  if (!o.samples.empty()) samples = std::make_unique<AtomicOutput>(o.samples);
  if (!o.profile.empty()) profile = std::make_unique<AtomicOutput>(o.profile);

  const FitResult r = run_fit(model, fopt, f.star.id);
  ojson j;
  j["id"] = f.star.id;
  j["mode"] = r.upper_limit ? "upper_limit" : "detection";
  j["orbit_constraint"] = f.relative.empty() ? "statistical_only" : "relative_astrometry";
  if (f.relative.empty())
    j["orbit_note"] =
        "no relative astrometry: the orbit is constrained only statistically by the proper-motion anomaly";
  j["sig_joint"] = row.result.sig_joint;
  j["data"] = {{"relative_epochs", f.relative.size()}, {"rv_points", f.rv.size()}, {"instruments", f.instruments}};
  j["screen_notes"] = row.notes;
  ojson mins = ojson::array();
  for (const auto& mn : r.minima) mins.push_back(minimum_json(model, mn, false));
  j["best"] = minimum_json(model, r.minima.front(), true);
  j["minima"] = mins;
  std::vector<std::string> warnings = r.warnings;
  if (!r.minima.front().covariance_ok)
    warnings.push_back("best-fit covariance: " + r.minima.front().flag);
  if (r.sampled) {
    const EnsembleChain& c = r.chain;
    const auto names = model.param_names();
    std::vector<OrbitDraw> draws;
    for (Eigen::Index k = 0; k < c.samples.rows(); ++k) {
      const Eigen::VectorXd p = c.samples.row(k).transpose();
      draws.push_back(model.orbit(p.data()));
    }
    ojson post;
    post["walkers"] = c.walkers;
    post["steps"] = fopt.sampler.steps;
    post["burn"] = fopt.sampler.burn;
    post["thin"] = fopt.sampler.thin;
    post["kept"] = draws.size();
    post["acceptance"] = c.acceptance;
    ojson modes = ojson::array();
    for (const auto& md : r.modes)
      modes.push_back({{"m2lnpost", md.m2lnpost}, {"weight", md.weight}, {"walkers", md.walkers},
                       {"with_mirror", md.mirrored}});
    if (f.relative.empty())
      post["start"] = {{"method", "heft curve draws, importance-weighted"}, {"ess", r.init_ess}};
    else
      post["start"] = {{"method", "one ensemble per mode, modes weighted by Laplace evidence"}, {"modes", modes}};
    ojson tau;
    for (int i = 0; i < model.n_params(); ++i) tau[names[i]] = num(c.iat_steps[i]);
    post["autocorr_steps"] = tau;
    ojson q;
    auto add = [&](const char* name, auto get) {
      std::vector<std::pair<double, double>> v;
      for (std::size_t k = 0; k < draws.size(); ++k) v.emplace_back(get(draws[k]), r.sample_weight[k]);
      if (r.upper_limit && std::string(name) == "mass_mjup") {
        q[name] = {{"upper68", quantile(v, 0.68)}, {"upper95", quantile(v, 0.95)}};
        return;
      }
      q[name] = {{"q2.5", quantile(v, 0.025)}, {"q16", quantile(v, 0.16)}, {"q50", quantile(v, 0.5)},
                 {"q84", quantile(v, 0.84)},   {"q97.5", quantile(v, 0.975)}};
    };
    add("mass_mjup", [](const OrbitDraw& d) { return d.mass_mjup; });
    add("a_au", [](const OrbitDraw& d) { return d.a_au; });
    add("period_yr", [](const OrbitDraw& d) { return d.period_yr; });
    add("ecc", [](const OrbitDraw& d) { return d.ecc; });
    add("inc_deg", [](const OrbitDraw& d) { return d.inc_deg; });
    add("host_mass_msun", [](const OrbitDraw& d) { return d.host_mass_msun; });
    add("parallax_mas", [](const OrbitDraw& d) { return d.parallax_mas; });
    post["quantiles"] = q;
    j["posterior"] = post;
    if (samples) {
      std::string buf = draws_header();
      for (std::size_t k = 0; k < draws.size(); ++k) {
        draws[k].weight = r.sample_weight[k];
        append_draw_row(buf, f.star.id, draws[k]);
      }
      samples->write(buf);
    }
  }
  if (profile) {
    const Curve pc = profile_curve(model, log_grid(fopt.a_min_au, fopt.a_max_au, o.n_a), fopt, f.star.id);
    std::string buf = curve_header();
    append_curve_rows(buf, f.star.id, pc);
    profile->write(buf);
  }
  j["warnings"] = warnings;
  ojson priors = {
      {"mass", r.upper_limit ? "uniform in companion mass on [1e-4 m_max, m_max] (upper limit)"
                             : "log-uniform in companion mass on [m_min, m_max]"},
      {"m_min_mjup", fopt.m_min_mjup},
      {"m_max_mjup", fopt.m_max_mjup},
      {"a", "log-uniform on [a_min, a_max]"},
      {"a_min_au", fopt.a_min_au},
      {"a_max_au", fopt.a_max_au},
      {"ecc", fopt.ecc.str()},
      {"orientation", "isotropic: uniform cos i, Omega, mean longitude; omega uniform through sqrt(e) (cos, sin)"},
      {"host_mass", f.host_mass.kind == HostMassPrior::Kind::kNormal ? "normal" : "lognormal"},
      {"host_mass_center_msun", f.host_mass.center_msun},
      {"host_mass_width", f.host_mass.width},
      {"parallax", "normal: late catalogue value and error"},
      {"proper_motion", "uniform"},
      {"rv_offset", "uniform"},
      {"rv_jitter", "log-uniform on [jitter_min, jitter_max]"},
      {"jitter_min_m_s", fopt.jitter_min_m_s},
      {"jitter_max_m_s", fopt.jitter_max_m_s}};
  j["priors"] = priors;
  ojson run = {{"heft_version", kVersion}, {"command", "fit"}, {"input", in.name()}, {"seed", fopt.seed},
               {"starts", fopt.starts}, {"dark_companion_assumed", true}};
  j["run"] = run;
  out.write(j.dump(1) + "\n");
  if (samples) samples->commit();
  if (profile) profile->commit();
  out.commit();
  if (!o.quiet) {
    for (const auto& w : warnings) message("fit", "warning: " + w);
    message("fit", f.star.id + ": " + std::to_string(r.minima.size()) + " distinct minima, best -2 ln L " +
                       format_double(std::round(r.minima.front().m2lnl * 100) / 100));
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
      "astrometry, RVs): every local minimum (Ceres), posterior by an affine-invariant ensemble sampler.");
  sub->add_option("star", o->input, "star file (JSON, docs/formats.md; '-' = stdin)")->required();
  sub->add_option("-o,--output", o->output, "fit result (JSON); default stdout");
  sub->add_option("--samples", o->samples, "posterior orbit draws (CSV, the table heft predict reads)");
  sub->add_option("--profile", o->profile,
                  "profile-likelihood mass-separation curve (CSV, the schema of heft curve)");
  sub->add_option("--m-min", f.m_min_mjup, "lower bound of the log-uniform mass prior (MJup)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--m-max", f.m_max_mjup, "upper bound of the mass prior (MJup)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--a-min", o->a_min_au, "lower bound of the log-uniform prior on a (AU)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--a-max", o->a_max_au, "upper bound of the prior on a (AU)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--n-a", o->n_a, "points of the log grid in a for --profile")
      ->check(CLI::Range(1, 10000))->capture_default_str();
  sub->add_option("--ecc", o->ecc, "eccentricity prior: uniform:A,B | beta:A,B | loguniform:A,B")
      ->capture_default_str();
  sub->add_option("--jitter-min", f.jitter_min_m_s, "lower bound of the log-uniform RV jitter prior (m/s)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--jitter-max", f.jitter_max_m_s, "upper bound of the RV jitter prior (m/s)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--detect-sigma", f.detect_sigma,
                  "without relative astrometry and below this sig_joint: upper limit (mass prior uniform)")
      ->capture_default_str();
  sub->add_option("--starts", f.starts, "optimiser starts drawn from the prior")
      ->check(CLI::Range(1, 100000))->capture_default_str();
  sub->add_option("--walkers", f.walkers, "ensemble walkers (even, >= 2 x parameters)")
      ->check(CLI::Range(2, 100000))->capture_default_str();
  sub->add_option("--steps", f.sampler.steps, "ensemble steps after burn-in")
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
      "mean epoch of the relative astrometry, else the late catalogue epoch (rad), host mass (Msun), parallax (mas), barycentric pmra/pmdec (mas/yr), "
      "per instrument an RV offset (m/s) and ln jitter (ln m/s). Priors: mass log-uniform on [m_min, m_max] "
      "(uniform on (0, m_max] for an upper limit), a log-uniform, e from --ecc, isotropic orientation (cos i, "
      "Omega, mean longitude uniform), host mass from the star file, parallax normal (late catalogue), PM and "
      "RV offsets uniform, jitter log-uniform. Output quantiles 2.5/16/50/84/97.5 % of mass (MJup), a (AU), "
      "P (yr), e, i (deg). Exit 3 when no start reaches a finite posterior.");
  sub->callback([o, &run] { run = [o] { return run_fit_command(*o); }; });
}

}  // namespace heft::cli
