#include "heft/fit_model.hpp"

#include <Eigen/Cholesky>
#include <Eigen/LU>
#include <algorithm>
#include <cmath>
#include <limits>

#include "heft/angles.hpp"
#include "heft/error.hpp"
#include "heft/kepler.hpp"
#include "heft/rng.hpp"
#include "heft/window.hpp"

namespace heft {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// ln prior density of e, up to a constant, for any scalar.
template <typename T>
T ecc_log_prior(const Distribution& d, const T& e) {
  using std::log;
  switch (d.kind) {
    case Distribution::Kind::kLogUniform: return -log(e);
    case Distribution::Kind::kBeta: return T(d.p1 - 1) * log(e) + T(d.p2 - 1) * log(T(1.0) - e);
    default: return T(0.0);
  }
}

}  // namespace

StarFile star_file_of(const StarRecord& star, double host_mass_msun, double host_mass_error_msun, bool& ok) {
  StarFile f;
  f.star = star;
  HostMass host{};
  ok = host_mass_prior(star.mass_msun, star.mass_error_msun, host_mass_msun, host_mass_error_msun, host);
  f.host_mass = {HostMassPrior::Kind::kNormal, host.mass_msun, host.error_msun};
  return f;
}

FitModel::FitModel(const StarFile& f, const AnomalyResult& r, const FitOptions& opt)
    : host_(f.host_mass), rel_(f.relative), rv_(f.rv), instruments_(f.instruments), opt_(opt) {
  const StarRecord& s = f.star;
  early_ = {s.early.window_start_yr, s.early.window_end_yr, s.early.epoch_yr, {}, {}};
  late_ = {s.late.window_start_yr, s.late.window_end_yr, s.late.epoch_yr, {}, {}};
  dt_yr_ = s.late.epoch_yr - s.early.epoch_yr;
  // The phase is counted from the middle of the imaging epochs: there the
  // data pin it, and it is least correlated with the period.
  phase_epoch_yr_ = s.late.epoch_yr;
  if (!f.relative.empty()) {
    double sum = 0.0;
    for (const auto& e : f.relative) sum += e.epoch_yr;
    phase_epoch_yr_ = sum / f.relative.size();
  }
  n_inst_ = static_cast<int>(instruments_.size());
  if (n_inst_ > kMaxInstruments)
    throw InputError::at_json("star file", "/radial_velocities",
                              "at most " + std::to_string(kMaxInstruments) + " instruments");
  n_res_ = 6 + 2 * static_cast<int>(rel_.size()) + static_cast<int>(rv_.size()) + 2;
  pm_obs_ << r.pml_late_mas_yr, r.dpm_late_mas_yr, r.dpm_early_mas_yr;
  Eigen::Matrix<double, 6, 6> cov;
  cov.block<2, 2>(0, 0) = r.pml_cov;
  cov.block<2, 4>(0, 2) = r.pml_dpm_cov;
  cov.block<4, 2>(2, 0) = r.pml_dpm_cov.transpose();
  cov.block<4, 4>(2, 2) = r.dpm_cov;
  const Eigen::LLT<Eigen::Matrix<double, 6, 6>> llt(cov);
  if (llt.info() != Eigen::Success) throw NumericError(s.id, "fit", "proper-motion covariance not positive definite");
  pm_whiten_ = llt.matrixL().solve(Eigen::Matrix<double, 6, 6>::Identity());
  pml_obs_ = r.pml_late_mas_yr;
  pml_cov_ = r.pml_cov;
  bool have_mass = false;
  const double center = host_.center_msun;
  const double width = host_.kind == HostMassPrior::Kind::kNormal ? host_.width : center * std::log(10.0) * host_.width;
  anomaly_ = anomaly_data(s, r, center, width, have_mass);
  anomaly_.host_mass_msun = center;  // the star file's prior rules over the star's mass columns
  anomaly_.host_mass_error_msun = width;
  plx_cat_ = s.late.parallax_mas;
  plx_sigma_ = s.late.parallax_error_mas;
  // Imaged companions are detections whatever the anomaly's significance.
  mass_prior_ = opt.prior.mass_prior(rel_.empty() && opt.prior.upper_limit(r.sig_joint));
  ln_m_lo_ = std::log(mass_prior_.floor_mjup());
  ln_m_hi_ = std::log(mass_prior_.m_max_mjup);
  ln_a_lo_ = std::log(opt.a_min_au);
  ln_a_hi_ = std::log(opt.a_max_au);
  ecc_max_ = 0.99;
  if (opt.prior.ecc.kind == Distribution::Kind::kUniform || opt.prior.ecc.kind == Distribution::Kind::kLogUniform)
    ecc_max_ = std::min(ecc_max_, opt.prior.ecc.p2);
  ln_a_start_lo_ = ln_a_lo_;
  ln_a_start_hi_ = ln_a_hi_;
  if (!rel_.empty()) {
    // An imaged companion: a is near (sep / parallax) / (1 -+ e).
    const RelativeEpoch& e0 = rel_.front();
    const double sep = e0.polar ? e0.v1 : std::hypot(e0.v1, e0.v2);
    const double a0 = sep / plx_cat_;
    ln_a_start_lo_ = std::clamp(std::log(0.6 * a0), ln_a_lo_, ln_a_hi_);
    ln_a_start_hi_ = std::clamp(std::log(2.5 * a0), ln_a_lo_, ln_a_hi_);
  }
  rv_mean_.assign(n_inst_, 0.0);
  rv_spread_.assign(n_inst_, 0.0);
  std::vector<int> count(n_inst_, 0);
  for (const auto& v : rv_) {
    rv_mean_[v.instrument] += v.rv_m_s;
    ++count[v.instrument];
  }
  for (int k = 0; k < n_inst_; ++k) rv_mean_[k] /= count[k];
  for (const auto& v : rv_)
    rv_spread_[v.instrument] = std::max(rv_spread_[v.instrument], std::abs(v.rv_m_s - rv_mean_[v.instrument]) + v.error_m_s);
}

