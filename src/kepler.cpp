#include "heft/kepler.hpp"

#include <algorithm>
#include <bit>
#include <cmath>
#include <cstdint>

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
[[gnu::always_inline]] inline double horner(const double (&c)[12], int first, double x2) {
  double acc = c[11];
  for (int k = 10; k >= first; --k) acc = acc * x2 + c[k];
  return acc;
}

[[gnu::always_inline]] inline void sincos_poly(double x, double& s, double& c) {
  const double x2 = x * x;
  s = x * horner(kSeries.sin_c, 0, x2);
  c = horner(kSeries.cos_c, 0, x2);
}

// E - sin E and 1 - cos E for |E| < 1 by their series: next to periastron at
// e -> 1 Kepler's equation is E (1 - e) + e (E - sin E) = M, and the
// differences taken directly would lose all but a few digits.
[[gnu::always_inline]] inline double e_minus_sin(double E) { return -E * (E * E) * horner(kSeries.sin_c, 1, E * E); }
[[gnu::always_inline]] inline double one_minus_cos(double E) { return -(E * E) * horner(kSeries.cos_c, 1, E * E); }

// pi and 2 pi as a double plus the rest (Cody-Waite): reductions next to
// periastron keep the digits of a small mean anomaly.
constexpr double kPiHi = 3.141592653589793116, kPiLo = 1.2246467991473532e-16;

// Cube root (to 3e-6) of y > 2^-1022 from its exponent and mantissa, with no libm
// call and no branch (so that it vectorises): y = 2^k m, cbrt(y) =
// 2^(k div 3) cbrt(2^(k mod 3) m); a cubic least-squares fit of cbrt on
// [1, 8) (1.4 % relative error) and one Halley step (cubic convergence:
// 3e-6). Enough for solve_one's starter: its fifth-order correction takes
// E to round-off either way (tests/kepler_test.cpp, the dense grid: worst
// error 1.3e-15 rad with one step as with two).
[[gnu::always_inline]] inline double cbrt_approx(double y) {
  constexpr double kTwo52 = 4503599627370496.0;  // 2^52: integers <-> doubles by bits
  const std::uint64_t bits = std::bit_cast<std::uint64_t>(y);
  const double k = std::bit_cast<double>((bits >> 52) | std::bit_cast<std::uint64_t>(kTwo52)) - kTwo52 - 1023.0;
  const double k3 = std::floor((k + 0.5) * (1.0 / 3.0)), rem = k - 3.0 * k3;
  const double m = std::bit_cast<double>((bits & 0x000FFFFFFFFFFFFFULL) | 0x3FF0000000000000ULL);
  const double t = m * (rem == 0.0 ? 1.0 : (rem == 1.0 ? 2.0 : 4.0));
  double g = ((0.0019168345431396035 * t - 0.03749812135376347) * t + 0.34002912930114837) * t +
             0.7091206995822211;
  const double g3 = g * g * g;
  g *= (g3 + 2.0 * t) / (2.0 * g3 + t);
  const std::uint64_t e3 = std::bit_cast<std::uint64_t>(k3 + 1023.0 + kTwo52) & 0x7FFULL;
  return g * std::bit_cast<double>(e3 << 52);
}

// x rounded to the nearest integer (ties to even) by adding and removing
// 1.5 x 2^52, which vectorises where nearbyint does not (SSE2); beyond
// 2^51 in magnitude x is already an integer.
[[gnu::always_inline]] inline double round_to_integer(double x) {
  constexpr double kShift = 6755399441055744.0;
  return std::abs(x) < 2251799813685248.0 ? (x + kShift) - kShift : x;
}

