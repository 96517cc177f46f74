#include "heft/kepler.hpp"

#include <algorithm>

namespace heft {
namespace {
// Reduces M to [0, pi] by periodicity and symmetry; returns the turn offset
// and sign so that E = offset + sign * E_reduced.
inline double reduce(double M, double& offset, double& sign) {
  offset = units::kTwoPi * std::floor(M / units::kTwoPi);
  double m = M - offset;  // [0, 2 pi)
  sign = 1.0;
  if (m > units::kPi) {
    m = units::kTwoPi - m;
    offset += units::kTwoPi;
    sign = -1.0;
  }
  return m;
}

// Newton on f(E) = E - e sin E - m on the bracket [lo, hi] with bisection
// whenever a step leaves it; f is increasing.
inline double polish(double E, double m, double e, double lo, double hi) {
  for (int it = 0; it < 100; ++it) {
    const double s = std::sin(E), c = std::cos(E);
    const double f = E - e * s - m;
    if (f > 0) hi = std::min(hi, E); else lo = std::max(lo, E);
    const double fp = 1.0 - e * c;
    double next = E - f / fp;
    if (!(next >= lo && next <= hi)) next = 0.5 * (lo + hi);
    // Quadratic convergence: once a step is below 1e-13 the error after it is ~1e-24.
    if (std::abs(next - E) <= 1e-13) return next;
    E = next;
  }
  return E;
}
}  // namespace

double solve_kepler(double M, double e) {
  double offset, sign;
  const double m = reduce(M, offset, sign);
  // E lies in [m, m + e] on [0, pi]; the starter of Danby (1987) with the
  // cube-root form near periastron for high e.
  double E0 = m + 0.85 * e;
  if (e > 0.8 && m < 0.3) E0 = std::cbrt(6.0 * m);
  E0 = std::clamp(E0, m, std::min(units::kPi, m + e));
  return offset + sign * polish(E0, m, e, m, std::min(units::kPi, m + e));
}

KeplerSolver::KeplerSolver(double ecc, int n)
    : e_(ecc), h_(units::kPi / n), E_(n + 1), dE_(n + 1), sin_(n + 1), cos_(n + 1) {
  for (int k = 0; k <= n; ++k) {
    E_[k] = solve_kepler(k * h_, e_);
    sin_[k] = std::sin(E_[k]);
    cos_[k] = std::cos(E_[k]);
    dE_[k] = 1.0 / (1.0 - e_ * cos_[k]);
  }
}

double KeplerSolver::operator()(double M) const {
  double offset, sign;
  const double m = reduce(M, offset, sign);
  const int n = static_cast<int>(E_.size()) - 1;
  const double inv_h = 1.0 / h_;  // constant: the compiler hoists it out of loops
  const int k = std::min(n - 1, static_cast<int>(m * inv_h));
  // Cubic Hermite interpolation in the panel [k h, (k+1) h].
  const double t = m * inv_h - k, t2 = t * t, t3 = t2 * t;
  double E = (2 * t3 - 3 * t2 + 1) * E_[k] + (t3 - 2 * t2 + t) * h_ * dE_[k] +
             (-2 * t3 + 3 * t2) * E_[k + 1] + (t3 - t2) * h_ * dE_[k + 1];
  // One Halley step (cubic convergence) polishes the interpolant to machine
  // precision where the table is fine enough; the safeguarded Newton loop
  // takes over only where it is not (high e next to periastron).
  // sin E, cos E from the node's values and the Taylor series of the offset
  // d = E - E_k (|d| < 0.3 rad even next to periastron at e = 0.99; terms to
  // d^13 and d^14 leave < 1e-17): no libm call on the hot path.
  const double d = E - E_[k], d2 = d * d;
  const double sd =
      d * (1 - d2 / 6 * (1 - d2 / 20 * (1 - d2 / 42 * (1 - d2 / 72 * (1 - d2 / 110 * (1 - d2 / 156))))));
  const double cd =
      1 - d2 / 2 * (1 - d2 / 12 * (1 - d2 / 30 * (1 - d2 / 56 * (1 - d2 / 90 * (1 - d2 / 132 * (1 - d2 / 182))))));
  const double s = sin_[k] * cd + cos_[k] * sd, c = cos_[k] * cd - sin_[k] * sd;
  const double f = E - e_ * s - m, fp = 1.0 - e_ * c;
  const double step = f * fp / (fp * fp - 0.5 * f * e_ * s);  // Halley, one division
  E -= step;
  if (std::abs(step) > 1e-6) E = polish(E, m, e_, E_[k], E_[k + 1]);
  return offset + sign * E;
}

void KeplerSolver::solve(const double* M, double* E, std::size_t n) const {
  for (std::size_t i = 0; i < n; ++i) E[i] = (*this)(M[i]);
}

}  // namespace heft