template <typename T>
Orbit<T> FitModel::orbit_at(const T* p) const {
  using std::acos;
  using std::atan2;
  using std::exp;
  const T m2 = exp(p[kLnMass]) / T(units::kMjupPerMsun);
  const T e = p[kSqrtECos] * p[kSqrtECos] + p[kSqrtESin] * p[kSqrtESin];
  // omega is undefined at e = 0: any value, with no derivative.
  const double h = scalar_of(p[kSqrtECos]), k = scalar_of(p[kSqrtESin]);
  const T omega = h * h + k * k > 0.0 ? atan2(p[kSqrtESin], p[kSqrtECos]) : T(0.0);
  return {period_from_a(exp(p[kLnA]), p[kHostMass] + m2), e, acos(p[kCosInc]), omega, p[kNode],
          p[kLambda] - omega - p[kNode], phase_epoch_yr_};
}

// Proper motions (pml_late, dpm_late, dpm_early) of docs/method.md Sect. 9:
// the long-baseline PM is the barycentric PM plus the reflex displacement
// between the catalogue epochs over their separation in time.
template <typename T>
void FitModel::model_pm(const Orbit<T>& o, const T& a, const T& q, const T& plx, const T& pmra,
                        const T& pmdec, T y[6]) const {
  const WindowFit<T> wl = fit_reflex(o, a, q, plx, late_), we = fit_reflex(o, a, q, plx, early_);
  const T lra = (wl.dra_mas - we.dra_mas) / T(dt_yr_), ldec = (wl.ddec_mas - we.ddec_mas) / T(dt_yr_);
  y[0] = pmra + lra;
  y[1] = pmdec + ldec;
  y[2] = wl.pmra_mas_yr - lra;
  y[3] = wl.pmdec_mas_yr - ldec;
  y[4] = we.pmra_mas_yr - lra;
  y[5] = we.pmdec_mas_yr - ldec;
}

