// heft rank: a target list in, a ranked imaging plan out (screen, curves,
// sky prediction, score), multithreaded, shardable and resumable.

#include <omp.h>

#include <cerrno>
#include <chrono>
#include <cstring>
#include <cstdio>
#include <fstream>
#include <map>
#include <memory>

#include "cli/commands.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/rank.hpp"
#include "heft/version.hpp"

namespace heft::cli {
namespace {

struct RankCliOptions {
  std::string input, output = "-", json, shard = "1/1", contrast, mass_mag, ecc = "uniform:0,0.95";
  std::string late_spin_table;
  ScreenOptions screen;
  WindowDefaults windows;
  RankOptions rank;
  double a_min_au = 0.5, a_max_au = 500.0;
  int n_a = 24;
  long max_curves = 0;
  int threads = 0;
  bool resume = false, quiet = false;
};

void parse_shard(const std::string& text, long& k, long& n) {
  const auto slash = text.find('/');
  bool ok = slash != std::string::npos;
  if (ok) {
    double kd = 0, nd = 0;
    ok = parse_double(std::string_view(text).substr(0, slash), kd) &&
         parse_double(std::string_view(text).substr(slash + 1), nd) && kd == std::floor(kd) && nd == std::floor(nd) &&
         nd >= 1 && nd <= 1e6 && kd >= 1 && kd <= nd;
    if (ok) {
      k = static_cast<long>(kd);
      n = static_cast<long>(nd);
    }
  }
  if (!ok) throw CLI::ValidationError("--shard: expected K/N with 1 <= K <= N <= 1000000, got '" + text + "'");
}

// Metadata values are single words: spaces and '%' percent-encoded.
std::string word(const std::string& s) {
  std::string o;
  for (char c : s) o += c == ' ' ? "%20" : (c == '%' ? "%25" : std::string(1, c));
  return o.empty() ? "-" : o;
}

int run_rank(RankCliOptions o) {
  const ScreenOptions sopt = resolve_screen_options(o.screen, o.late_spin_table);
  RankOptions ropt = o.rank;
  CurveOptions& c = ropt.curve;
  c.ecc = Distribution::parse(o.ecc, "--ecc");
  if (!(c.m_min_mjup < c.m_max_mjup)) throw CLI::ValidationError("--m-min must be below --m-max");
  if (!(o.a_min_au < o.a_max_au)) throw CLI::ValidationError("--a-min must be below --a-max");
  if (!(ropt.iwa_mas < ropt.owa_mas)) throw CLI::ValidationError("--iwa must be below --owa");
  if (!(ropt.target_min_mjup < ropt.target_max_mjup)) throw CLI::ValidationError("--target-mass: MIN must be below MAX");
  if (o.contrast.empty() != o.mass_mag.empty())
    throw CLI::ValidationError("--contrast and --mass-mag go together (a detection probability needs both)");
  if (o.resume && resolve_output(o.output).kind != OutputTarget::Kind::kFile)
    throw CLI::ValidationError("--resume needs -o FILE, a regular file (the checkpoint lives beside it)");
  require_distinct_outputs({{"-o", o.output}, {"--json", o.json}});
  c.a_au = log_grid(o.a_min_au, o.a_max_au, o.n_a);
  long shard_k = 1, shard_n = 1;
  parse_shard(o.shard, shard_k, shard_n);
  if (o.threads > 0) omp_set_num_threads(o.threads);

  std::unique_ptr<ContrastCurve> contrast;
  std::unique_ptr<MassMagnitude> mass_mag;
  if (!o.contrast.empty()) {
    InputFile f(o.contrast);
    contrast = std::make_unique<ContrastCurve>(ContrastCurve::read(f.stream(), f.name()));
    InputFile g(o.mass_mag);
    mass_mag = std::make_unique<MassMagnitude>(MassMagnitude::read(g.stream(), g.name()));
    ropt.contrast = contrast.get();
    ropt.mass_mag = mass_mag.get();
  }

  const auto t_start = std::chrono::steady_clock::now();
  // Pass 1: read every row, keep this shard's, screen them.
  InputFile in(o.input);
  StarTableReader reader(in.stream(), in.name(), o.windows);
  std::vector<RankRecord> records;
  std::vector<StarRecord> candidates;
  std::vector<ScreenRow> cand_rows;
  {
    StarRecord star;
    std::string bad;
    long row = 0;
    while (reader.next(star, bad)) {
      if (row++ % shard_n != shard_k - 1) continue;
      const ScreenRow sr = screen_star(star, bad, sopt);
      if (sr.ok() && sr.result.sig_joint >= c.detect_sigma) {
        candidates.push_back(star);
        cand_rows.push_back(sr);
      } else {
        RankRecord r = screened_record(sr);
        if (sr.ok()) add_note(r.notes, "below_detect_sigma");
        records.push_back(r);
      }
    }
  }
  const long total_rows = reader.rows();
  const double screen_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t_start).count();
  // The most significant first, so that --max-curves keeps the best.
  std::vector<std::size_t> order(candidates.size());
  for (std::size_t k = 0; k < order.size(); ++k) order[k] = k;
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
    const double sa = cand_rows[a].result.sig_joint, sb = cand_rows[b].result.sig_joint;
    return sa != sb ? sa > sb : candidates[a].id < candidates[b].id;
  });
  std::vector<std::size_t> todo;
  for (std::size_t k = 0; k < order.size(); ++k) {
    if (o.max_curves > 0 && static_cast<long>(k) >= o.max_curves) {
      RankRecord r = screened_record(cand_rows[order[k]]);
      r.score = kAbsent;
      add_note(r.notes, "curve_skipped:max_curves");
      records.push_back(r);
    } else {
      todo.push_back(order[k]);
    }
  }

  RankRunInfo info;
  auto& f = info.fields;
  f["heft_version"] = kVersion;
  f["input"] = word(in.name());
  f["rows"] = std::to_string(total_rows);
  f["date_yr"] = format_double(ropt.date_yr);
  f["iwa_mas"] = format_double(ropt.iwa_mas);
  f["owa_mas"] = std::isfinite(ropt.owa_mas) ? format_double(ropt.owa_mas) : "none";
  f["target_mass_mjup"] = format_double(ropt.target_min_mjup) + "," + format_double(ropt.target_max_mjup);
  f["detect_sigma"] = format_double(c.detect_sigma);
  f["draws"] = std::to_string(c.draws);
  f["a_grid_au"] = format_double(o.a_min_au) + "," + format_double(o.a_max_au) + "," + std::to_string(o.n_a);
  f["mass_prior_mjup"] = format_double(c.m_min_mjup) + "," + format_double(c.m_max_mjup);
  f["ecc_prior"] = word(c.ecc.str());
  f["seed"] = std::to_string(c.seed);
  f["max_curves"] = std::to_string(o.max_curves);
  f["host_mass_default_msun"] =
      (present(ropt.host_mass_msun) ? format_double(ropt.host_mass_msun) : "none") + "," +
      (present(ropt.host_mass_error_msun) ? format_double(ropt.host_mass_error_msun) : "none");
  f["contrast"] = word(o.contrast.empty() ? "none" : o.contrast);
  f["mass_mag"] = word(o.mass_mag.empty() ? "none" : o.mass_mag);
  f["screen_options"] = screen_fingerprint(sopt, o.windows);
  f["shard"] = std::to_string(shard_k) + "/" + std::to_string(shard_n);

  // Resume: completed stars from the checkpoint of a run with the same
  // metadata. Only a regular-file output has one, beside its (resolved) path.
  const OutputTarget target = resolve_output(o.output);
  const std::string checkpoint = target.kind == OutputTarget::Kind::kFile ? target.path + ".checkpoint" : "";
  std::map<std::string, RankRecord> done;
  if (o.resume) {
    std::ifstream cp(checkpoint, std::ios::binary);
    if (cp) {
      Checkpoint old = read_checkpoint(cp, checkpoint);
      if (old.info.fields != info.fields)
        throw InputError(checkpoint, 1, 0, "checkpoint of a run with other options or input; delete it or drop --resume");
      for (auto& r : old.records) done.emplace(r.id, std::move(r));
      if (old.dropped > 0 && !o.quiet)
        message("rank", checkpoint + ": " + std::to_string(old.dropped) +
                            " damaged or torn line(s) dropped; those stars are computed again");
    } else if (!o.quiet) {
      message("rank", "no checkpoint " + checkpoint + ": starting afresh");
    }
  }
  std::FILE* cp_out = nullptr;
  if (!checkpoint.empty()) {
    std::string text = checkpoint_head(info);
    for (const auto& [id, r] : done) text += checkpoint_line(r);
    write_file_atomic(checkpoint, text);  // rewritten whole: dropped lines are gone
    cp_out = std::fopen(checkpoint.c_str(), "ab");
    if (!cp_out) throw InputError(checkpoint, 0, 0, std::string("cannot append to checkpoint: ") + std::strerror(errno));
  }
  bool cp_failed = false;
  int cp_errno = 0;

  // Pass 2: curves, sky positions and scores, in parallel.
  std::vector<RankRecord> computed(todo.size());
  std::vector<char> have(todo.size(), 0);
  for (std::size_t k = 0; k < todo.size(); ++k) {
    const auto it = done.find(candidates[todo[k]].id);
    if (it != done.end()) {
      computed[k] = it->second;
      have[k] = 1;
    }
  }
  ProgressBar bar("rank", static_cast<long>(todo.size()), o.quiet);
  long finished = static_cast<long>(done.size());
