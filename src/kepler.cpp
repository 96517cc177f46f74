#include "heft/kepler.hpp"

#include <algorithm>
#include <cmath>

namespace heft {
namespace {
// Taylor coefficients (-1)^k / (2k + 1)! of sin and (-1)^k / (2k)! of cos,
// k = 0 ... 11: on |x| <= pi/2 + 0.1 the truncation is below 2e-17.
struct Series {
  double sin_c[12], cos_c[12];
};
constexpr Series make_series() {
  Series t{};
  double fact = 1.0;  // (2k)!
  for (int k = 0; k < 12; ++k) {
    if (k > 0) fact *= (2.0 * k - 1.0) * (2.0 * k);
    const double sgn = k % 2 == 0 ? 1.0 : -1.0;
    t.cos_c[k] = sgn / fact;
    t.sin_c[k] = sgn / (fact * (2.0 * k + 1.0));
  }
  return t;
}
constexpr Series kSeries = make_series();

// sum_{k >= first} c[k] x2^(k - first) by Horner's rule (no division, no libm call).
inline double horner(const double (&c)[12], int first, double x2) {
  double acc = c[11];
  for (int k = 10; k >= first; --k) acc = acc * x2 + c[k];
  return acc;
}

inline void sincos_poly(double x, double& s, double& c) {
  const double x2 = x * x;
  s = x * horner(kSeries.sin_c, 0, x2);
  c = horner(kSeries.cos_c, 0, x2);
}

// E - sin E and 1 - cos E for |E| < 1 by their series: next to periastron at
// e -> 1 Kepler's equation is E (1 - e) + e (E - sin E) = M, and the
// differences taken directly would lose all but a few digits.
inline double e_minus_sin(double E) { return -E * (E * E) * horner(kSeries.sin_c, 1, E * E); }
inline double one_minus_cos(double E) { return -(E * E) * horner(kSeries.cos_c, 1, E * E); }

// pi and 2 pi as a double plus the rest (Cody-Waite): reductions next to
// periastron keep the digits of a small mean anomaly.
constexpr double kPiHi = 3.141592653589793116, kPiLo = 1.2246467991473532e-16;

// sin E, cos E for E in about [-0.1, pi + 0.1], through E or pi - E so that
// a small sin E keeps its relative precision.
inline void sincos_half_turn(double E, double& s, double& c) {
  if (E <= 0.5 * kPiHi) {
    sincos_poly(E, s, c);
  } else {
    sincos_poly((kPiHi - E) + kPiLo, s, c);
    c = -c;
  }
}
}  // namespace

KeplerSolution kepler_solution(double M, double e) {
  // Reduce to m in [0, pi]: E(M + 2 pi k) = E(M) + 2 pi k, E(-M) = -E(M).
  const double turns = std::nearbyint(M * (0.5 / units::kPi));
  const double reduced = std::fma(-turns, 2.0 * kPiHi, M) - turns * (2.0 * kPiLo);
  const double offset = turns * units::kTwoPi, sign = reduced < 0.0 ? -1.0 : 1.0;
  const double m = std::min(std::abs(reduced), kPiHi);
  if (m == 0.0 || m == kPiHi) return {offset + sign * m, 0.0, m == 0.0 ? 1.0 : -1.0};
  // Markley (1995), eqs. 20-21 (coefficients from memory; the tests check
  // the solution, not the starter): a Pade approximant of sin E turns
  // Kepler's equation into a cubic with one real root.
  const double pi2 = units::kPi * units::kPi;
  const double alpha = (3.0 * pi2 + 1.6 * units::kPi * (units::kPi - m) / (1.0 + e)) / (pi2 - 6.0);
  const double d = 3.0 * (1.0 - e) + alpha * e;
  const double q = 2.0 * alpha * d * (1.0 - e) - m * m;
  const double r = 3.0 * alpha * d * (d - 1.0 + e) * m + m * m * m;
  const double w0 = std::cbrt(std::abs(r) + std::sqrt(q * q * q + r * r));
  const double w = w0 * w0;
  double E = (2.0 * r * w / (w * w + w * q + q * q) + m) / d;
  // Markley's fifth-order correction (his eqs. 22-29) takes the starter
  // to round-off; sin and cos of E then rotate by the small step.
  double s, c;
  sincos_half_turn(E, s, c);
  const bool near = E < 1.0;
  const double f0 = near ? (1.0 - e) * E + e * e_minus_sin(E) - m : E - e * s - m;
  const double f1 = near ? (1.0 - e) + e * one_minus_cos(E) : 1.0 - e * c;
  const double f2 = e * s, f3 = e * c;
  const double d3 = -f0 / (f1 - 0.5 * f0 * f2 / f1);
  const double d4 = -f0 / (f1 + 0.5 * d3 * f2 + d3 * d3 * f3 * (1.0 / 6.0));
  const double d5 =
      -f0 / (f1 + 0.5 * d4 * f2 + d4 * d4 * f3 * (1.0 / 6.0) - d4 * d4 * d4 * f2 * (1.0 / 24.0));
  E += d5;
  // |d5| < 1e-2 after the starter: the series of sin and cos to d^7, d^6.
  const double d2 = d5 * d5;
  const Series& t = kSeries;
  const double sd = d5 * (1.0 + d2 * (t.sin_c[1] + d2 * (t.sin_c[2] + d2 * t.sin_c[3])));
  const double cd = 1.0 + d2 * (t.cos_c[1] + d2 * (t.cos_c[2] + d2 * t.cos_c[3]));
  const double s_new = s * cd + c * sd;
  c = c * cd - s * sd;
  s = s_new;
  return {offset + sign * E, sign * s, c};
}

}  // namespace heft