// Whitened residual of one host RV; adds its log-normaliser to `extra`.
template <typename T>
T FitModel::rv_residual_at(const Orbit<T>& o, const T& a, const T& q, const T* p, const RvPoint& v, T& extra) const {
  using std::exp;
  using std::log;
  using std::sqrt;
  const OrbitPoint<T> op = orbit_point(o, v.epoch_yr);
  const T model = -q * a * op.vz * T(units::kKmsPerAuYr * 1e3) + p[kFitCore + v.instrument];
  const T jit = exp(p[kFitCore + n_inst_ + v.instrument]);
  const T var = T(v.error_m_s * v.error_m_s) + jit * jit;
  extra += T(0.5) * log(var);
  return (model - T(v.rv_m_s)) / sqrt(var);
}

Eigen::VectorXd FitModel::from_orbit(const OrbitDraw& d, Rng& rng) const {
  Eigen::VectorXd p = Eigen::VectorXd::Zero(n_params());
  const double w = units::deg_to_rad(d.arg_peri_deg), node = units::deg_to_rad(d.node_deg);
  p[kLnMass] = std::log(std::max(d.mass_mjup, 1e-300));
  p[kLnA] = std::log(d.a_au);
  p[kSqrtECos] = std::sqrt(d.ecc) * std::cos(w);
  p[kSqrtESin] = std::sqrt(d.ecc) * std::sin(w);
  p[kCosInc] = std::cos(units::deg_to_rad(d.inc_deg));
  p[kNode] = node;
  const double mean_at_phase = units::deg_to_rad(d.mean_anom_deg) +
                               units::kTwoPi * (phase_epoch_yr_ - d.ref_epoch_yr) / d.period_yr;
  p[kLambda] = wrap_2pi(mean_at_phase + w + node);
  p[kHostMass] = d.host_mass_msun;
  p[kParallax] = d.parallax_mas;
  // Barycentric PM: the long-baseline PM minus this orbit's reflex term, with
  // the long-baseline PM's noise.
  const double m2 = d.mass_mjup / units::kMjupPerMsun, q = m2 / (d.host_mass_msun + m2);
  double y[6];
  model_pm(orbit_at(p.data()), d.a_au, q, d.parallax_mas, 0.0, 0.0, y);
  const Eigen::LLT<Eigen::Matrix2d> llt(pml_cov_);
  const Eigen::Vector2d pm = pml_obs_ - Eigen::Vector2d(y[0], y[1]) + llt.matrixL() * Eigen::Vector2d(rng.normal(), rng.normal());
  p[kPmra] = pm[0];
  p[kPmdec] = pm[1];
  // RV offsets: the error-weighted mean residual of each instrument; jitter
  // at the instrument's median error.
  std::vector<double> sw(n_inst_, 0.0), swr(n_inst_, 0.0);
  std::vector<std::vector<double>> errs(n_inst_);
  const Orbit<double> o = orbit_at(p.data());
  for (const auto& v : rv_) {
    double extra = 0.0;
    p[kFitCore + n_inst_ + v.instrument] = std::log(opt_.jitter_min_m_s);
    const double r = rv_residual_at(o, d.a_au, q, p.data(), v, extra);  // offset 0
    const double s2 = v.error_m_s * v.error_m_s;
    swr[v.instrument] += -r * std::sqrt(s2 + opt_.jitter_min_m_s * opt_.jitter_min_m_s) / s2;
    sw[v.instrument] += 1.0 / s2;
    errs[v.instrument].push_back(v.error_m_s);
  }
  for (int j = 0; j < n_inst_; ++j) {
    p[kFitCore + j] = swr[j] / sw[j];
    std::nth_element(errs[j].begin(), errs[j].begin() + errs[j].size() / 2, errs[j].end());
    p[kFitCore + n_inst_ + j] = std::clamp(std::log(errs[j][errs[j].size() / 2]), std::log(opt_.jitter_min_m_s),
                                           std::log(opt_.jitter_max_m_s));
  }
  return p;
}

double FitModel::rv_neg_log_like(const double* p) const {
  if (rv_.empty()) return 0.0;
  const double m2 = std::exp(p[kLnMass]) / units::kMjupPerMsun, q = m2 / (p[kHostMass] + m2);
  const Orbit<double> o = orbit_at(p);
  double extra = 0.0, chi2 = 0.0;
  for (const auto& v : rv_) {
    const double r = rv_residual_at(o, std::exp(p[kLnA]), q, p, v, extra);
    chi2 += r * r;
  }
  return 0.5 * chi2 + extra;
}

