// fit_bench: the deep fit's cost and the sampler's calibration.
//  1. The default deep fit of the demo follow-up star (three epochs) on one
//     core: optimiser, and optimiser plus sampler.
//  2. Coverage: on injected systems drawn from the fit's own prior, each
//     with three epochs of relative astrometry over 2 yr and over 8 yr, how
//     often the sampler's 68 % (and 95 %) intervals of mass, a, e and host
//     mass contain the truth, per regime (arc, S/N, period over arc), next
//     to how often the host-mass prior alone holds it (the sample's luck);
//     and how
//     often the optimiser's best minimum is within 1 of -2 ln L at the
//     truth (or better).
//  3. (`fit_bench demo N`) One system, many noise realisations: the demo
//     follow-up star's truth and catalogue covariances with N fresh draws of
//     the catalogue, host-mass and imaging noise, each fitted at the
//     defaults; where the truth falls in each posterior (docs/performance.md,
//     "The demo star").
//
// Usage: fit_bench [systems per arc=50] [steps=20000] [survey seed=4242]
//                  [tempered levels=1] [t_max=50]
//        fit_bench demo [realisations=40]

#include <glog/logging.h>
#include <omp.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <functional>
#include <string>

#include "heft/fit.hpp"
#include "heft/kepler.hpp"
#include "heft/simulate.hpp"

using namespace heft;

namespace {

double seconds_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

StarFile demo_star_file() {
  std::ifstream in(std::string(HEFT_SOURCE_DIR) + "/demo/followup/KMG-00754.json");
  return read_star_file(in, "KMG-00754.json");
}

// The survey of demo/make_survey.sh (keep the two in step).
SurveyModel demo_survey() {
  SurveyModel m;
  m.n_stars = 2000;
  m.seed = 20261201;
  m.id_prefix = "KMG-";
  m.sky_ra_deg = 210.0;
  m.sky_dec_deg = -38.0;
  m.sky_radius_deg = 8.0;
  m.distance_pc = {Distribution::Kind::kUniform, 100.0, 140.0};
  m.v_east_km_s = -10.0;
  m.v_north_km_s = -18.0;
  m.v_radial_km_s = 5.0;
  m.v_sigma_km_s = 1.5;
  m.host_mass_msun = {Distribution::Kind::kLogUniform, 0.3, 2.0};
  m.rv_fraction = 0.4;
  m.age_myr = 25.0;
  m.companion_fraction = 0.02;
  m.companion_mass_mjup = {Distribution::Kind::kLogUniform, 1.0, 80.0};
  m.a_au = {Distribution::Kind::kLogUniform, 2.0, 200.0};
  m.ecc = {Distribution::Kind::kUniform, 0.0, 0.6};
  return m;
}

// The demo star's truth under `n` noise realisations (streams 1000 + k for
// the catalogues and host mass, 2000 + k for the imaging), fitted at the
// defaults with the demo's imaging epochs and errors.
void demo_truth_study(int n) {
  const StarFile demo = demo_star_file();
  std::vector<double> epochs;
  for (const RelativeEpoch& e : demo.relative) epochs.push_back(e.epoch_yr);
  const SurveyModel sm = demo_survey();
  constexpr long kIndex = 753;  // KMG-00754
  int in95_both = 0, in95[2] = {}, in68[2] = {};
  double mean_q[2] = {};
  std::printf("demo star, same truth, %d noise realisations (%zu imaging epochs %.2f-%.2f):\n", n, epochs.size(),
              epochs.front(), epochs.back());
  for (int k = 0; k < n; ++k) {
    StarRecord star;
    SimTruth t;
    simulate_star(sm, kIndex, star, t, 1000 + k);
    const ScreenRow row = screen_star(star, "", ScreenOptions{});
    Rng noise = Rng::for_star(2000 + k, star.id);
    const StarFile f = follow_up_star_file(star, t, epochs, demo.relative.front().e1, demo.relative.front().e2, noise);
    const FitOptions o;
    const FitModel m(f, row.result, o);
    const std::vector<OrbitDraw> d = posterior_draws(m, run_fit(m, o, f.star.id));
    double q[2] = {}, sw = 0.0;
    for (const OrbitDraw& x : d) {
      sw += x.weight;
      q[0] += x.weight * (x.mass_mjup < t.mass_mjup);
      q[1] += x.weight * (x.a_au < t.a_au);
    }
    bool both = true;
    for (int j = 0; j < 2; ++j) {
      q[j] /= sw;
      mean_q[j] += q[j] / n;
      const bool inside = q[j] >= 0.025 && q[j] <= 0.975;
      in95[j] += inside;
      in68[j] += q[j] >= 0.16 && q[j] <= 0.84;
      both = both && inside;
    }
    in95_both += both;
    std::printf("  %2d: sig_joint %.1f, truth (%.1f MJup, %.2f AU) at quantile %.3f of mass, %.3f of a\n", k,
                row.result.sig_joint, t.mass_mjup, t.a_au, q[0], q[1]);
    std::fflush(stdout);
  }
  std::printf("inside the 95 %% interval: mass %d, a %d, both %d of %d; inside the 68 %%: mass %d, a %d; "
              "mean quantile: mass %.2f, a %.2f\n",
              in95[0], in95[1], in95_both, n, in68[0], in68[1], mean_q[0], mean_q[1]);
}

}  // namespace

