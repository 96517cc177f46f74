// curve_agreement: how far curves at few draws (heft rank's 512) stray from
// the same curves at the `heft curve` default of 4,096 draws, on simulated
// stars of the coverage survey (seed 777) selected on sig_joint. Only the
// separations of the default grid are compared (refinement inserts points
// that differ between the two).
//
// Printed per run: the CPU time per curve at few draws, the separations with
// at least 100 effective samples (the ones a figure shows as sound), the
// share of the reference's posterior weight where the few-draw median lies
// inside the reference 95 % band, and the "confident misses": separations
// with at least 100 effective samples in both curves where the few-draw
// median lies outside the reference 95 % band (a sampler that missed a mode
// without its effective sample size showing it). With --list each miss is
// printed.
//
// Usage: curve_agreement STARS MIN_SIG DRAWS [SEED=1] [--list]

#include <sys/resource.h>

#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <map>

#include "heft/calibration.hpp"
#include "heft/catalog.hpp"
#include "heft/curve.hpp"
#include "heft/screen.hpp"

using namespace heft;

namespace {
double cpu_seconds() {
  rusage ru{};
  getrusage(RUSAGE_SELF, &ru);
  return ru.ru_utime.tv_sec + 1e-6 * ru.ru_utime.tv_usec;
}
}  // namespace

int main(int argc, char** argv) {
  const bool list = argc > 1 && std::strcmp(argv[argc - 1], "--list") == 0;
  if (list) --argc;
  if (argc < 4) {
    std::fprintf(stderr, "usage: curve_agreement STARS MIN_SIG DRAWS [SEED=1] [--list]\n");
    return 2;
  }
  const int n_stars = std::atoi(argv[1]);
  const double min_sig = std::atof(argv[2]);
  CurveOptions ref;
  ref.a_au = log_grid(0.5, 500.0, kDefaultSeparations);
  if (argc > 4) ref.seed = static_cast<std::uint64_t>(std::atoll(argv[4]));
  CurveOptions few = ref;
  few.draws = std::atoi(argv[3]);
  const SurveyModel model = coverage_survey(ref, 1.0, 50.0, 777);
  int done = 0, compared = 0, sound = 0, misses = 0, stars_missed = 0;
  double cpu = 0.0, weight = 0.0, weight_inside = 0.0, weight_missed = 0.0;
  for (long i = 0; i < 200000 && done < n_stars; ++i) {
    StarRecord s;
    SimTruth t;
    simulate_star(model, i, s, t);
    const ScreenRow row = screen_star(s, validate_star(s), ScreenOptions{});
    if (!row.ok() || row.result.sig_joint < min_sig) continue;
    bool ok = false;
    const AnomalyData d = anomaly_data(s, row.result, kAbsent, kAbsent, ok);
    if (!ok) continue;
    const Curve c_ref = montecarlo_curve(d, ref, s.id);
    const double t0 = cpu_seconds();
    const Curve c = montecarlo_curve(d, few, s.id);
    cpu += cpu_seconds() - t0;
    ++done;
    std::map<double, const CurvePoint*> at;
    for (const auto& p : c_ref.points) at[p.a_au] = &p;
    int missed_here = 0;
    for (const auto& p : c.points) {
      const auto it = at.find(p.a_au);
      if (it == at.end() || !present(p.mass_med) || !present(it->second->mass_lo95)) continue;
      const CurvePoint& r = *it->second;
      ++compared;
      const bool inside = p.mass_med >= r.mass_lo95 && p.mass_med <= r.mass_hi95;
      weight += r.weight;
      if (inside) weight_inside += r.weight;
      if (p.ess >= kLowEss) ++sound;
      if (!inside && p.ess >= kLowEss && r.ess >= kLowEss) {
        ++missed_here;
        weight_missed += r.weight;
        if (list)
          std::printf("  %s a %.1f AU: median %.3g MJup (ESS %.0f), reference 95 %% band %.3g-%.3g (ESS %.0f)\n",
                      s.id.c_str(), p.a_au, p.mass_med, p.ess, r.mass_lo95, r.mass_hi95, r.ess);
      }
    }
    misses += missed_here;
    if (missed_here > 0) ++stars_missed;
  }
  std::printf("%d stars with sig_joint >= %g, %d draws against %d (seed %llu): %.3f CPU s per curve\n", done,
              min_sig, few.draws, ref.draws, static_cast<unsigned long long>(ref.seed), done ? cpu / done : 0.0);
  std::printf("  separations compared %d, with >= %.0f effective samples %d\n", compared, kLowEss, sound);
  std::printf("  reference weight where the median is inside the reference 95 %% band: %.2f %%\n",
              weight > 0 ? 100.0 * weight_inside / weight : 0.0);
  std::printf("  confident misses: %d separations on %d stars, reference weight %.2g per star\n", misses,
              stars_missed, done ? weight_missed / done : 0.0);
}