bool FitModel::in_support(const double* p) const {
  const double lnm = p[kLnMass], lna = p[kLnA], h = p[kSqrtECos], k = p[kSqrtESin], ci = p[kCosInc];
  if (!(lnm >= ln_m_lo_ && lnm <= ln_m_hi_ && lna >= ln_a_lo_ && lna <= ln_a_hi_)) return false;
  if (!(h * h + k * k < ecc_max_ && std::abs(ci) < 1.0)) return false;
  if (!(p[kHostMass] > 0.0 && p[kParallax] > 0.0)) return false;
  for (int j = 0; j < n_inst_; ++j) {
    const double lj = p[kFitCore + n_inst_ + j];
    if (!(lj >= std::log(opt_.jitter_min_m_s) && lj <= std::log(opt_.jitter_max_m_s))) return false;
  }
  return true;
}

template <typename T>
void FitModel::anomaly_residuals(const Orbit<T>& o, const T* p, T r[6]) const {
  using std::exp;
  const T m1 = p[kHostMass], m2 = exp(p[kLnMass]) / T(units::kMjupPerMsun), q = m2 / (m1 + m2);
  T y[6];
  model_pm(o, exp(p[kLnA]), q, p[kParallax], p[kPmra], p[kPmdec], y);
  for (int i = 0; i < 6; ++i) {
    T s(0.0);
    for (int j = 0; j <= i; ++j) s += T(pm_whiten_(i, j)) * (y[j] - T(pm_obs_(j)));
    r[i] = s;
  }
}

// The companion's offset from the host, in the form it was measured.
template <typename T>
void FitModel::relative_residuals(const Orbit<T>& o, const T* p, int k, T r[2]) const {
  using std::exp;
  const RelativeEpoch& ep = rel_[k];
  const T a = exp(p[kLnA]), plx = p[kParallax];
  const OrbitPoint<T> op = orbit_point(o, ep.epoch_yr);
  const T north = a * plx * op.x, east = a * plx * op.y;
  T d1, d2;
  if (ep.polar) {
    T sep, pa;
    separation_pa(north, east, sep, pa);
    d1 = (sep - T(ep.v1)) / T(ep.e1);
    const T dpa = pa - T(units::deg_to_rad(ep.v2));
    d2 = (dpa - T(units::kTwoPi * std::round(scalar_of(dpa) / units::kTwoPi))) / T(units::deg_to_rad(ep.e2));
  } else {
    d1 = (east - T(ep.v1)) / T(ep.e1);
    d2 = (north - T(ep.v2)) / T(ep.e2);
  }
  r[0] = d1;
  r[1] = (d2 - T(ep.corr) * d1) / T(std::sqrt(1.0 - ep.corr * ep.corr));
}

// Host RVs with per-instrument offset and jitter: -ln L has the
// log-normaliser ln sqrt(sigma^2 + s^2), which is not a square.
template <typename T>
T FitModel::rv_residual(const Orbit<T>& o, const T* p, int k, T& extra) const {
  using std::exp;
  const T m1 = p[kHostMass], m2 = exp(p[kLnMass]) / T(units::kMjupPerMsun), q = m2 / (m1 + m2);
  return rv_residual_at(o, exp(p[kLnA]), q, p, rv_[k], extra);
}

// Priors: host mass, catalogue parallax, eccentricity, and the mass prior
// (prior.hpp; for upper limits its density m in ln m).
template <typename T>
void FitModel::prior_residuals(const T* p, T r[2], T& extra) const {
  using std::log;
  const T m1 = p[kHostMass], e = p[kSqrtECos] * p[kSqrtECos] + p[kSqrtESin] * p[kSqrtESin];
  if (host_.kind == HostMassPrior::Kind::kNormal) {
    r[0] = (m1 - T(host_.center_msun)) / T(host_.width);
  } else {
    r[0] = (log(m1) / T(std::log(10.0)) - T(std::log10(host_.center_msun))) / T(host_.width);
    extra += log(m1);
  }
  r[1] = (p[kParallax] - T(plx_cat_)) / T(plx_sigma_);
  extra -= ecc_log_prior(opt_.prior.ecc, e);
  extra -= mass_prior_.log_density_ln_mass(p[kLnMass], scalar_of(p[kLnMass]));
}

