#include "heft/fit_sampler.hpp"

#include <Eigen/Cholesky>
#include <algorithm>
#include <cmath>
#include <limits>

#include "heft/angles.hpp"
#include "heft/error.hpp"
#include "heft/stats.hpp"

namespace heft {
namespace {
constexpr double kInf = std::numeric_limits<double>::infinity();
}  // namespace

// Walkers without relative astrometry: heft curve's Monte Carlo posterior
// over the whole prior (the same anomaly model), reweighted by the RV
// likelihood, picked without replacement by the keys u^(1/w) (Efraimidis &
// Spirakis 2006, Inf. Process. Lett. 97, 181), so that separated modes
// enter with their posterior weights. `ess` is the pool's effective size.
Eigen::MatrixXd walkers_from_curve(const FitModel& m, int walkers, Rng& rng, const std::string& rng_id,
                                   double& ess) {
  const FitOptions& fo = m.options();
  CurveOptions co;
  co.a_au = log_grid(fo.a_min_au, fo.a_max_au, 24);
  co.draws = 1024;
  co.prior = fo.prior;
  co.refine_rounds = 1;
  co.seed = rng.next();
  co.keep_draws = true;
  co.quantile_errors = false;  // only the draws are used
  std::vector<Eigen::VectorXd> xs;
  std::vector<double> lw;
  for (const OrbitDraw& d : montecarlo_curve(m.anomaly(), co, rng_id).draws) {
    if (!(d.weight > 0)) continue;
    Eigen::VectorXd x = m.from_orbit(d, rng);
    if (!std::isfinite(m.neg_log_post(x.data()))) continue;
    xs.push_back(x);
    lw.push_back(std::log(d.weight) - m.rv_neg_log_like(x.data()));
  }
  if (static_cast<int>(xs.size()) < walkers)
    throw NumericError(rng_id, "fit", "the Monte Carlo curve gave fewer usable draws than walkers");
  const double mx = *std::max_element(lw.begin(), lw.end());
  double sw = 0, sw2 = 0;
  std::vector<std::pair<double, int>> keys;
  for (int k = 0; k < static_cast<int>(xs.size()); ++k) {
    const double w = std::exp(lw[k] - mx);
    sw += w;
    sw2 += w * w;
    keys.emplace_back(w > 0 ? std::log(rng.uniform_open()) / w : -kInf, k);
  }
  ess = effective_sample_size(sw, sw2);
  std::partial_sort(keys.begin(), keys.begin() + walkers, keys.end(),
                    [](const auto& x, const auto& y) { return x.first > y.first; });
  Eigen::MatrixXd w(m.n_params(), walkers);
  for (int k = 0; k < walkers; ++k) w.col(k) = xs[keys[k].second];
  return w;
}

// Without RVs the mirror has the same likelihood.
Eigen::VectorXd mirror_orbit(Eigen::VectorXd p) {
  p[kSqrtECos] = -p[kSqrtECos];
  p[kSqrtESin] = -p[kSqrtESin];
  p[kNode] = wrap_2pi(p[kNode] + units::kPi);
  return p;
}

// Starts with relative astrometry: the minima, as merge_minima leaves them,
// are the modes; without RVs the mirror orbit with omega + pi, Omega + pi
// has the same likelihood and joins its mode (sampled once, half its
// samples mirrored). Each mode keeps its Laplace evidence exp(-nlp)
// sqrt(det C) (e.g. MacKay 2003, Information Theory, Inference and Learning
// Algorithms, ch. 27) as its posterior weight, and its walkers start from
// N(p, C / 4) in the core and +-0.1 in the ln jitters. Modes whose evidence
// is below kMinModeEvidenceRatio of the strongest's are dropped, at most
// kMaxModes are kept (docs/method.md, Sect. 9).
std::vector<EnsembleStart> mode_starts(const FitModel& m, const std::vector<FitMinimum>& minima, int walkers,
                                       Rng& rng) {
  const int n = m.n_params(), nc = kFitCore + m.n_instruments();
  struct Mode {
    const FitMinimum* mn;
    Eigen::MatrixXd chol;  // of C in the core
    double log_z;
    bool mirrored;
  };
  std::vector<Mode> ms;
  const bool symmetric = m.n_instruments() == 0;
  for (const auto& mn : minima) {
    if (!mn.covariance_ok) continue;
    const Eigen::LLT<Eigen::MatrixXd> llt(mn.cov);
    if (llt.info() != Eigen::Success) continue;
    const Eigen::MatrixXd L = llt.matrixL();
    const double log_z = -0.5 * mn.m2lnpost + L.diagonal().array().log().sum();
    bool mirror = false;
    for (auto& x : ms)
      if (symmetric && !x.mirrored &&
          distance2_to_minimum(mirror_orbit(mn.p), x.mn->p, x.chol, nc) < kSameMinimumMahalanobis2) {
        x.log_z += std::log1p(std::exp(log_z - x.log_z));
        x.mirrored = mirror = true;
        break;
      }
    if (mirror) continue;
    ms.push_back({&mn, L, log_z, false});
  }
  if (ms.empty()) ms.push_back({&minima.front(), Eigen::MatrixXd::Identity(nc, nc) * 1e-6, 0.0, false});
  double mx = -kInf;
  for (const auto& x : ms) mx = std::max(mx, x.log_z);
  std::stable_sort(ms.begin(), ms.end(), [](const Mode& x, const Mode& y) { return x.log_z > y.log_z; });
  double sz = 0.0;
  std::vector<Mode> kept;
  for (const auto& x : ms)
    if (kept.size() < kMaxModes && x.log_z - mx > std::log(kMinModeEvidenceRatio)) {
      kept.push_back(x);
      sz += std::exp(x.log_z - mx);
    }
  std::vector<EnsembleStart> out;
  for (const auto& md : kept) {
    Eigen::MatrixXd w(n, walkers);
    for (int col = 0; col < walkers; ++col) {
      Eigen::VectorXd x = md.mn->p;
      for (int tries = 0; tries < 100; ++tries) {
        Eigen::VectorXd z(nc), y = md.mn->p;
        for (int i = 0; i < nc; ++i) z[i] = rng.normal();
        y.head(nc) += 0.5 * md.chol * z;
        for (int i = nc; i < n; ++i) y[i] += 0.1 * rng.normal();
        if (std::isfinite(m.neg_log_post(y.data()))) {
          x = y;
          break;
        }
      }
      w.col(col) = x;
    }
    out.push_back({w, {md.mn->m2lnpost, std::exp(md.log_z - mx) / sz, walkers, md.mirrored}});
  }
  return out;
}

namespace {

// ln posterior and, for the tempered levels, ln L (the data and the
// Gaussian host-mass and parallax constraints, as FitModel::neg_log_post's
// -2 ln L).
double log_posterior(const FitModel& m, const double* p, double& log_like) {
  double m2lnl = 0.0;
  const double lp = -m.neg_log_post(p, &m2lnl);
  log_like = -0.5 * m2lnl;
  return lp;
}

// Without imaging the sampler sees Omega and lambda as points (c, s) of the
// plane, angle = atan2(s, c), with the auxiliary density N(0, I) of the
// point (its angle uniform, as the prior's; its radius Rayleigh and
// independent): a periodic coordinate on the real line has no normalisable
// density, and the ensemble's affine moves spread such walkers without
// bound (to 1e51 rad, measured), where nothing mixes. Coordinates n and
// n + 1 hold the two sines; returns ln N(c, s) without its constant.
constexpr int kPlanarAngles[2] = {kNode, kLambda};
double params_from_planar(const double* x, int n, double* p) {
  std::copy(x, x + n, p);
  double log_aux = 0.0;
  for (int j = 0; j < 2; ++j) {
    const double c = x[kPlanarAngles[j]], s = x[n + j];
    p[kPlanarAngles[j]] = wrap_2pi(std::atan2(s, c));
    log_aux -= 0.5 * (c * c + s * s);
  }
  return log_aux;
}

// Every chain samples every mode: walker k of a chain of nw comes from the
// mode in which (k + 1/2) / nw falls on the modes' cumulative weights.
Eigen::MatrixXd stratified_walkers(const std::vector<EnsembleStart>& starts, int chains) {
  const Eigen::Index walkers = starts.front().walkers.cols(), nw = walkers / chains;
  Eigen::MatrixXd w(starts.front().walkers.rows(), walkers);
  for (Eigen::Index k = 0; k < walkers; ++k) {
    const double at = (k % nw + 0.5) / static_cast<double>(nw);
    double cum = 0.0;
    std::size_t j = 0;
    while (j + 1 < starts.size() && (cum += starts[j].mode.weight) < at) ++j;
    w.col(k) = starts[j].walkers.col(k);
  }
  return w;
}

}  // namespace

PooledChain sample_modes(const FitModel& m, std::vector<EnsembleStart> starts, const EnsembleOptions& opt,
                         Rng& srng, const std::function<void(long, long)>& progress) {
  PooledChain res;
  EnsembleOptions eo = opt;
  eo.seed = srng.next();
  const int n = m.n_params();
  if (!m.has_relative()) {
    // Walkers from heft curve's draws already follow the posterior: no
    // rescue. Omega and lambda move as points of the plane (params_from_planar).
    eo.rescue = false;
    const Eigen::MatrixXd& w = starts.front().walkers;
    Eigen::MatrixXd u(n + 2, w.cols());
    for (Eigen::Index k = 0; k < w.cols(); ++k) {
      u.col(k).head(n) = w.col(k);
      for (int j = 0; j < 2; ++j) {
        const double r = std::sqrt(-2.0 * std::log(srng.uniform_open())), angle = w(kPlanarAngles[j], k);
        u(kPlanarAngles[j], k) = r * std::cos(angle);
        u(n + j, k) = r * std::sin(angle);
      }
    }
    EnsembleChain c = run_ensemble(
        [&m, n](const double* x, double& log_like) {
          double p[kMaxFitParams];
          const double log_aux = params_from_planar(x, n, p);
          return log_posterior(m, p, log_like) + log_aux;
        },
        u, eo, progress);
    Eigen::MatrixXd samples(c.samples.rows(), n);
    for (Eigen::Index k = 0; k < c.samples.rows(); ++k) {
      const Eigen::VectorXd x = c.samples.row(k).transpose();  // a row is not contiguous
      double p[kMaxFitParams];
      params_from_planar(x.data(), n, p);
      samples.row(k) = Eigen::Map<const Eigen::RowVectorXd>(p, n);
    }
    c.samples = std::move(samples);
    c.dim = n;
    // Each angle's diagnostics: the worse of its two planar coordinates.
    for (std::vector<double>* v : {&c.iat_steps, &c.rhat}) {
      if (v->empty()) continue;
      for (int j = 0; j < 2; ++j) (*v)[kPlanarAngles[j]] = std::max((*v)[kPlanarAngles[j]], (*v)[n + j]);
      v->resize(n);
    }
    res.chain = std::move(c);
    res.sample_weight.assign(res.chain.samples.rows(), 1.0 / res.chain.samples.rows());
    res.modes.push_back(starts.front().mode);
    return res;
  }
  // With imaging: one ensemble in the observable coordinates (relative
  // position and velocity at the mean imaging epoch), where the short-arc
  // posterior is compact and has no periodic copies; the parameters' density
  // times |d params / d observables| (docs/method.md, Sect. 9).
  const Eigen::MatrixXd w = stratified_walkers(starts, std::max(1, opt.chains));
  Eigen::MatrixXd u(w.rows(), w.cols());
  for (Eigen::Index k = 0; k < w.cols(); ++k) u.col(k) = observables_from_params(m, w.col(k));
  EnsembleChain c = run_ensemble(
      [&m](const double* x, double& log_like) {
        double p[kMaxFitParams], log_jac = 0.0;
        if (!params_from_observables(m, x, p, log_jac)) return -kInf;
        return log_posterior(m, p, log_like) + log_jac;
      },
      u, eo, progress);
  // Without RVs the mirror orbit (omega + pi, Omega + pi) has the same
  // likelihood: every second sample is mirrored, so both are held exactly.
  const bool mirrored = m.n_instruments() == 0;
  for (Eigen::Index k = 0; k < c.samples.rows(); ++k) {
    double p[kMaxFitParams], log_jac = 0.0;
    const Eigen::VectorXd uk = c.samples.row(k).transpose();
    params_from_observables(m, uk.data(), p, log_jac);
    Eigen::VectorXd q = Eigen::Map<const Eigen::VectorXd>(p, n);
    if (mirrored && k % 2 == 1) q = mirror_orbit(q);
    c.samples.row(k) = q.transpose();
  }
  res.chain = std::move(c);
  res.sample_weight.assign(res.chain.samples.rows(), 1.0 / res.chain.samples.rows());
  ModeStart mode = starts.front().mode;
  mode.weight = 1.0;
  mode.mirrored = mirrored;
  res.modes.push_back(mode);
  return res;
}

}  // namespace heft
