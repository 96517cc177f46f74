#include "heft/fit.hpp"

#include <ceres/ceres.h>

#include <Eigen/Cholesky>
#include <Eigen/Eigenvalues>
#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>

#include "heft/angles.hpp"
#include "heft/error.hpp"
#include "heft/kepler.hpp"
#include "heft/rng.hpp"
#include "heft/window.hpp"

namespace heft {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
using Jet = ceres::Jet<double, kMaxFitParams>;

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
  upper_limit_ = rel_.empty() && !(r.sig_joint >= opt.detect_sigma);
  // Upper limits: uniform in mass on (0, m_max], truncated at 1e-4 m_max.
  ln_m_lo_ = std::log(upper_limit_ ? 1e-4 * opt.m_max_mjup : opt.m_min_mjup);
  ln_m_hi_ = std::log(opt.m_max_mjup);
  ln_a_lo_ = std::log(opt.a_min_au);
  ln_a_hi_ = std::log(opt.a_max_au);
  ecc_max_ = 0.99;
  if (opt.ecc.kind == Distribution::Kind::kUniform || opt.ecc.kind == Distribution::Kind::kLogUniform)
    ecc_max_ = std::min(ecc_max_, opt.ecc.p2);
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
T FitModel::rv_residual(const Orbit<T>& o, const T& a, const T& q, const T* p, const RvPoint& v, T& extra) const {
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
    const double r = rv_residual(o, d.a_au, q, p.data(), v, extra);  // offset 0
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
    const double r = rv_residual(o, std::exp(p[kLnA]), q, p, v, extra);
    chi2 += r * r;
  }
  return 0.5 * chi2 + extra;
}