template <typename T>
bool FitModel::evaluate(const T* p, T* r, T& extra) const {
  if (!in_support(p)) return false;
  const Orbit<T> o = orbit_at(p);
  int n = 0;
  anomaly_residuals(o, p, r);
  n += 6;
  for (int k = 0; k < n_relative(); ++k, n += 2) relative_residuals(o, p, k, r + n);
  for (int k = 0; k < n_rv(); ++k) r[n++] = rv_residual(o, p, k, extra);
  prior_residuals(p, r + n, extra);
  n += 2;
  for (int i = 0; i < n; ++i)
    if (!std::isfinite(scalar_of(r[i]))) return false;
  return std::isfinite(scalar_of(extra));
}

double FitModel::neg_log_post(const double* p, double* m2lnl) const {
  std::vector<double> r(n_res_);
  double extra = 0.0;
  if (!evaluate(p, r.data(), extra)) return kInf;
  double chi2 = 0.0;
  for (double v : r) chi2 += v * v;
  if (m2lnl) {
    double data = 0.0;
    for (double v : r) data += v * v;
    for (const auto& v : rv_) {
      const double jit = std::exp(p[kFitCore + n_inst_ + v.instrument]);
      data += std::log(v.error_m_s * v.error_m_s + jit * jit);
    }
    *m2lnl = data;
  }
  return 0.5 * chi2 + extra;
}

Eigen::VectorXd FitModel::prior_draw(Rng& rng) const {
  Eigen::VectorXd p(n_params());
  p[kLnMass] = rng.uniform(ln_m_lo_, ln_m_hi_);
  p[kLnA] = rng.uniform(ln_a_start_lo_, ln_a_start_hi_);
  double e;
  do e = opt_.prior.ecc.draw(rng); while (!(e >= 0.0 && e < ecc_max_));
  const double w = units::kTwoPi * rng.uniform();
  p[kSqrtECos] = std::sqrt(e) * std::cos(w);
  p[kSqrtESin] = std::sqrt(e) * std::sin(w);
  p[kCosInc] = rng.uniform(-1.0, 1.0);
  p[kNode] = units::kTwoPi * rng.uniform();
  p[kLambda] = units::kTwoPi * rng.uniform();
  const double lnm1_lo = std::log(0.01);
  do {
    p[kHostMass] = host_.kind == HostMassPrior::Kind::kNormal
                       ? host_.center_msun + host_.width * rng.normal()
                       : host_.center_msun * std::pow(10.0, host_.width * rng.normal());
  } while (!(std::log(p[kHostMass]) > lnm1_lo));
  do p[kParallax] = plx_cat_ + plx_sigma_ * rng.normal(); while (!(p[kParallax] > 0));
  const Eigen::LLT<Eigen::Matrix2d> llt(pml_cov_);
  const Eigen::Vector2d pm = pml_obs_ + llt.matrixL() * Eigen::Vector2d(rng.normal(), rng.normal());
  p[kPmra] = pm[0];
  p[kPmdec] = pm[1];
  for (int j = 0; j < n_inst_; ++j) {
    p[kFitCore + j] = rv_mean_[j] + rv_spread_[j] * rng.normal();
    p[kFitCore + n_inst_ + j] = rng.uniform(std::log(opt_.jitter_min_m_s), std::log(opt_.jitter_max_m_s));
  }
  return p;
}

Eigen::VectorXd observables_from_params(const FitModel& m, const Eigen::VectorXd& p) {
  Eigen::VectorXd u = p;
  const OrbitPoint<double> s = orbit_point(m.orbit_at(p.data()), m.ref_epoch_yr());
  const double k = std::exp(p[kLnA]) * p[kParallax];  // mas per unit of a
  const double x[6] = {s.x, s.y, s.z, s.vx, s.vy, s.vz};
  for (int i = 0; i < 6; ++i) u[kLnA + i] = k * x[i];
  return u;
}