// Kepler's equation for one (M, e) without a branch (selects only), so
// that the four-lane batch vectorises; the scalar entry point runs the
// same code.
[[gnu::always_inline]] inline KeplerSolution solve_one(double M, double e) {
  // Reduce to m in [0, pi]: E(M + 2 pi k) = E(M) + 2 pi k, E(-M) = -E(M).
  const double turns = round_to_integer(M * (0.5 / units::kPi));
  const double reduced = std::fma(-turns, 2.0 * kPiHi, M) - turns * (2.0 * kPiLo);
  const double offset = turns * units::kTwoPi, sign = reduced < 0.0 ? -1.0 : 1.0;
  const double m = std::min(std::abs(reduced), kPiHi);
  // Markley (1995), eqs. 20-21 (coefficients from memory; the tests check
  // the solution, not the starter): a Pade approximant of sin E turns
  // Kepler's equation into a cubic with one real root.
  const double pi2 = units::kPi * units::kPi;
  // Divisions merged (a divider's throughput bounds the batch).
  const double alpha =
      (3.0 * pi2 * (1.0 + e) + 1.6 * units::kPi * (units::kPi - m)) / ((1.0 + e) * (pi2 - 6.0));
  const double d = 3.0 * (1.0 - e) + alpha * e;
  const double q = 2.0 * alpha * d * (1.0 - e) - m * m;
  const double r = 3.0 * alpha * d * (d - 1.0 + e) * m + m * m * m;
  const double w0 = cbrt_approx(std::abs(r) + std::sqrt(q * q * q + r * r));
  const double w = w0 * w0, den = w * w + w * q + q * q;
  double E = (2.0 * r * w + m * den) / (d * den);
  // sin E, cos E through E or pi - E, so that a small sin E keeps its
  // relative precision.
  const bool low = E <= 0.5 * kPiHi;
  double s, c;
  sincos_poly(low ? E : (kPiHi - E) + kPiLo, s, c);
  c = low ? c : -c;
  // Markley's fifth-order correction (his eqs. 22-29) takes the starter
  // to round-off; next to periastron (E < 1) Kepler's equation is
  // E (1 - e) + e (E - sin E) = M with the differences by their series.
  const bool near = E < 1.0;
  const double f0 = near ? (1.0 - e) * E + e * e_minus_sin(E) - m : E - e * s - m;
  const double f1 = near ? (1.0 - e) + e * one_minus_cos(E) : 1.0 - e * c;
  const double f2 = e * s, f3 = e * c;
  const double d3 = -f0 * f1 / (f1 * f1 - 0.5 * f0 * f2);
  const double d4 = -f0 / (f1 + 0.5 * d3 * f2 + d3 * d3 * f3 * (1.0 / 6.0));
  const double d5 =
      -f0 / (f1 + 0.5 * d4 * f2 + d4 * d4 * f3 * (1.0 / 6.0) - d4 * d4 * d4 * f2 * (1.0 / 24.0));
  E += d5;
  // |d5| < 1e-2 after the starter: sin and cos rotate by the small step,
  // by their series to d^7, d^6.
  const double d2 = d5 * d5;
  const Series& t = kSeries;
  const double sd = d5 * (1.0 + d2 * (t.sin_c[1] + d2 * (t.sin_c[2] + d2 * t.sin_c[3])));
  const double cd = 1.0 + d2 * (t.cos_c[1] + d2 * (t.cos_c[2] + d2 * t.cos_c[3]));
  const double s_new = s * cd + c * sd;
  c = c * cd - s * sd;
  s = s_new;
  // At the apsides (m = 0 or pi) E = M exactly.
  const double E_out = m == 0.0 ? 0.0 : (m == kPiHi ? kPiHi : E);
  const double s_out = m == 0.0 ? 0.0 : (m == kPiHi ? 0.0 : sign * s);
  const double c_out = m == 0.0 ? 1.0 : (m == kPiHi ? -1.0 : c);
  return {offset + sign * E_out, s_out, c_out};
}
}  // namespace

KeplerSolution kepler_solution(double M, double e) { return solve_one(M, e); }

// One clone per instruction set, chosen at load time (GNU ifunc): AVX2 with
// FMA where the processor has them, SSE2 elsewhere. The lanes do not
// interact, so a lane's result does not depend on the others.
__attribute__((target_clones("arch=x86-64-v3", "default"))) void kepler_solutions(const double* M, const double* e,
                                                                                  KeplerSolution* out,
                                                                                  std::size_t n) {
  // E, sin E and cos E in arrays of their own, so that the loop vectorises
  constexpr std::size_t kChunk = 32;
  double E[kChunk], s[kChunk], c[kChunk];
  for (std::size_t begin = 0; begin < n; begin += kChunk) {
    const std::size_t m = std::min(kChunk, n - begin);
    for (std::size_t i = 0; i < m; ++i) {
      const KeplerSolution k = solve_one(M[begin + i], e[begin + i]);
      E[i] = k.E;
      s[i] = k.sin_E;
      c[i] = k.cos_E;
    }
    for (std::size_t i = 0; i < m; ++i) out[begin + i] = {E[i], s[i], c[i]};
  }
}
void kepler_solutions4(const double* M, const double* e, KeplerSolution* out) { kepler_solutions(M, e, out, 4); }

}  // namespace heft