template <typename T>
bool FitModel::evaluate(const T* p, T* r, T& extra) const {
  using std::exp;
  using std::log;
  using std::sqrt;
  const double lnm = scalar_of(p[kLnMass]), lna = scalar_of(p[kLnA]);
  const double h = scalar_of(p[kSqrtECos]), k = scalar_of(p[kSqrtESin]), ci = scalar_of(p[kCosInc]);
  if (!(lnm >= ln_m_lo_ && lnm <= ln_m_hi_ && lna >= ln_a_lo_ && lna <= ln_a_hi_)) return false;
  if (!(h * h + k * k < ecc_max_ && std::abs(ci) < 1.0)) return false;
  if (!(scalar_of(p[kHostMass]) > 0.0 && scalar_of(p[kParallax]) > 0.0)) return false;
  for (int j = 0; j < n_inst_; ++j) {
    const double lj = scalar_of(p[kFitCore + n_inst_ + j]);
    if (!(lj >= std::log(opt_.jitter_min_m_s) && lj <= std::log(opt_.jitter_max_m_s))) return false;
  }
  const T m1 = p[kHostMass], m2 = exp(p[kLnMass]) / T(units::kMjupPerMsun), q = m2 / (m1 + m2);
  const T a = exp(p[kLnA]), plx = p[kParallax], e = p[kSqrtECos] * p[kSqrtECos] + p[kSqrtESin] * p[kSqrtESin];
  const Orbit<T> o = orbit_at(p);
  T y[6];
  model_pm(o, a, q, plx, p[kPmra], p[kPmdec], y);
  int n = 0;
  for (int i = 0; i < 6; ++i) {
    T s(0.0);
    for (int j = 0; j <= i; ++j) s += T(pm_whiten_(i, j)) * (y[j] - T(pm_obs_(j)));
    r[n++] = s;
  }
  // Relative astrometry: the companion's offset from the host.
  for (const auto& ep : rel_) {
    const OrbitPoint<T> op = orbit_point(o, ep.epoch_yr);
    const T north = a * plx * op.x, east = a * plx * op.y;
    T d1, d2;
    if (ep.polar) {
      T sep, pa;
      separation_pa(north, east, sep, pa);
      d1 = (sep - T(ep.v1)) / T(ep.e1);
      const T dpa = pa - T(units::deg_to_rad(ep.v2));
      d2 = (dpa - T(units::kTwoPi * std::round(scalar_of(dpa) / units::kTwoPi))) /
           T(units::deg_to_rad(ep.e2));
    } else {
      d1 = (east - T(ep.v1)) / T(ep.e1);
      d2 = (north - T(ep.v2)) / T(ep.e2);
    }
    r[n++] = d1;
    r[n++] = (d2 - T(ep.corr) * d1) / T(std::sqrt(1.0 - ep.corr * ep.corr));
  }
  // Radial velocities of the host with per-instrument offset and jitter:
  // -ln L has the log-normaliser ln sqrt(sigma^2 + s^2), which is not a square.
  for (const auto& v : rv_) r[n++] = rv_residual(o, a, q, p, v, extra);
  // Priors: host mass, catalogue parallax, eccentricity, and for upper
  // limits the uniform-in-mass prior (density m in ln m).
  if (host_.kind == HostMassPrior::Kind::kNormal) {
    r[n++] = (m1 - T(host_.center_msun)) / T(host_.width);
  } else {
    r[n++] = (log(m1) / T(std::log(10.0)) - T(std::log10(host_.center_msun))) / T(host_.width);
    extra += log(m1);
  }
  r[n++] = (plx - T(plx_cat_)) / T(plx_sigma_);
  extra -= ecc_log_prior(opt_.ecc, e);
  if (upper_limit_) extra -= p[kLnMass];
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
  do e = opt_.ecc.draw(rng); while (!(e >= 0.0 && e < ecc_max_));
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

const std::vector<std::string>& derived_names() {
  static const std::vector<std::string> n = {"mass_mjup", "a_au", "ecc", "period_yr", "inc_deg"};
  return n;
}

namespace {

// Parameters held fixed (the profile's a and mass) by index.
struct Pinned {
  std::vector<int> index;
  std::vector<double> value;
  template <typename T>
  void apply(T* p) const {
    for (std::size_t k = 0; k < index.size(); ++k) p[index[k]] = T(value[k]);
  }
};

// Residuals for Ceres' least-squares solver; blocks: core + offsets, jitters.
struct LsqFunctor {
  const FitModel* model;
  const Pinned* pinned;
  template <typename T>
  bool operator()(T const* const* blocks, T* r) const {
    const int nc = kFitCore + model->n_instruments();
    T p[kMaxFitParams];
    for (int i = 0; i < nc; ++i) p[i] = blocks[0][i];
    for (int i = nc; i < model->n_params(); ++i) p[i] = blocks[1][i - nc];
    pinned->apply(p);
    T extra(0.0);
    return model->evaluate(p, r, extra);
  }
};

// The full negative log posterior over the free parameters, scaled:
// p[free[i]] = base[free[i]] + scale[i] u[i]. Derivatives by Ceres Jets.
class Objective final : public ceres::FirstOrderFunction {
 public:
  Objective(const FitModel& m, const Eigen::VectorXd& base, std::vector<int> free, std::vector<double> scale)
      : m_(m), base_(base), free_(std::move(free)), scale_(std::move(scale)) {}
  int NumParameters() const override { return static_cast<int>(free_.size()); }
  bool Evaluate(const double* u, double* cost, double* grad) const override {
    std::vector<Jet> p(m_.n_params()), r(m_.n_residuals());
    for (int i = 0; i < m_.n_params(); ++i) p[i] = Jet(base_[i]);
    for (std::size_t i = 0; i < free_.size(); ++i) p[free_[i]] = Jet(base_[free_[i]] + scale_[i] * u[i], static_cast<int>(i));
    Jet extra(0.0);
    if (!m_.evaluate(p.data(), r.data(), extra)) return false;
    Jet f = extra;
    for (const Jet& v : r) f += 0.5 * v * v;
    *cost = f.a;
    if (grad)
      for (std::size_t i = 0; i < free_.size(); ++i) grad[i] = f.v[i];
    return std::isfinite(f.a);
  }
  Eigen::VectorXd point(const double* u) const {
    Eigen::VectorXd p = base_;
    for (std::size_t i = 0; i < free_.size(); ++i) p[free_[i]] += scale_[i] * u[i];
    return p;
  }

 private:
  const FitModel& m_;
  Eigen::VectorXd base_;
  std::vector<int> free_;
  std::vector<double> scale_;
};

// The whitened residuals of `m` at p as a Ceres problem: block 1 the core
// and RV offsets, block 2 the ln jitters, held constant.
void add_residuals(ceres::Problem& problem, const FitModel& m, const Pinned& pinned, Eigen::VectorXd& p) {
  const int nc = kFitCore + m.n_instruments(), nj = m.n_instruments();
  auto* cost = new ceres::DynamicAutoDiffCostFunction<LsqFunctor, 4>(new LsqFunctor{&m, &pinned});
  cost->AddParameterBlock(nc);
  if (nj > 0) cost->AddParameterBlock(nj);
  cost->SetNumResiduals(m.n_residuals());
  std::vector<double*> blocks = {p.data()};
  if (nj > 0) blocks.push_back(p.data() + nc);
  problem.AddResidualBlock(cost, nullptr, blocks);
  if (nj > 0) problem.SetParameterBlockConstant(p.data() + nc);
}

struct Local {
  Eigen::VectorXd p;
  double f = kInf;
  bool converged = false;
};

// One start: Levenberg-Marquardt on the residuals with the jitters held
// fixed, then L-BFGS on the whole negative log posterior.
Local minimise(const FitModel& m, Eigen::VectorXd p, const Pinned& pinned) {
  pinned.apply(p.data());
  Local out;
  if (!std::isfinite(m.neg_log_post(p.data()))) return out;
  {
    ceres::Problem::Options popt;
    ceres::Problem problem(popt);
    add_residuals(problem, m, pinned, p);
    problem.SetParameterLowerBound(p.data(), kCosInc, -1.0 + 1e-9);
    problem.SetParameterUpperBound(p.data(), kCosInc, 1.0 - 1e-9);
    ceres::Solver::Options so;
    so.logging_type = ceres::SILENT;
    so.max_num_iterations = 200;
    so.num_threads = 1;
    so.function_tolerance = 1e-10;
    so.parameter_tolerance = 1e-10;
    ceres::Solver::Summary sum;
    ceres::Solve(so, &problem, &sum);
  }
  std::vector<int> free;
  std::vector<double> scale;
  for (int i = 0; i < m.n_params(); ++i) {
    if (std::find(pinned.index.begin(), pinned.index.end(), i) != pinned.index.end()) continue;
    free.push_back(i);
    scale.push_back(1.0);
  }
  // Scale the gradient problem by the curvature of the residuals, so that
  // L-BFGS sees unit-free, comparable parameters.
  {
    std::vector<Jet> pj(m.n_params()), r(m.n_residuals());
    for (int i = 0; i < m.n_params(); ++i) pj[i] = Jet(p[i]);
    for (std::size_t i = 0; i < free.size(); ++i) pj[free[i]] = Jet(p[free[i]], static_cast<int>(i));
    Jet extra(0.0);
    if (m.evaluate(pj.data(), r.data(), extra))
      for (std::size_t i = 0; i < free.size(); ++i) {
        double c = 0.0;
        for (const Jet& v : r) c += v.v[i] * v.v[i];
        if (c > 0 && std::isfinite(c)) scale[i] = std::min(1.0, 1.0 / std::sqrt(c));
      }
  }
  auto* obj = new Objective(m, p, free, scale);
  ceres::GradientProblem gp(obj);
  std::vector<double> u(free.size(), 0.0);
  ceres::GradientProblemSolver::Options go;
  go.logging_type = ceres::SILENT;
  go.max_num_iterations = 500;
  go.function_tolerance = 1e-12;
  go.gradient_tolerance = 1e-9;
  go.parameter_tolerance = 1e-12;
  ceres::GradientProblemSolver::Summary gs;
  ceres::Solve(go, gp, u.data(), &gs);
  out.p = obj->point(u.data());
  out.f = m.neg_log_post(out.p.data());
  out.converged = std::isfinite(out.f) && gs.termination_type == ceres::CONVERGENCE;
  return out;
}

// Ceres covariance of the core parameters and offsets at a minimum (jitters
// held at their values); flags instead of failing.
void covariance_at(const FitModel& m, FitMinimum& mn) {
  const int nc = kFitCore + m.n_instruments();
  Eigen::VectorXd p = mn.p;
  const Pinned none;
  ceres::Problem problem;
  add_residuals(problem, m, none, p);
  ceres::Covariance::Options co;
  co.algorithm_type = ceres::DENSE_SVD;
  co.null_space_rank = 0;
  // The parameters span many decades of scale (mas/yr against radians), so
  // the conditioning threshold is set near double precision; true
  // degeneracies (e.g. no relative astrometry) fall far below it and are
  // flagged, and the result is checked to be positive definite below.
  co.min_reciprocal_condition_number = 1e-17;
  ceres::Covariance cov(co);
  const std::vector<std::pair<const double*, const double*>> pairs = {{p.data(), p.data()}};
  Eigen::MatrixXd c(nc, nc);
  if (!cov.Compute(pairs, &problem) || !cov.GetCovarianceBlock(p.data(), p.data(), c.data())) {
    mn.flag = "covariance_degenerate";
    return;
  }
  c = 0.5 * (c + c.transpose()).eval();  // column- vs row-major: symmetric either way
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> es(c);
  if (!c.allFinite() || es.eigenvalues().minCoeff() <= 0) {
    mn.flag = "covariance_degenerate";
    return;
  }
  mn.cov = c;
  mn.covariance_ok = true;
}

// Derived values (mass, a, e, P, i) and their linearised errors by Jets.
void derive(FitMinimum& mn) {
  using J = ceres::Jet<double, kFitCore>;
  J p[kFitCore];
  for (int i = 0; i < kFitCore; ++i) p[i] = J(mn.p[i], i);
  const J mass = exp(p[kLnMass]), a = exp(p[kLnA]);
  const J e = p[kSqrtECos] * p[kSqrtECos] + p[kSqrtESin] * p[kSqrtESin];
  const J per = period_from_a(a, p[kHostMass] + mass / units::kMjupPerMsun);
  const J inc = acos(p[kCosInc]) * units::kDegPerRad;
  const J d[5] = {mass, a, e, per, inc};
  for (int k = 0; k < 5; ++k) {
    mn.derived[k] = d[k].a;
    mn.derived_sigma[k] = kAbsent;
    if (mn.covariance_ok) {
      const Eigen::Matrix<double, kFitCore, 1> g = d[k].v;
      mn.derived_sigma[k] = std::sqrt(g.dot(mn.cov.topLeftCorner<kFitCore, kFitCore>() * g));
    }
  }
}

bool same_minimum(const FitMinimum& a, const Eigen::VectorXd& p, double m2lnpost) {
  if (std::abs(a.m2lnpost - m2lnpost) > 0.02) return false;
  for (int i : {kLnMass, kLnA, kSqrtECos, kSqrtESin, kCosInc})
    if (std::abs(a.p[i] - p[i]) > 0.01) return false;
  for (int i : {kNode, kLambda})
    if (std::abs(wrap_pi(a.p[i] - p[i])) > 0.02) return false;
  return true;
}

std::vector<FitMinimum> find_minima(const FitModel& m, const Pinned& pinned,
                                    const std::vector<Eigen::VectorXd>& starts) {
  std::vector<Local> loc(starts.size());
#pragma omp parallel for schedule(dynamic)
  for (std::size_t s = 0; s < starts.size(); ++s) loc[s] = minimise(m, starts[s], pinned);
  std::vector<std::size_t> order(loc.size());
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](std::size_t x, std::size_t y) { return loc[x].f < loc[y].f; });
  std::vector<FitMinimum> out;
  for (std::size_t s : order) {
    if (!std::isfinite(loc[s].f)) continue;
    double m2lnl = 0.0;
    const double m2lnpost = 2.0 * m.neg_log_post(loc[s].p.data(), &m2lnl);
    bool merged = false;
    for (auto& mn : out)
      if (same_minimum(mn, loc[s].p, m2lnpost)) {
        ++mn.hits;
        merged = true;
        break;
      }
    if (merged) continue;
    FitMinimum mn;
    mn.p = loc[s].p;
    mn.m2lnl = m2lnl;
    mn.m2lnpost = m2lnpost;
    out.push_back(std::move(mn));
  }
  return out;
}