bool params_from_observables(const FitModel& m, const double* u, double* p, double& log_jacobian) {
  const double plx = u[kParallax], m_total = u[kHostMass] + std::exp(u[kLnMass]) / units::kMjupPerMsun;
  if (!(plx > 0.0 && m_total > 0.0)) return false;
  const double gm = units::kGMSunAu3Yr2 * m_total;
  const double r[3] = {u[kLnA] / plx, u[kLnA + 1] / plx, u[kLnA + 2] / plx};
  const double v[3] = {u[kLnA + 3] / plx, u[kLnA + 4] / plx, u[kLnA + 5] / plx};
  StateElements<double> el;
  if (!elements_from_state(r, v, gm, el)) return false;
  for (int i = 0; i < m.n_params(); ++i) p[i] = u[i];
  const double root_e = std::sqrt(el.ecc);
  p[kLnA] = std::log(el.a);
  p[kSqrtECos] = el.e_cos_w / root_e;
  p[kSqrtESin] = el.e_sin_w / root_e;
  p[kCosInc] = el.cos_inc;
  p[kNode] = el.node_rad;
  p[kLambda] = el.mean_anom_rad + el.arg_peri_rad + el.node_rad;
  // d^3r d^3v = gm^(3/2) a^(3/2) e d(ln a) d(sqrt(e) cos w) d(sqrt(e) sin w)
  // d(cos i) dOmega dlambda: the Delaunay variables are canonical (e.g.
  // Murray & Dermott 1999, Sect. 2.10), and u = parallax x (r, v).
  log_jacobian = -(6.0 * std::log(plx) + 1.5 * std::log(gm) + 1.5 * std::log(el.a) + std::log(el.ecc));
  return true;
}

int walkers_per_chain(const FitModel& m, const FitOptions& opt) {
  if (opt.walkers > 0) return opt.walkers;
  const int n = std::max(32, 2 * m.n_params());
  return n + n % 2;
}

void FitModel::imaged_positions(std::vector<double>& t, std::vector<double>& x, std::vector<double>& y,
                                std::vector<double>& s2) const {
  for (const auto& e : rel_) {
    const double pa = units::deg_to_rad(e.v2);
    t.push_back(e.epoch_yr - phase_epoch_yr_);
    x.push_back(e.polar ? e.v1 * std::cos(pa) : e.v2);
    y.push_back(e.polar ? e.v1 * std::sin(pa) : e.v1);
    const double s = e.polar ? std::max(e.e1, e.v1 * units::deg_to_rad(e.e2)) : std::max(e.e1, e.e2);
    s2.push_back(s * s);
  }
}

