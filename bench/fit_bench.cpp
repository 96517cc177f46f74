// fit_bench: the deep fit's cost and the sampler's calibration.
//  1. A three-epoch deep fit of the demo follow-up star on one core:
//     optimiser (64 starts) and 10^5 ensemble steps of 64 walkers.
//  2. Coverage: on injected systems drawn from the fit's own prior, each
//     with three epochs of relative astrometry, how often the sampler's
//     68 % (and 95 %) intervals of mass, a and e contain the truth.
//
// Usage: fit_bench [systems=50] [steps=20000]

#include <glog/logging.h>
#include <omp.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>

#include "heft/fit.hpp"
#include "heft/simulate.hpp"
#include "heft/stats.hpp"

using namespace heft;

namespace {

double seconds_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

double quantile(std::vector<std::pair<double, double>> v, double p) {
  std::sort(v.begin(), v.end());
  return weighted_quantile(v, 1.0, p);
}

}  // namespace

int main(int argc, char** argv) {
  FLAGS_minloglevel = google::GLOG_FATAL;  // Ceres' covariance notes; flags report them
  const int n_sys = argc > 1 ? std::atoi(argv[1]) : 50;
  const int steps = argc > 2 ? std::atoi(argv[2]) : 20000;

  {
    std::ifstream in(std::string(HEFT_SOURCE_DIR) + "/demo/followup/KMG-00754.json");
    const StarFile f = read_star_file(in, "KMG-00754.json");
    const ScreenRow row = screen_star(f.star, "", ScreenOptions{});
    FitOptions o;
    o.sampler.steps = 100000;
    o.sampler.burn = 5000;
    o.sampler.thin = 100;
    omp_set_num_threads(1);
    const auto t0 = std::chrono::steady_clock::now();
    FitOptions opt_only = o;
    opt_only.sample = false;
    const FitModel m(f, row.result, o);
    run_fit(m, opt_only, f.star.id);
    const double t_opt = seconds_since(t0);
    const FitResult r = run_fit(m, o, f.star.id);
    const double t_all = seconds_since(t0) - t_opt;
    std::printf("deep fit, 3 epochs, one core: optimiser (%d starts) %.2f s; optimiser + %d x %d walker steps %.1f s "
                "(acceptance %.2f, max tau %.0f steps)\n",
                o.starts, t_opt, o.sampler.steps + o.sampler.burn, o.walkers, t_all, r.chain.acceptance,
                *std::max_element(r.chain.iat_steps.begin(), r.chain.iat_steps.end()));
  }

  omp_set_num_threads(omp_get_num_procs());
  SurveyModel sm;
  sm.seed = 4242;
  sm.companion_fraction = 1.0;
  sm.companion_mass_mjup = {Distribution::Kind::kLogUniform, 5.0, 100.0};
  sm.a_au = {Distribution::Kind::kLogUniform, 3.0, 30.0};
  sm.ecc = {Distribution::Kind::kUniform, 0.0, 0.95};
  sm.distance_pc = {Distribution::Kind::kUniform, 20.0, 60.0};
  sm.host_mass_rel_error = 0.05;
  FitOptions o;
  o.prior.m_min_mjup = 5.0;
  o.prior.m_max_mjup = 100.0;
  o.a_min_au = 3.0;
  o.a_max_au = 30.0;
  o.sampler.steps = steps;
  int used = 0, in68[3] = {}, in95[3] = {};
  const auto t0 = std::chrono::steady_clock::now();
  for (long i = 0; used < n_sys; ++i) {
    StarFile f;
    SimTruth t;
    simulate_star(sm, i, f.star, t);
    const ScreenRow row = screen_star(f.star, "", ScreenOptions{});
    if (!row.ok()) continue;
    f.host_mass = {HostMassPrior::Kind::kNormal, f.star.mass_msun, f.star.mass_error_msun};
    Rng rng = Rng::for_star(77, f.star.id);
    for (double ep : {2025.0, 2026.0, 2027.0})
      f.relative.push_back(observe_companion(t, f.star.late.epoch_yr, ep, 2.0, 0.3, rng));
    const FitModel m(f, row.result, o);
    const FitResult r = run_fit(m, o, f.star.id);
    std::vector<std::pair<double, double>> v[3];
    for (Eigen::Index k = 0; k < r.chain.samples.rows(); ++k) {
      const Eigen::VectorXd p = r.chain.samples.row(k).transpose();
      const OrbitDraw d = m.orbit(p.data());
      const double w = r.sample_weight[k];
      v[0].emplace_back(d.mass_mjup, w);
      v[1].emplace_back(d.a_au, w);
      v[2].emplace_back(d.ecc, w);
    }
    const double truth[3] = {t.mass_mjup, t.a_au, t.ecc};
    for (int k = 0; k < 3; ++k) {
      in68[k] += truth[k] >= quantile(v[k], 0.16) && truth[k] <= quantile(v[k], 0.84);
      in95[k] += truth[k] >= quantile(v[k], 0.025) && truth[k] <= quantile(v[k], 0.975);
    }
    ++used;
  }
  const char* names[3] = {"mass", "a", "e"};
  std::printf("sampler coverage on %d systems (3 epochs, %d steps, %.0f s):", used, steps, seconds_since(t0));
  for (int k = 0; k < 3; ++k)
    std::printf(" %s 68 %% %.0f %%, 95 %% %.0f %%;", names[k], 100.0 * in68[k] / used, 100.0 * in95[k] / used);
  std::printf("\n");
  return 0;
}