std::vector<Eigen::VectorXd> draw_starts(const FitModel& m, int n, Rng& rng) {
  std::vector<Eigen::VectorXd> s;
  for (int k = 0; k < n; ++k) s.push_back(m.prior_draw(rng));
  return s;
}

// Walkers without relative astrometry: heft curve's Monte Carlo posterior
// over the whole prior (the same anomaly model), reweighted by the RV
// likelihood, picked without replacement by the keys u^(1/w) (Efraimidis &
// Spirakis 2006, Inf. Process. Lett. 97, 181), so that separated modes
// enter with their posterior weights. `ess` is the pool's effective size.
Eigen::MatrixXd walkers_from_curve(const FitModel& m, int walkers, Rng& rng, const std::string& rng_id, double& ess) {
  const FitOptions& fo = m.options();
  CurveOptions co;
  co.a_au = log_grid(fo.a_min_au, fo.a_max_au, 24);
  co.draws = 1024;
  co.ecc = fo.ecc;
  co.m_min_mjup = fo.m_min_mjup;
  co.m_max_mjup = fo.m_max_mjup;
  co.detect_sigma = fo.detect_sigma;
  co.refine_rounds = 1;
  co.seed = rng.next();
  co.keep_draws = true;
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

// The mirror orbit (omega + pi, Omega + pi; the mean longitude is unchanged):
// the same sky motion with the line of sight reversed, so without RVs the
// same likelihood.
Eigen::VectorXd mirror(Eigen::VectorXd p) {
  p[kSqrtECos] = -p[kSqrtECos];
  p[kSqrtESin] = -p[kSqrtESin];
  p[kNode] = wrap_2pi(p[kNode] + units::kPi);
  return p;
}

// Starts with relative astrometry: the minima are the modes (a minimum
// within a Mahalanobis distance of 3 of a better one is the same mode; the
// mirror orbit with omega + pi, Omega + pi is a separate mode of equal
// likelihood without RVs, sampled once with half its samples mirrored).
// Each mode keeps its Laplace evidence
// exp(-nlp) sqrt(det C) (e.g. MacKay 2003, Information Theory, Inference and
// Learning Algorithms, ch. 27) as its posterior weight and gets an ensemble
// of its own, started from N(p, C / 4) in the core and +-0.1 in the ln
// jitters: walkers of this sampler do not cross between modes, and pairing
// walkers of different modes would only waste moves. Modes whose evidence
// is below kMinModeEvidenceRatio of the strongest's are dropped, at most
// kMaxModes are kept (docs/method.md, Sect. 9).
std::vector<std::pair<Eigen::MatrixXd, ModeStart>> mode_starts(const FitModel& m, const std::vector<FitMinimum>& minima,
                                                               int walkers, Rng& rng) {
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
    bool same = false;
    for (auto& x : ms) {
      auto near = [&](const Eigen::VectorXd& q) {
        Eigen::VectorXd d = (q - x.mn->p).head(nc);
        d[kNode] = wrap_pi(d[kNode]);
        d[kLambda] = wrap_pi(d[kLambda]);
        return x.chol.triangularView<Eigen::Lower>().solve(d).squaredNorm() < 9.0;
      };
      if (near(mn.p)) {
        same = true;
      } else if (symmetric && !x.mirrored && near(mirror(mn.p))) {
        // The mirror of a mode: sampled once, half its samples mirrored.
        x.log_z += std::log1p(std::exp(log_z - x.log_z));
        x.mirrored = same = true;
      }
      if (same) break;
    }
    if (same) continue;
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
  std::vector<std::pair<Eigen::MatrixXd, ModeStart>> out;
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

}  // namespace

FitResult run_fit(const FitModel& m, const FitOptions& opt, const std::string& rng_id) {
  FitResult res;
  res.upper_limit = m.upper_limit();
  Rng rng = Rng::for_star(opt.seed, rng_id);
  const Pinned none;
  res.minima = find_minima(m, none, draw_starts(m, opt.starts, rng));
  if (res.minima.empty()) throw NumericError(rng_id, "fit", "no start reached a finite posterior");
  for (auto& mn : res.minima) {
    covariance_at(m, mn);
    derive(mn);
  }
  if (!opt.sample) return res;
  Rng srng = Rng::for_star(opt.seed ^ 0x5a3c9e1fULL, rng_id);
  std::vector<std::pair<Eigen::MatrixXd, ModeStart>> starts;
  if (m.has_relative())
    starts = mode_starts(m, res.minima, opt.walkers, srng);
  else
    starts.push_back({walkers_from_curve(m, opt.walkers, srng, rng_id, res.init_ess), {0.0, 1.0, opt.walkers}});
  // One ensemble per mode, pooled with the modes' weights.
  std::vector<double>& weight = res.sample_weight;
  for (auto& [start, mode] : starts) {
    // Omega and the mean longitude are periodic. Around an imaged mode the
    // walkers are confined to one turn centred on it, so that they cannot
    // spread over the copies of the mode. Without imaging the walkers start
    // as posterior draws spread over the whole circle and stay unconfined:
    // walls would cut the (Omega, lambda) ridges of that posterior into
    // pieces (measured: the 95 % upper limit fell from 67 to 35 MJup against
    // heft curve's 61 in tests/fit_test.cpp).
    const bool confine = m.has_relative();
    const double c_node = start(kNode, 0), c_lambda = start(kLambda, 0);
    if (confine)
      for (Eigen::Index k = 0; k < start.cols(); ++k) {
        start(kNode, k) = c_node + wrap_pi(start(kNode, k) - c_node);
        start(kLambda, k) = c_lambda + wrap_pi(start(kLambda, k) - c_lambda);
      }
    auto log_prob = [&m, confine, c_node, c_lambda](const double* p) {
      if (confine && !(std::abs(p[kNode] - c_node) < units::kPi && std::abs(p[kLambda] - c_lambda) < units::kPi))
        return -kInf;
      return -m.neg_log_post(p);
    };
    EnsembleOptions eo = opt.sampler;
    eo.seed = srng.next();
    eo.rescue = m.has_relative();  // heft curve's draws already follow the posterior
    EnsembleChain c = run_ensemble(log_prob, start, eo);
    if (mode.mirrored)
      for (Eigen::Index k = 1; k < c.samples.rows(); k += 2) {
        const Eigen::VectorXd q = mirror(c.samples.row(k).transpose());
        c.samples.row(k) = q.transpose();
      }
    const Eigen::Index rows0 = res.chain.samples.rows();
    if (rows0 == 0) {
      res.chain = c;
      res.chain.acceptance = 0.0;
    } else {
      res.chain.samples.conservativeResize(rows0 + c.samples.rows(), Eigen::NoChange);
      res.chain.samples.bottomRows(c.samples.rows()) = c.samples;
      res.chain.log_prob.insert(res.chain.log_prob.end(), c.log_prob.begin(), c.log_prob.end());
      for (std::size_t i = 0; i < c.iat_steps.size(); ++i)
        res.chain.iat_steps[i] = std::max(res.chain.iat_steps[i], c.iat_steps[i]);
    }
    res.chain.acceptance += mode.weight * c.acceptance;
    weight.insert(weight.end(), c.samples.rows(), mode.weight / c.samples.rows());
    res.modes.push_back(mode);
  }
  res.sampled = true;
  const double tau = *std::max_element(res.chain.iat_steps.begin(), res.chain.iat_steps.end());
  if (!(opt.sampler.steps >= 50.0 * tau))
    res.warnings.push_back("chain shorter than 50 autocorrelation times (max tau " +
                           std::to_string(static_cast<long>(std::ceil(tau))) + " steps); raise --steps");
  if (!m.has_relative() && res.init_ess < opt.walkers)
    res.warnings.push_back("importance draws for the walkers have effective size " +
                           std::to_string(static_cast<long>(res.init_ess)) + " < walkers; mode weights are uncertain");
  if (m.has_relative() && std::none_of(res.minima.begin(), res.minima.end(), [](const FitMinimum& x) { return x.covariance_ok; }))
    res.warnings.push_back("no minimum has a usable covariance: walkers start in a small ball at the best one");
  return res;
}

Curve profile_curve(const FitModel& m, const std::vector<double>& a_au, const FitOptions& opt,
                    const std::string& rng_id) {
  Curve c;
  c.upper_limit = m.upper_limit();
  Rng rng = Rng::for_star(opt.seed, rng_id);
  std::vector<double> best(a_au.size(), kInf);
  const int n_starts = std::max(4, opt.starts / 4);
  // Continuation: every a also starts from the global best and from the
  // previous a's best, so that the profile follows its valley.
  const auto global = find_minima(m, Pinned{}, draw_starts(m, opt.starts, rng));
  Eigen::VectorXd previous = global.empty() ? m.prior_draw(rng) : global.front().p;
  for (std::size_t ia = 0; ia < a_au.size(); ++ia) {
    const double lna = std::log(a_au[ia]);
    // Best mass at this a: minimise over everything but a.
    const Pinned at_a{{kLnA}, {lna}};
    std::vector<Eigen::VectorXd> starts = draw_starts(m, n_starts, rng);
    starts.push_back(previous);
    if (!global.empty()) starts.push_back(global.front().p);
    const auto mins = find_minima(m, at_a, starts);
    if (!mins.empty()) previous = mins.front().p;
    CurvePoint pt{};
    pt.a_au = a_au[ia];
    pt.mass_lo95 = pt.mass_lo68 = pt.mass_med = pt.mass_hi68 = pt.mass_hi95 = kAbsent;
    pt.ess = kAbsent;
    if (!mins.empty()) {
      const FitMinimum& b = mins.front();
      double m2lnl_best = b.m2lnl;
      best[ia] = m2lnl_best;
      const OrbitDraw o = m.orbit(b.p.data());
      pt.sep_mas = a_au[ia] * o.parallax_mas;
      pt.period_yr = o.period_yr;
      pt.mass_med = o.mass_mjup;
      // Walk out in ln mass from the best, warm-started, until -2 ln L has
      // risen by 3.84 or the prior bound is reached; crossings by linear
      // interpolation in ln mass.
      for (int dir : {-1, 1}) {
        const double step = 0.1 * dir;
        const double bound = dir < 0 ? std::log(m.mass_floor_mjup()) : std::log(opt.m_max_mjup);
        double x_prev = std::log(o.mass_mjup), d_prev = 0.0;
        Eigen::VectorXd warm = b.p;
        double cross68 = kAbsent, cross95 = kAbsent;
        for (int it = 0; it < 200; ++it) {
          double x = x_prev + step;
          if ((x - bound) * dir > 0) x = bound;
          const Pinned pin{{kLnA, kLnMass}, {lna, x}};
          std::vector<Eigen::VectorXd> st = {warm};
          for (int k = 0; k < 3; ++k) st.push_back(m.prior_draw(rng));
          const auto mm = find_minima(m, pin, st);
          if (mm.empty()) break;
          const double dchi = mm.front().m2lnl - m2lnl_best;
          warm = mm.front().p;
          auto cross = [&](double level, double& out) {
            if (present(out) || !(dchi >= level)) return;
            out = std::exp(x_prev + (x - x_prev) * (level - d_prev) / (dchi - d_prev));
          };
          cross(1.0, cross68);
          cross(3.84, cross95);
          x_prev = x;
          d_prev = std::max(dchi, d_prev);
          if (present(cross95) || x == bound) break;
        }
        (dir < 0 ? pt.mass_lo68 : pt.mass_hi68) = cross68;
        (dir < 0 ? pt.mass_lo95 : pt.mass_hi95) = cross95;
      }
    }
    c.points.push_back(pt);
  }
  const double mn = *std::min_element(best.begin(), best.end());
  double sw = 0.0;
  for (std::size_t k = 0; k < best.size(); ++k) sw += std::isfinite(best[k]) ? std::exp(-0.5 * (best[k] - mn)) : 0.0;
  for (std::size_t k = 0; k < best.size(); ++k)
    c.points[k].weight = std::isfinite(best[k]) && sw > 0 ? std::exp(-0.5 * (best[k] - mn)) / sw : 0.0;
  return c;
}

}  // namespace heft