int main(int argc, char** argv) {
  FLAGS_minloglevel = google::GLOG_FATAL;  // Ceres' covariance notes; flags report them
  if (argc > 1 && std::string(argv[1]) == "demo") {
    demo_truth_study(argc > 2 ? std::atoi(argv[2]) : 40);
    return 0;
  }
  const int n_sys = argc > 1 ? std::atoi(argv[1]) : 50;
  const int steps = argc > 2 ? std::atoi(argv[2]) : 20000;
  const std::uint64_t survey_seed = argc > 3 ? std::strtoull(argv[3], nullptr, 10) : 4242;

  {
    const StarFile f = demo_star_file();
    const ScreenRow row = screen_star(f.star, "", ScreenOptions{});
    FitOptions o;  // the defaults of heft fit
    omp_set_num_threads(1);
    const auto t0 = std::chrono::steady_clock::now();
    FitOptions opt_only = o;
    opt_only.sample = false;
    const FitModel m(f, row.result, o);
    run_fit(m, opt_only, f.star.id);
    const double t_opt = seconds_since(t0);
    const FitResult r = run_fit(m, o, f.star.id);
    const double t_all = seconds_since(t0) - t_opt;
    std::printf("deep fit, 3 epochs, one core: optimiser (%d starts) %.2f s; optimiser + %d steps x %d walkers "
                "(%d chains) %.1f s (acceptance %.2f, max tau %.0f steps)\n",
                o.starts, t_opt, o.sampler.steps + o.sampler.burn, r.chain.walkers, r.chain.chains, t_all,
                r.chain.acceptance, *std::max_element(r.chain.iat_steps.begin(), r.chain.iat_steps.end()));
  }

  omp_set_num_threads(omp_get_num_procs());
  const SurveyModel sm = fit_coverage_survey(survey_seed);
  FitOptions o = fit_coverage_options(sm);
  o.sampler.steps = steps;
  o.sampler.burn = std::min(o.sampler.burn, steps / 2);
  if (argc > 4) o.sampler.temperatures = std::atoi(argv[4]);
  if (argc > 5) o.sampler.t_max = std::atof(argv[5]);
  // Per system: inside the 68 % and 95 % intervals (mass, a, e), the regime
  // and whether the optimiser's best is within 1 of -2 ln L at the truth
  // (the orbit pinned there, the nuisances optimised).
  // Also the host mass, and, as a control of the sample itself, whether the
  // true host mass lies within 1 and 1.96 sigma of the star file's value:
  // the host mass enters the companion's mass and a, and a sample whose
  // host masses are unlucky under their own prior is short everywhere.
  struct System {
    TruthInIntervals in;
    bool host_prior68, host_prior95;
    bool basin;
    double sig, p_over_arc, arc;
  };
  std::vector<System> sys;
  const auto t0 = std::chrono::steady_clock::now();
  // Distinct stars for the two arcs: the same stars would share their host
  // masses' and catalogues' noise draws, and the sample would be half as big.
  for (const double arc : {2.0, 8.0})
    for (long i = arc == 2.0 ? 0 : 100000, used = 0; used < n_sys; ++i) {
      InjectedFollowUp inj;
      Rng rng(0);
      if (!injected_follow_up(sm, i, arc, 77, inj, rng)) continue;
      const SimTruth& t = inj.truth;
      const StarFile& f = inj.file;
      const FitModel m(f, inj.row.result, o);
      const FitResult r = run_fit(m, o, f.star.id);
      System s{};
      s.in = truth_in_intervals(posterior_draws(m, r), t);
      const Orbit<double> to = truth_orbit(t, f.star.late.epoch_yr);
      const double mean_anom = to.mean_anom_ref_rad + units::kTwoPi * (m.ref_epoch_yr() - to.ref_epoch_yr) / to.period_yr;
      Pinned pin;
      pin.index = {kLnMass, kLnA, kSqrtECos, kSqrtESin, kCosInc, kNode, kLambda};
      pin.value = {std::log(t.mass_mjup), std::log(t.a_au), std::sqrt(t.ecc) * std::cos(to.arg_peri_rad),
                   std::sqrt(t.ecc) * std::sin(to.arg_peri_rad), std::cos(to.inc_rad), to.node_rad,
                   mean_anom + to.arg_peri_rad + to.node_rad};
      std::vector<Eigen::VectorXd> starts;
      for (int k = 0; k < 8; ++k) {
        Eigen::VectorXd p = m.prior_draw(rng);
        pin.apply(p.data());
        starts.push_back(p);
      }
      const std::vector<FitMinimum> at_truth = find_minima(m, pin, starts);
      s.basin = !at_truth.empty() && r.minima.front().m2lnl <= at_truth.front().m2lnl + 1.0;
      const double host_z = std::abs(f.host_mass.center_msun - t.host_mass_msun) / f.host_mass.width;
      s.host_prior68 = host_z < 0.9945;
      s.host_prior95 = host_z < 1.96;
      s.sig = inj.row.result.sig_joint;
      s.arc = arc;
      s.p_over_arc = t.period_yr / arc;
      sys.push_back(s);
      ++used;
    }
  constexpr int nq = TruthInIntervals::kQuantities;
  const char* names[nq] = {"mass", "a", "e", "host"};
  auto report = [&](const char* label, const std::function<bool(const System&)>& keep) {
    int n = 0, in68[nq] = {}, in95[nq] = {}, basin = 0, prior68 = 0, prior95 = 0;
    for (const System& s : sys) {
      if (!keep(s)) continue;
      ++n;
      basin += s.basin;
      prior68 += s.host_prior68;
      prior95 += s.host_prior95;
      for (int k = 0; k < nq; ++k) {
        in68[k] += s.in.in68[k];
        in95[k] += s.in.in95[k];
      }
    }
    if (n == 0) return;
    std::printf("  %-28s %4d systems:", label, n);
    for (int k = 0; k < nq; ++k)
      std::printf(" %s %3.0f/%3.0f %%;", names[k], 100.0 * in68[k] / n, 100.0 * in95[k] / n);
    std::printf(" host by its prior alone %3.0f/%3.0f %%; optimiser in the truth's basin %3.0f %%\n",
                100.0 * prior68 / n, 100.0 * prior95 / n, 100.0 * basin / n);
  };
  std::printf("sampler coverage (68 %% / 95 %% intervals; 3 epochs, %d steps per chain, %d tempered levels to T = %g, "
              "survey seed %llu, %.0f s):\n",
              steps, o.sampler.temperatures, o.sampler.t_max, static_cast<unsigned long long>(survey_seed),
              seconds_since(t0));
  report("all", [](const System&) { return true; });
  report("arc 2 yr", [](const System& s) { return s.arc == 2.0; });
  report("arc 8 yr", [](const System& s) { return s.arc == 8.0; });
  report("sig_joint < 20", [](const System& s) { return s.sig < 20; });
  report("sig_joint >= 20", [](const System& s) { return s.sig >= 20; });
  report("period < 10 arcs", [](const System& s) { return s.p_over_arc < 10; });
  report("period >= 10 arcs", [](const System& s) { return s.p_over_arc >= 10; });
  return 0;
}