#pragma omp parallel for schedule(dynamic, 1)
  for (std::size_t k = 0; k < todo.size(); ++k) {
    if (have[k]) continue;
    bool stop = false;
#pragma omp atomic read
    stop = cp_failed;
    if (stop) continue;  // the run will fail: compute nothing more
    computed[k] = rank_star(candidates[todo[k]], "", sopt, ropt);
    long now = 0;
#pragma omp critical(heft_checkpoint)
    {
      if (cp_out && !cp_failed) {
        const std::string line = checkpoint_line(computed[k]);
        if (std::fwrite(line.data(), 1, line.size(), cp_out) != line.size() || std::fflush(cp_out) != 0) {
          cp_errno = errno;
#pragma omp atomic write
          cp_failed = true;
        }
      }
      now = ++finished;
    }
    bar.update(now);
  }
  bar.finish();
  double curve_s = 0.0, predict_s = 0.0;
  for (std::size_t k = 0; k < todo.size(); ++k)
    if (!have[k]) {
      curve_s += computed[k].curve_s;
      predict_s += computed[k].predict_s;
    }
  const double stage2_s =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - t_start).count() - screen_s;
  if (cp_out && std::fclose(cp_out) != 0 && !cp_failed) {
    cp_errno = errno;
    cp_failed = true;
  }
  if (cp_failed) throw InputError(checkpoint, 0, 0, std::string("writing the checkpoint failed: ") + std::strerror(cp_errno));
  for (auto& r : computed) records.push_back(std::move(r));
  assign_ranks(records);

  if (!o.json.empty()) write_file_atomic(o.json, ranked_json(info, records));
  write_file_atomic(o.output, ranked_table(info, records));
  if (!checkpoint.empty()) std::remove(checkpoint.c_str());
  StatusCounter counter;
  for (const auto& r : records) counter.add(r.status);
  counter.print_summary("rank");
  if (!o.quiet) {
    message("rank", std::to_string(records.size()) + " stars (shard " + f["shard"] + "), " +
                        std::to_string(todo.size()) + " with curves");
    char b[200];
    std::snprintf(b, sizeof b,
                  "time: read + screen %.2f s; curves + predict %.2f s wall (thread sums: curves %.2f s, predict %.3f s)",
                  screen_s, stage2_s, curve_s, predict_s);
    message("rank", b);
  }
  return counter.exit_code();
}

}  // namespace

