// curve_bench: CPU time of one star's Monte Carlo curve at the `heft curve`
// defaults (0.5-500 AU, 64 separations refined where needed, 4096 draws x 8
// z samples) on one core, for simulated stars of sig_joint near 3, 10, 50
// and 270, with the work per curve (draws weighed, window-model
// evaluations, Kepler solves, minor page faults). Run it with
// OMP_NUM_THREADS=1 for one core.
// The reference engine (the one before the fast engine) is the `heft curve`
// of an older build: give its binary with --reference BIN and the table of
// the bench's stars is written and timed through both binaries.
//
// Usage: curve_bench [--draws N] [--sigma S] [--z-samples Z] [--reference HEFT_BINARY] [--quantile-errors]
//                    [--per-separation] [--repeat N]
// (--per-separation: after each star, its separations with the draws and
// rounds each took, the effective sizes reached and the posterior weight,
// and the draws and weight of the separations added by the refinement,
// holding little weight, needing adaptive rounds or ending with few
// effective samples, so that one sees where a curve's draws go.)
// (--quantile-errors: also the mass quantiles' Monte Carlo errors, as `heft curve
// --json`.)
// (--draws: the draws per separation, 4096 by default as in `heft curve`;
// `heft rank` uses 512. --sigma: time only the star nearest to S of the four.
// --z-samples: z samples per draw, 8 by default as in `heft curve`, which
// has no option for it. --repeat: compute each curve N times and print the
// mean, so that a profiler sees the curves rather than the survey the bench
// simulates to pick its stars.)

#include <sys/resource.h>
#include <sys/wait.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <string>
#include <vector>

#include "heft/calibration.hpp"
#include "heft/catalog.hpp"
#include "heft/curve.hpp"
#include "heft/screen.hpp"

using namespace heft;

namespace {
double cpu_seconds(int who) {
  rusage ru{};
  getrusage(who, &ru);
  return ru.ru_utime.tv_sec + 1e-6 * ru.ru_utime.tv_usec + ru.ru_stime.tv_sec + 1e-6 * ru.ru_stime.tv_usec;
}

// Minor page faults of this process so far.
long minor_faults() {
  rusage ru{};
  getrusage(RUSAGE_SELF, &ru);
  return ru.ru_minflt;
}

// CPU seconds of a child command (its user + system time).
double child_seconds(const std::string& cmd) {
  const double before = cpu_seconds(RUSAGE_CHILDREN);
  const int rc = std::system(cmd.c_str());
  if (rc != 0) std::fprintf(stderr, "command failed (%d): %s\n", rc, cmd.c_str());
  return cpu_seconds(RUSAGE_CHILDREN) - before;
}
}  // namespace