Eigen::VectorXd FitModel::thiele_innes_draw(Rng& rng) const {
  std::vector<double> t, x, y, s2;
  imaged_positions(t, x, y, s2);
  if (t.size() < 2) return prior_draw(rng);
  // Of kCandidates draws of (a, e, M, masses) the one whose Thiele-Innes
  // fit leaves the smallest chi^2 (positions only; no model evaluation).
  constexpr int kCandidates = 32;
  std::vector<Eigen::Vector2d> f(t.size());  // (X, Y) of each epoch
  Eigen::VectorXd best;
  double best_chi2 = std::numeric_limits<double>::infinity();
  for (int c = 0; c < kCandidates; ++c) {
    Eigen::VectorXd p = prior_draw(rng);
    const double e = p[kSqrtECos] * p[kSqrtECos] + p[kSqrtESin] * p[kSqrtESin], b = std::sqrt(1.0 - e * e);
    const double m_total = p[kHostMass] + std::exp(p[kLnMass]) / units::kMjupPerMsun;
    const double mean_anom = units::kTwoPi * rng.uniform();
    double a_au = std::exp(p[kLnA]), chi2 = 0.0;
    SkyElements sky{};
    bool ok = false;
    // Refit until the period that a implies no longer moves a (a fixed
    // point; a few passes where the arc constrains a, else the last one).
    for (int pass = 0; pass < 8; ++pass) {
      // Weighted least squares of x = A X + F Y and y = B X + G Y.
      const double period = period_from_a(a_au, m_total);
      Eigen::Matrix2d n = Eigen::Matrix2d::Zero();
      Eigen::Vector2d rx = Eigen::Vector2d::Zero(), ry = Eigen::Vector2d::Zero();
      for (std::size_t k = 0; k < t.size(); ++k) {
        const KeplerSolution ks = kepler_solution(mean_anom + units::kTwoPi * t[k] / period, e);
        f[k] = Eigen::Vector2d(ks.cos_E - e, b * ks.sin_E);
        n += f[k] * f[k].transpose() / s2[k];
        rx += f[k] * x[k] / s2[k];
        ry += f[k] * y[k] / s2[k];
      }
      const Eigen::FullPivLU<Eigen::Matrix2d> lu(n);
      ok = lu.isInvertible();
      if (!ok) break;
      const Eigen::Vector2d af = lu.solve(rx), bg = lu.solve(ry);
      chi2 = 0.0;
      for (std::size_t k = 0; k < t.size(); ++k)
        chi2 += (std::pow(x[k] - af.dot(f[k]), 2) + std::pow(y[k] - bg.dot(f[k]), 2)) / s2[k];
      sky = sky_elements_from_thiele_innes(af[0], bg[0], af[1], bg[1]);
      const double a_before = a_au;
      a_au = sky.a / p[kParallax];
      ok = std::isfinite(a_au) && a_au > 0;
      if (!ok || std::abs(a_au - a_before) < 1e-4 * a_au) break;
    }
    if (!ok || !(std::log(a_au) > ln_a_lo_ && std::log(a_au) < ln_a_hi_) || !(chi2 < best_chi2)) continue;
    const double root_e = std::sqrt(e);
    p[kLnA] = std::log(a_au);
    p[kSqrtECos] = root_e * std::cos(sky.arg_peri_rad);
    p[kSqrtESin] = root_e * std::sin(sky.arg_peri_rad);
    p[kCosInc] = std::cos(sky.inc_rad);
    p[kNode] = sky.node_rad;
    p[kLambda] = wrap_2pi(mean_anom + sky.arg_peri_rad + sky.node_rad);
    if (!std::isfinite(neg_log_post(p.data()))) continue;
    best = p;
    best_chi2 = chi2;
  }
  return best.size() > 0 ? best : prior_draw(rng);
}

Eigen::VectorXd FitModel::observable_draw(Rng& rng) const {
  std::vector<double> t, x, y, s2;
  imaged_positions(t, x, y, s2);
  // Weighted straight line through them, position at the phase epoch and
  // velocity, each drawn from its least-squares error; one epoch (or one
  // date) leaves the velocity to the bound below.
  double sw = 0, swt = 0, swtt = 0;
  for (std::size_t k = 0; k < t.size(); ++k) {
    sw += 1 / s2[k];
    swt += t[k] / s2[k];
    swtt += t[k] * t[k] / s2[k];
  }
  const double det = sw * swtt - swt * swt;
  const bool moving = t.size() >= 2 && det > 1e-12 * sw * sw;
  auto line = [&](const std::vector<double>& v, double& at, double& rate) {
    double swv = 0, swtv = 0;
    for (std::size_t k = 0; k < t.size(); ++k) {
      swv += v[k] / s2[k];
      swtv += t[k] * v[k] / s2[k];
    }
    if (!moving) {
      at = swv / sw + rng.normal() / std::sqrt(sw);
      rate = 0.0;
      return;
    }
    at = (swtt * swv - swt * swtv) / det + rng.normal() * std::sqrt(swtt / det);
    rate = (sw * swtv - swt * swv) / det + rng.normal() * std::sqrt(sw / det);
  };
  for (int tries = 0; tries < 200; ++tries) {
    Eigen::VectorXd u = prior_draw(rng);
    double x0, vx, y0, vy;
    line(x, x0, vx);
    line(y, y0, vy);
    // Speeds in mas/yr: a bound orbit has v^2 < 2 GM / r.
    const double plx = u[kParallax];
    const double gm_mas = units::kGMSunAu3Yr2 * (u[kHostMass] + std::exp(u[kLnMass]) / units::kMjupPerMsun) * plx * plx * plx;
    const double s = std::hypot(x0, y0), z = rng.uniform(-1.5, 1.5) * s, r = std::hypot(s, z);
    if (!moving) {
      const double v_proj = std::sqrt(gm_mas / r) * rng.uniform(), ang = units::kTwoPi * rng.uniform();
      vx = v_proj * std::cos(ang);
      vy = v_proj * std::sin(ang);
    }
    const double vz2_max = 2.0 * gm_mas / r - vx * vx - vy * vy;
    if (!(vz2_max > 0)) continue;
    const double state[6] = {x0, y0, z, vx, vy, std::sqrt(vz2_max) * rng.uniform(-0.95, 0.95)};
    for (int k = 0; k < 6; ++k) u[kLnA + k] = state[k];
    Eigen::VectorXd p(n_params());
    double log_jac;
    if (params_from_observables(*this, u.data(), p.data(), log_jac) && std::isfinite(neg_log_post(p.data()))) return p;
  }
  return prior_draw(rng);
}