void setup_rank(CLI::App& app, Runner& run) {
  auto o = std::make_shared<RankCliOptions>();
  RankOptions& r = o->rank;
  CurveOptions& c = r.curve;
  c.draws = 256;
  CLI::App* sub = app.add_subcommand(
      "rank",
      "Rank imaging candidates: screen every star, compute curves above --detect-sigma, predict the "
      "companion's sky position at --date and score the chance that it lies between the working "
      "angles with a mass in the target window.");
  sub->add_option("stars", o->input, "canonical star table (CSV; '-' = stdin)")->required();
  sub->add_option("--date", r.date_yr, "planned imaging date (decimal Julian year, 1900-2200; not MJD)")
      ->check(CLI::Range(1900.0, 2200.0))
      ->required();
  sub->add_option("-o,--output", o->output, "ranked table (CSV); default stdout");
  sub->add_option("--json", o->json, "also write the ranked table as JSON");
  sub->add_option("--iwa", r.iwa_mas, "inner working angle (mas)")->check(CLI::NonNegativeNumber)->capture_default_str();
  sub->add_option("--owa", r.owa_mas, "outer working angle (mas; default none)")->check(CLI::PositiveNumber);
  add_pair_option(sub, "--target-mass", r.target_min_mjup, r.target_max_mjup,
                  "scoring window MIN,MAX of companion mass (MJup); not the prior")
      ->default_str("1,80");
  sub->add_option("--contrast", o->contrast,
                  "instrument contrast limit (CSV: sep_mas, delta_mag) for a detection probability");
  sub->add_option("--mass-mag", o->mass_mag,
                  "companion mass-magnitude relation in the same band (CSV: mass_mjup, abs_mag)");
  sub->add_option("--detect-sigma", c.detect_sigma, "curves for stars with sig_joint at or above this")
      ->capture_default_str();
  sub->add_option("--max-curves", o->max_curves, "curves for at most the N most significant stars (0 = all)")
      ->check(CLI::NonNegativeNumber)->capture_default_str();
  sub->add_option("--host-mass", r.host_mass_msun, "host mass for stars without 'mass' (Msun)")->check(CLI::PositiveNumber);
  sub->add_option("--host-mass-error", r.host_mass_error_msun, "its error (Msun)")->check(CLI::NonNegativeNumber);
  sub->add_option("--a-min", o->a_min_au, "smallest trial semi-major axis (AU)")->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--a-max", o->a_max_au, "largest trial semi-major axis (AU)")->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--n-a", o->n_a, "points of the log grid in a (refined where needed)")
      ->check(CLI::Range(2, 100000))->capture_default_str();
  sub->add_option("--draws", c.draws, "orbit draws per separation")->check(CLI::Range(16, 10000000))->capture_default_str();
  sub->add_option("--ecc", o->ecc, "eccentricity prior: V | uniform:A,B | beta:A,B")->capture_default_str();
  sub->add_option("--m-min", c.m_min_mjup, "lower bound of the log-uniform mass prior (MJup)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--m-max", c.m_max_mjup, "upper bound of the mass prior (MJup)")->check(CLI::PositiveNumber)->capture_default_str();
  sub->add_option("--seed", c.seed, "random seed (one stream per star id)")->capture_default_str();
  sub->add_option("--shard", o->shard, "process slice K of N (rows K, K+N, K+2N, ...; 1-based); join with heft merge")
      ->capture_default_str();
  sub->add_flag("--resume", o->resume, "continue a killed run from OUTPUT.checkpoint");
  add_screen_options(sub, o->screen, o->windows, o->late_spin_table);
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
