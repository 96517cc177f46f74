#include "heft/fit.hpp"

#include <algorithm>
#include <cmath>

#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/stats.hpp"
#include "heft/version.hpp"

namespace heft {

using ojson = nlohmann::ordered_json;

FitResult run_fit(const FitModel& m, const FitOptions& opt, const std::string& rng_id,
                  const std::function<void(long, long)>& progress) {
  FitResult res;
  res.upper_limit = m.upper_limit();
  Rng rng = Rng::for_star(opt.seed, rng_id);
  const Pinned none;
  res.minima = find_minima(m, none, draw_starts(m, opt.starts, rng));
  if (res.minima.empty()) throw NumericError(rng_id, "fit", "no start reached a finite posterior");
  for (auto& mn : res.minima) finish_minimum(m, mn);
  res.minima = merge_minima(m, std::move(res.minima));
  // Minima far above the best carry no posterior weight (e^-25 and less):
  // starts stranded at the prior's bounds, not alternatives.
  const double worst = res.minima.front().m2lnpost + kMinimumDeltaKept;
  const auto far = std::find_if(res.minima.begin(), res.minima.end(), [&](const FitMinimum& x) { return x.m2lnpost > worst; });
  res.minima_dropped = static_cast<int>(res.minima.end() - far);
  res.minima.erase(far, res.minima.end());
  if (!opt.sample) return res;
  Rng srng = Rng::for_star(opt.seed ^ 0x5a3c9e1fULL, rng_id);
  const int walkers = walkers_per_chain(m, opt) * std::max(1, opt.sampler.chains);
  std::vector<EnsembleStart> starts;
  if (m.has_relative())
    starts = mode_starts(m, res.minima, walkers, srng);
  else
    starts.push_back({walkers_from_curve(m, walkers, srng, rng_id, res.init_ess), {0.0, 1.0, walkers}});
  PooledChain pooled = sample_modes(m, std::move(starts), opt.sampler, srng, progress);
  res.chain = std::move(pooled.chain);
  res.sample_weight = std::move(pooled.sample_weight);
  res.modes = std::move(pooled.modes);
  res.sampled = true;
  const double tau = *std::max_element(res.chain.iat_steps.begin(), res.chain.iat_steps.end());
  if (!(opt.sampler.steps >= 50.0 * tau))
    res.warnings.push_back("chains shorter than 50 autocorrelation times (max tau " +
                           std::to_string(static_cast<long>(std::ceil(tau))) + " steps): raise --steps to " +
                           std::to_string(static_cast<long>(std::ceil(50.0 * tau / 1000.0)) * 1000) +
                           " or more, and --burn with it");
  const auto names = m.param_names();
  for (std::size_t i = 0; i < res.chain.rhat.size(); ++i)
    if (!(res.chain.rhat[i] <= kMaxRhat)) {
      res.warnings.push_back("the chains disagree on " + names[i] + " (Gelman-Rubin R-hat " +
                             format_double(std::round(res.chain.rhat[i] * 1000.0) / 1000.0) + " > " +
                             format_double(kMaxRhat) +
                             "): the posterior has parts the chains did not all reach; raise --steps and --burn, "
                             "or --starts so that the optimiser finds every mode");
      break;
    }
  if (!m.has_relative() && res.init_ess < opt.walkers)
    res.warnings.push_back("importance draws for the walkers have effective size " +
                           std::to_string(static_cast<long>(res.init_ess)) + " < walkers; mode weights are uncertain");
  if (m.has_relative() && std::none_of(res.minima.begin(), res.minima.end(), [](const FitMinimum& x) { return x.covariance_ok; }))
    res.warnings.push_back("no minimum has a usable covariance: walkers start in a small ball at the best one");
  return res;
}

std::vector<OrbitDraw> posterior_draws(const FitModel& m, const FitResult& r) {
  std::vector<OrbitDraw> draws;
  for (Eigen::Index k = 0; k < r.chain.samples.rows(); ++k) {
    const Eigen::VectorXd p = r.chain.samples.row(k).transpose();
    draws.push_back(m.orbit(p.data()));
    draws.back().weight = r.sample_weight[k];
  }
  return draws;
}

namespace {

ojson minimum_json(const FitModel& m, const FitMinimum& mn, bool with_cov) {
  ojson j;
  j["m2lnl"] = mn.m2lnl;
  j["m2lnpost"] = mn.m2lnpost;
  j["hits"] = mn.hits;
  ojson p, ds;
  const auto names = m.param_names();
  for (int i = 0; i < m.n_params(); ++i) p[names[i]] = mn.p[i];
  const OrbitDraw o = m.orbit(mn.p.data());
  j["orbit"] = {{"mass_mjup", o.mass_mjup},     {"a_au", o.a_au},         {"period_yr", o.period_yr},
                {"ecc", o.ecc},                 {"inc_deg", o.inc_deg},   {"arg_peri_deg", o.arg_peri_deg},
                {"node_deg", o.node_deg},       {"mean_anom_deg", o.mean_anom_deg},
                {"ref_epoch_yr", o.ref_epoch_yr}, {"host_mass_msun", o.host_mass_msun},
                {"parallax_mas", o.parallax_mas}};
  for (int k = 0; k < 5; ++k) ds[derived_names()[k]] = json_number(mn.derived_sigma[k]);
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

}  // namespace

namespace {

// The draws' values of one quantity with their weights, sorted.
std::vector<std::pair<double, double>> weighted_values(const std::vector<OrbitDraw>& draws, double OrbitDraw::*field) {
  std::vector<std::pair<double, double>> v;
  for (const OrbitDraw& d : draws) v.emplace_back(d.*field, d.weight);
  std::sort(v.begin(), v.end());
  return v;
}

}  // namespace

TruthInIntervals truth_in_intervals(const std::vector<OrbitDraw>& draws, const SimTruth& truth) {
  const double value[TruthInIntervals::kQuantities] = {truth.mass_mjup, truth.a_au, truth.ecc, truth.host_mass_msun};
  double OrbitDraw::*const field[TruthInIntervals::kQuantities] = {&OrbitDraw::mass_mjup, &OrbitDraw::a_au,
                                                                   &OrbitDraw::ecc, &OrbitDraw::host_mass_msun};
  TruthInIntervals r{};
  for (int k = 0; k < TruthInIntervals::kQuantities; ++k) {
    const auto v = weighted_values(draws, field[k]);
    auto inside = [&](double p_lo, double p_hi) {
      return value[k] >= weighted_quantile(v, 1.0, p_lo) && value[k] <= weighted_quantile(v, 1.0, p_hi);
    };
    r.in68[k] = inside(0.16, 0.84);
    r.in95[k] = inside(0.025, 0.975);
  }
  return r;
}

FitOptions fit_coverage_options(const SurveyModel& survey) {
  FitOptions o;
  o.prior.m_min_mjup = survey.companion_mass_mjup.p1;
  o.prior.m_max_mjup = survey.companion_mass_mjup.p2;
  o.a_min_au = survey.a_au.p1;
  o.a_max_au = survey.a_au.p2;
  o.prior.ecc = survey.ecc;
  return o;
}

ojson posterior_quantiles(const FitResult& r, const std::vector<OrbitDraw>& draws) {
  ojson q;
  auto add = [&](const char* name, double OrbitDraw::*field) {
    const auto v = weighted_values(draws, field);
    auto at = [&](double p) { return weighted_quantile(v, 1.0, p); };
    if (r.upper_limit && field == &OrbitDraw::mass_mjup)
      q[name] = quantiles_json({{68, at(0.68)}, {95, at(0.95)}});
    else
      q[name] = quantiles_json({{2.5, at(0.025)}, {16, at(0.16)}, {50, at(0.5)}, {84, at(0.84)}, {97.5, at(0.975)}});
  };
  add("mass_mjup", &OrbitDraw::mass_mjup);
  add("a_au", &OrbitDraw::a_au);
  add("period_yr", &OrbitDraw::period_yr);
  add("ecc", &OrbitDraw::ecc);
  add("inc_deg", &OrbitDraw::inc_deg);
  add("host_mass_msun", &OrbitDraw::host_mass_msun);
  add("parallax_mas", &OrbitDraw::parallax_mas);
  return q;
}

ojson fit_priors_json(const FitModel& m, const StarFile& f) {
  const FitOptions& o = m.options();
  const MassPrior& mp = m.mass_prior();
  return {{"mass", mp.describe()},
          {"m_min_mjup", o.prior.m_min_mjup},
          {"m_max_mjup", o.prior.m_max_mjup},
          {"mass_floor_mjup", mp.floor_mjup()},
          {"a", "log-uniform on [a_min, a_max]"},
          {"a_min_au", o.a_min_au},
          {"a_max_au", o.a_max_au},
          {"ecc", o.prior.ecc.str()},
          {"orientation", "isotropic: uniform cos i, Omega, mean longitude; omega uniform through sqrt(e) (cos, sin)"},
          {"host_mass", f.host_mass.kind == HostMassPrior::Kind::kNormal ? "normal" : "lognormal"},
          {"host_mass_center_msun", f.host_mass.center_msun},
          {"host_mass_width", f.host_mass.width},
          {"parallax", "normal: late catalogue value and error"},
          {"proper_motion", "uniform"},
          {"rv_offset", "uniform"},
          {"rv_jitter", "log-uniform on [jitter_min, jitter_max]"},
          {"jitter_min_m_s", o.jitter_min_m_s},
          {"jitter_max_m_s", o.jitter_max_m_s}};
}

ojson fit_json(const FitModel& model, const StarFile& f, const ScreenRow& row, const FitResult& r,
               const std::string& input) {
  const FitOptions& fopt = model.options();
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
  j["minima_dropped"] = r.minima_dropped;
  std::vector<std::string> warnings = r.warnings;
  if (!r.minima.front().covariance_ok) warnings.push_back("best-fit covariance: " + r.minima.front().flag);
  if (r.sampled) {
    const EnsembleChain& c = r.chain;
    const auto names = model.param_names();
    ojson post;
    post["chains"] = c.chains;
    post["walkers"] = c.walkers;
    post["steps"] = fopt.sampler.steps;
    post["burn"] = fopt.sampler.burn;
    post["thin"] = fopt.sampler.thin;
    post["kept"] = c.samples.rows();
    post["acceptance"] = c.acceptance;
    if (!c.beta.empty()) post["tempering"] = {{"beta", c.beta}, {"swap_acceptance", c.swap_acceptance}};
    ojson modes = ojson::array();
    for (const auto& md : r.modes)
      modes.push_back({{"m2lnpost", md.m2lnpost}, {"weight", md.weight}, {"walkers", md.walkers},
                       {"with_mirror", md.mirrored}});
    if (f.relative.empty())
      post["start"] = {{"method", "heft curve draws, importance-weighted"}, {"ess", r.init_ess}};
    else
      post["start"] = {{"method", "walkers of every chain from the modes by their Laplace evidence (stratified); "
                                  "sampled in the relative position and velocity at the mean imaging epoch"},
                       {"modes", modes}};
    ojson tau;
    for (int i = 0; i < model.n_params(); ++i) tau[names[i]] = json_number(c.iat_steps[i]);
    post["autocorr_steps"] = tau;
    ojson rhat;
    for (std::size_t i = 0; i < c.rhat.size(); ++i) rhat[names[i]] = json_number(c.rhat[i]);
    post["rhat"] = rhat;
    post["quantiles"] = posterior_quantiles(r, posterior_draws(model, r));
    j["posterior"] = post;
  }
  j["warnings"] = warnings;
  j["priors"] = fit_priors_json(model, f);
  j["run"] = {{"heft_version", kVersion}, {"command", "fit"},         {"input", input},
              {"seed", fopt.seed},        {"starts", fopt.starts},    {"dark_companion_assumed", true},
              {"units", units_json(draw_column_units())}};
  return j;
}

}  // namespace heft
