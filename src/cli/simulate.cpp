// heft simulate: a synthetic two-epoch survey with injected companions.

#include <omp.h>

#include <memory>

#include "cli/commands.hpp"
#include "heft/io.hpp"
#include "heft/simulate.hpp"

namespace heft::cli {
namespace {

struct SimulateCliOptions {
  SurveyModel model;
  std::string output = "-", truth, format;
  std::string host_mass = "loguniform:0.5,1.5", distance = "uniform:20,200",
              companion_mass = "loguniform:1,80", a_au = "loguniform:1,100",
              ecc = "uniform:0,0.8";
  Eigen::Vector3d velocity = Eigen::Vector3d::Zero();
  std::string star_file, star_file_id;
  std::vector<double> imaging_epochs;
  double sep_error_mas = 1.0, pa_error_deg = 0.2;
  int threads = 0;
  bool quiet = false;
};

void add_catalogue_options(CLI::App* sub, const std::string& which, CatalogueModel& c) {
  sub->add_option("--" + which + "-epoch", c.epoch_yr,
                  "reference epoch of the " + which + " catalogue (Julian yr)")
      ->capture_default_str();
  add_pair_option(sub, "--" + which + "-window", c.window_start_yr, c.window_end_yr,
                  "observing window START,END of the " + which + " catalogue (yr)")
      ->default_str(format_double(c.window_start_yr) + "," + format_double(c.window_end_yr));
  add_pair_option(sub, "--" + which + "-pos-error", c.pos_error_lo_mas, c.pos_error_hi_mas,
                  "position and parallax errors, log-uniform LO,HI (mas)")
      ->default_str(format_double(c.pos_error_lo_mas) + "," + format_double(c.pos_error_hi_mas));
  add_pair_option(sub, "--" + which + "-pm-error", c.pm_error_lo_mas_yr, c.pm_error_hi_mas_yr,
                  "PM errors, log-uniform LO,HI (mas/yr)")
      ->default_str(format_double(c.pm_error_lo_mas_yr) + "," +
                    format_double(c.pm_error_hi_mas_yr));
}

// The follow-up star file of one simulated star: its catalogue row, a normal
// host-mass prior from its mass columns and imaging epochs of its companion.
void write_star_file(const SimulateCliOptions& o) {
  const SurveyModel& m = o.model;
  if (o.star_file_id.empty() || o.imaging_epochs.empty())
    throw CLI::ValidationError("--star-file needs --star-file-id and --imaging-epochs");
  for (long i = 0; i < m.n_stars; ++i) {
    if (simulated_id(m, i) != o.star_file_id) continue;
    StarRecord star;
    SimTruth t;
    simulate_star(m, i, star, t);
    if (!t.companion) throw CLI::ValidationError("--star-file-id: star " + o.star_file_id + " has no companion");
    Rng rng = Rng::for_star(m.seed ^ 0x1a6e5ULL, star.id);
    const StarFile f = follow_up_star_file(star, t, o.imaging_epochs, o.sep_error_mas, o.pa_error_deg, rng);
    write_file_atomic(o.star_file, star_file_json(f));
    return;
  }
  throw CLI::ValidationError("--star-file-id: no simulated star '" + o.star_file_id + "'");
}

int run_simulate(SimulateCliOptions o) {
  require_distinct_outputs({{"-o", o.output}, {"--truth", o.truth}, {"--star-file", o.star_file}});
  SurveyModel& m = o.model;
  m.host_mass_msun = Distribution::parse(o.host_mass, "--host-mass");
  m.distance_pc = Distribution::parse(o.distance, "--distance");
  m.companion_mass_mjup = Distribution::parse(o.companion_mass, "--companion-mass");
  m.a_au = Distribution::parse(o.a_au, "--a");
  m.ecc = Distribution::parse(o.ecc, "--ecc");
  m.v_east_km_s = o.velocity.x();
  m.v_north_km_s = o.velocity.y();
  m.v_radial_km_s = o.velocity.z();
  for (const CatalogueModel* c : {&m.early, &m.late})
    if (!(c->window_start_yr <= c->epoch_yr && c->epoch_yr <= c->window_end_yr))
      throw CLI::ValidationError("a catalogue window must contain its epoch");
  if (!(m.early.epoch_yr < m.late.epoch_yr))
    throw CLI::ValidationError("the early epoch must precede the late one");
  if (o.threads > 0) omp_set_num_threads(o.threads);

  TableOutput out(o.output, format_for(o.output, o.format), star_column_units());
  std::unique_ptr<TableOutput> truth;
  if (!o.truth.empty()) truth = std::make_unique<TableOutput>(o.truth, format_for(o.truth), truth_column_units());
  out.write(star_table_header());
  if (truth) truth->write(truth_header());
  const long chunk = 4096;
  std::vector<std::string> rows(chunk), trows(chunk);
  long companions = 0;
  for (long first = 0; first < m.n_stars; first += chunk) {
    const long n = std::min(chunk, m.n_stars - first);
#pragma omp parallel for schedule(dynamic, 64) reduction(+ : companions)
    for (long i = 0; i < n; ++i) {
      StarRecord s;
      SimTruth t;
      simulate_star(m, first + i, s, t);
      rows[i].clear();
      trows[i].clear();
      append_star_row(rows[i], s);
      append_truth_row(trows[i], t);
      companions += t.companion;
    }
    for (long i = 0; i < n; ++i) {
      out.write(rows[i]);
      if (truth) truth->write(trows[i]);
    }
  }
  if (!o.star_file.empty()) write_star_file(o);
  out.commit();
  if (truth) truth->commit();
  if (!o.quiet)
    message("simulate", std::to_string(m.n_stars) + " stars, " + std::to_string(companions) +
                            " with an injected companion (seed " + std::to_string(m.seed) + ")");
  return kOk;
}

}  // namespace

void setup_simulate(CLI::App& app, Runner& run) {
  auto o = std::make_shared<SimulateCliOptions>();
  SurveyModel& m = o->model;
  CLI::App* sub = app.add_subcommand(
      "simulate",
      "Write a synthetic two-epoch survey (canonical star table) with injected companions, and "
      "the truth table. Distributions: V | uniform:A,B | loguniform:A,B | beta:A,B.");
  sub->add_option("--stars", m.n_stars, "number of stars")->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--seed", m.seed, "random seed (one stream per (seed, star id))")->capture_default_str();
  sub->add_option("-o,--output", o->output, "star table (CSV, ECSV or FITS); default stdout");
  add_format_option(sub, o->format);
  sub->add_option("--truth", o->truth, "truth table (CSV): injected elements, noiseless anomalies");
  sub->add_option("--star-file", o->star_file,
                  "also write the follow-up star file (JSON, for heft fit) of --star-file-id");
  sub->add_option("--star-file-id", o->star_file_id, "id of a star with a companion");
  sub->add_option("--imaging-epochs", o->imaging_epochs, "epochs T1,T2,... of relative astrometry (yr)")
      ->delimiter(',');
  sub->add_option("--sep-error", o->sep_error_mas, "separation error of each epoch (mas)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--pa-error", o->pa_error_deg, "position-angle error of each epoch (deg)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--id-prefix", m.id_prefix, "star id prefix")->capture_default_str();
  sub->add_option("--host-mass", o->host_mass, "host mass distribution (Msun)")->capture_default_str();
  sub->add_option("--host-mass-error", m.host_mass_rel_error,
                  "relative error of the tabulated host mass")
      ->check(CLI::PositiveNumber)
      ->capture_default_str();
  sub->add_option("--distance", o->distance, "distance distribution (pc)")->capture_default_str();
  add_pair_option(sub, "--sky", m.sky_ra_deg, m.sky_dec_deg,
                  "centre RA,DEC of the sky region (deg)")
      ->default_str("0,0");
  sub->add_option("--sky-radius", m.sky_radius_deg, "radius of the sky region (deg; 180 = all sky)")
      ->check(CLI::Range(0.001, 180.0))
      ->capture_default_str();
  add_vec3_option(sub, "--velocity", o->velocity,
                  "mean space velocity towards east, north, receding (km/s)")
      ->default_str("0,0,0");
  sub->add_option("--velocity-sigma", m.v_sigma_km_s, "velocity dispersion per axis (km/s)")
      ->check(CLI::NonNegativeNumber)
      ->capture_default_str();
  sub->add_option("--rv-fraction", m.rv_fraction, "share of stars with a measured RV")
      ->check(CLI::Range(0.0, 1.0))
      ->capture_default_str();
  sub->add_option("--rv-error", m.rv_error_km_s, "RV measurement error (km/s)")
      ->check(CLI::PositiveNumber)
      ->capture_default_str();
  sub->add_option("--companion-fraction", m.companion_fraction, "share of stars with a companion")
      ->check(CLI::Range(0.0, 1.0))
      ->capture_default_str();
  sub->add_option("--companion-mass", o->companion_mass, "companion mass distribution (MJup)")
      ->capture_default_str();
  sub->add_option("--a", o->a_au, "semi-major axis distribution (AU)")->capture_default_str();
  sub->add_option("--ecc", o->ecc, "eccentricity distribution (clamped to [0, 0.99])")
      ->capture_default_str();
  sub->add_option("--age", m.age_myr, "age written to the age_myr column (Myr)");
  add_catalogue_options(sub, "early", m.early);
  add_catalogue_options(sub, "late", m.late);
  sub->add_option("--corr-scale", m.early.corr_scale,
                  "spread of the random correlations of both catalogues (0 = none)")
      ->check(CLI::NonNegativeNumber)
      ->capture_default_str()
      ->each([&m](const std::string&) { m.late.corr_scale = m.early.corr_scale; });
  sub->add_option("-j,--threads", o->threads, "threads (default: all cores); output is identical")
      ->check(CLI::NonNegativeNumber);
  sub->add_flag("-q,--quiet", o->quiet, "no informational messages");
  sub->footer(
      "Defaults (values from memory of two space-astrometry missions): early catalogue at "
      "1991.25, window 1989.85-1993.21, errors 0.5-1 mas; late at 2016.0, window 2014.57-2017.41, "
      "errors 0.02-0.05 mas. Orientations isotropic.");
  sub->callback([o, &run] { run = [o] { return run_simulate(*o); }; });
}

}  // namespace heft::cli
