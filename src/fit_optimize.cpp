#include "heft/fit_optimize.hpp"

#include <ceres/ceres.h>

#include <Eigen/Cholesky>
#include <Eigen/Eigenvalues>
#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>

#include "heft/angles.hpp"

namespace heft {

const std::vector<std::string>& derived_names() {
  static const std::vector<std::string> n = {"mass_mjup", "a_au", "ecc", "period_yr", "inc_deg"};
  return n;
}

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
using Jet = FitJet;

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
    add_residual_blocks(problem, m, pinned, p);
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
    if (pinned.contains(i)) continue;
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
  add_residual_blocks(problem, m, none, p);
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

}  // namespace

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
  // With imaging, a third of the starts from the observables (they find the
  // basins of short arcs), a third through the imaged positions by
  // Thiele-Innes constants (curved arcs), a third from the prior (the rest
  // of the space).
  for (int k = 0; k < n; ++k) {
    if (!m.has_relative() || k % 3 == 2)
      s.push_back(m.prior_draw(rng));
    else
      s.push_back(k % 3 == 0 ? m.observable_draw(rng) : m.thiele_innes_draw(rng));
  }
  return s;
}

void finish_minimum(const FitModel& m, FitMinimum& mn) {
  covariance_at(m, mn);
  derive(mn);
}

double distance2_to_minimum(const Eigen::VectorXd& p, const Eigen::VectorXd& at, const Eigen::MatrixXd& chol, int nc) {
  Eigen::VectorXd d = (p - at).head(nc);
  d[kNode] = wrap_pi(d[kNode]);
  d[kLambda] = wrap_pi(d[kLambda]);
  return chol.triangularView<Eigen::Lower>().solve(d).squaredNorm();
}

std::vector<FitMinimum> merge_minima(const FitModel& m, std::vector<FitMinimum> minima) {
  const int nc = kFitCore + m.n_instruments();
  std::vector<FitMinimum> out;
  std::vector<Eigen::MatrixXd> chol;  // of the kept minima's covariances (empty: none)
  for (auto& mn : minima) {
    bool merged = false;
    for (std::size_t k = 0; k < out.size() && !merged; ++k) {
      if (chol[k].size() == 0) continue;
      if (distance2_to_minimum(mn.p, out[k].p, chol[k], nc) < kSameMinimumMahalanobis2) {
        out[k].hits += mn.hits;
        merged = true;
      }
    }
    if (merged) continue;
    Eigen::MatrixXd L;
    if (mn.covariance_ok) {
      const Eigen::LLT<Eigen::MatrixXd> llt(mn.cov.topLeftCorner(nc, nc));
      if (llt.info() == Eigen::Success) L = llt.matrixL();
    }
    chol.push_back(L);
    out.push_back(std::move(mn));
  }
  return out;
}

}  // namespace heft