OrbitDraw FitModel::orbit(const double* p) const {
  OrbitDraw d;
  d.mass_mjup = std::exp(p[kLnMass]);
  d.a_au = std::exp(p[kLnA]);
  d.ecc = p[kSqrtECos] * p[kSqrtECos] + p[kSqrtESin] * p[kSqrtESin];
  const double omega = d.ecc > 0 ? std::atan2(p[kSqrtESin], p[kSqrtECos]) : 0.0;
  d.inc_deg = units::rad_to_deg(std::acos(std::clamp(p[kCosInc], -1.0, 1.0)));
  d.arg_peri_deg = units::rad_to_deg(wrap_2pi(omega));
  d.node_deg = units::rad_to_deg(wrap_2pi(p[kNode]));
  d.mean_anom_deg = units::rad_to_deg(wrap_2pi(p[kLambda] - omega - p[kNode]));
  d.ref_epoch_yr = phase_epoch_yr_;
  d.host_mass_msun = p[kHostMass];
  d.period_yr = period_from_a(d.a_au, d.host_mass_msun + d.mass_mjup / units::kMjupPerMsun);
  d.parallax_mas = p[kParallax];
  d.weight = 1.0;
  return d;
}

std::vector<std::string> FitModel::param_names() const {
  std::vector<std::string> n = {"ln_mass_mjup", "ln_a_au", "sqrt_e_cos_omega", "sqrt_e_sin_omega", "cos_inc",
                                "node_rad",     "mean_longitude_rad", "host_mass_msun", "parallax_mas",
                                "pmra_mas_yr",  "pmdec_mas_yr"};
  for (const auto& s : instruments_) n.push_back("rv_offset_m_s:" + s);
  for (const auto& s : instruments_) n.push_back("ln_jitter_m_s:" + s);
  return n;
}

std::string fit_prior_help() {
  return "mass: " + mass_prior_help() +
         "; a log-uniform on [a_min, a_max]; e from --ecc; isotropic orientation (cos i, Omega, mean longitude "
         "uniform, omega uniform through sqrt(e) (cos, sin)); host mass from the star file (normal or "
         "log-normal); parallax normal (late catalogue value and error); barycentric PM and RV offsets "
         "uniform; RV jitter log-uniform on [jitter_min, jitter_max]";
}

// The Jets the fit differentiates with: the gradient objective's and the
// residual blocks' (fit_residuals.hpp).
#define HEFT_FIT_MODEL_INSTANTIATE(T)                                                                \
  template bool FitModel::evaluate<T>(const T*, T*, T&) const;                                    \
  template Orbit<T> FitModel::orbit_at<T>(const T*) const;                                        \
  template void FitModel::anomaly_residuals<T>(const Orbit<T>&, const T*, T[6]) const;            \
  template void FitModel::relative_residuals<T>(const Orbit<T>&, const T*, int, T[2]) const;      \
  template T FitModel::rv_residual<T>(const Orbit<T>&, const T*, int, T&) const;                  \
  template void FitModel::prior_residuals<T>(const T*, T[2], T&) const;
HEFT_FIT_MODEL_INSTANTIATE(double)
HEFT_FIT_MODEL_INSTANTIATE(FitJet)
HEFT_FIT_MODEL_INSTANTIATE(StrideJet)
#undef HEFT_FIT_MODEL_INSTANTIATE

}  // namespace heft