int main(int argc, char** argv) {
  std::string reference;
  CurveOptions opt;
  opt.quantile_errors = false;  // as `heft curve` without --json
  double only_sigma = 0.0;
  int repeat = 1;
  bool per_separation = false;
  for (int i = 1; i < argc; ++i) {
    if (std::strcmp(argv[i], "--quantile-errors") == 0) opt.quantile_errors = true;
    if (std::strcmp(argv[i], "--per-separation") == 0) per_separation = true;
  }
  for (int i = 1; i + 1 < argc; ++i) {
    if (std::strcmp(argv[i], "--reference") == 0) reference = argv[i + 1];
    if (std::strcmp(argv[i], "--draws") == 0) opt.draws = std::atoi(argv[i + 1]);
    if (std::strcmp(argv[i], "--sigma") == 0) only_sigma = std::atof(argv[i + 1]);
    if (std::strcmp(argv[i], "--z-samples") == 0) opt.z_samples = std::atoi(argv[i + 1]);
    if (std::strcmp(argv[i], "--repeat") == 0) repeat = std::atoi(argv[i + 1]);
  }
  if (repeat < 1) {
    std::fprintf(stderr, "curve_bench: --repeat must be at least 1\n");
    return 2;
  }
  if (opt.draws < 64) {
    std::fprintf(stderr, "curve_bench: --draws must be at least 64\n");
    return 2;
  }
  if (opt.z_samples < 1) {
    std::fprintf(stderr, "curve_bench: --z-samples must be at least 1\n");
    return 2;
  }
  opt.a_au = log_grid(0.5, 500.0, 64);
  const SurveyModel model = coverage_survey(opt, 1.0, 50.0, 2026);
  const double targets[4] = {3, 10, 50, 270};
  std::vector<StarRecord> picked(4);
  std::vector<double> best(4, 1e300), sig(4, 0);
  std::vector<AnomalyData> data(4);
  for (long i = 0; i < 20000; ++i) {
    StarRecord s;
    SimTruth t;
    simulate_star(model, i, s, t);
    const ScreenRow row = screen_star(s, validate_star(s), ScreenOptions{});
    if (!row.ok()) continue;
    for (int k = 0; k < 4; ++k) {
      const double dist = std::abs(std::log(row.result.sig_joint / targets[k]));
      if (dist < best[k]) {
        best[k] = dist;
        picked[k] = s;
        sig[k] = row.result.sig_joint;
        bool ok = false;
        data[k] = anomaly_data(s, row.result, kAbsent, kAbsent, ok);
      }
    }
  }
  std::printf("one curve at the heft curve defaults (64 separations 0.5-500 AU, %d draws x %d z samples)\n",
              opt.draws, opt.z_samples);
  std::printf("%10s %8s %6s %10s %12s %12s %10s %8s %12s %8s\n", "star", "sig", "points", "CPU s",
              "draws", "window evals", "evals/draw", "faults", "reference s", "ratio");
  for (int k = 0; k < 4; ++k) {
    if (only_sigma > 0 && std::abs(std::log(only_sigma / targets[k])) > 0.1) continue;
    const long f0 = minor_faults();
    const double t0 = cpu_seconds(RUSAGE_SELF);
    Curve c = montecarlo_curve(data[k], opt, picked[k].id);
    for (int r = 1; r < repeat; ++r) c = montecarlo_curve(data[k], opt, picked[k].id);
    const double secs = (cpu_seconds(RUSAGE_SELF) - t0) / repeat;
    const long faults = (minor_faults() - f0) / repeat;
    double ref_s = NAN;
    if (!reference.empty()) {
      const std::string table = "/tmp/curve_bench_star.csv";
      std::string text = star_table_header();
      append_star_row(text, picked[k]);
      std::ofstream(table) << text;
      ref_s = child_seconds(reference + " curve -q " + table + " --id " + picked[k].id + " --draws " +
                            std::to_string(opt.draws) + " -o /tmp/curve_bench_ref.csv");
    }
    // Without --reference the reference columns are "-".
    char ref_cols[32] = "           -        -";
    if (!reference.empty()) std::snprintf(ref_cols, sizeof ref_cols, "%12.3f %8.1f", ref_s, ref_s / secs);
    std::printf("%10s %8.1f %6zu %10.3f %12ld %12ld %10.2f %8ld %s\n", picked[k].id.c_str(), sig[k],
                c.points.size(), secs, c.draws_weighed, c.window_evaluations,
                static_cast<double>(c.window_evaluations) / c.draws_weighed, faults, ref_cols);
    if (per_separation) {
      std::printf("%12s %8s %6s %8s %10s %10s\n", "a_au", "draws", "rounds", "ess", "ess_orbits", "weight");
      for (const CurvePoint& p : c.points)  // in a, refinements in place
        std::printf("%12.4g %8ld %6d %8.0f %10.0f %10.2e\n", p.a_au, p.draws, p.rounds, p.ess, p.ess_orbits,
                    p.weight);
      // Where the draws go: the separations of each kind, their draws and
      // their share of the posterior (docs/performance.md, "Stop 47").
      auto share = [&](const char* what, auto in) {
        long n = 0, draws = 0;
        double weight = 0.0;
        for (const CurvePoint& p : c.points)
          if (in(p)) {
            ++n;
            draws += p.draws;
            weight += p.weight;
          }
        std::printf("  %-44s %4ld points %9ld draws (%4.1f %%), posterior weight %.2e\n", what, n, draws,
                    100.0 * static_cast<double>(draws) / static_cast<double>(c.draws_weighed), weight);
      };
      share("added by the refinement", [&](const CurvePoint& p) {
        return std::find(opt.a_au.begin(), opt.a_au.end(), p.a_au) == opt.a_au.end();
      });
      share("holding < 1e-3 of the posterior", [](const CurvePoint& p) { return p.weight < 1e-3; });
      share("with adaptive rounds", [](const CurvePoint& p) { return p.rounds > 1; });
      // heft curve flags a band from fewer than 100 effective samples
      share("ending below 100 effective samples", [](const CurvePoint& p) { return p.ess < 100.0; });
      share("where one sample holds the weight", [](const CurvePoint& p) { return p.ess < 1.5; });
    }
  }
  std::printf("Kepler solves per curve: 4 per window evaluation (two catalogue windows, two ends each)\n");
  return 0;
}
