#pragma once
/// \file expseries.hpp
/// Elementary functions by their series, without a libm call, where the
/// argument's range is narrow. The exponential of a non-positive argument,
/// so that loops over it vectorise (std::exp is an opaque call to GCC).
/// Scalar, it is slower than libm's table-driven exp (its 13 terms are one
/// chain of dependent steps); it pays in vector lanes, e.g. the sum over a
/// kernel mixture's terms exp(q_min - q) <= 1. The sine and cosine of a
/// small angle, an offset from a tabulated one (the angle-addition
/// formulas do the rest), in a few multiplications where libm's sincos
/// reduces its argument first; of a fraction of a turn, for random
/// deviates in vector lanes. The logarithm of a positive normal number,
/// so that loops over it vectorise.

#include <bit>
#include <cstdint>

namespace heft {

/// exp(t) for -708 < t <= 0, within 5e-16 relative of std::exp
/// (tests/expseries_test.cpp); below, where the result is subnormal or
/// zero, it is wrong. t = n ln 2 + r with |r| <= ln 2 / 2
/// (ln 2 split in two parts, Cody & Waite 1980, "Software Manual for the
/// Elementary Functions"), e^r by its Taylor series to r^13 (truncation
/// below 2e-17 relative), times 2^n written into the exponent bits (n sits
/// in the low bits of t log2(e) + 1.5 x 2^52). Branch-free.
[[gnu::always_inline]] inline double exp_nonpositive(double t) {
  constexpr double kLog2e = 1.4426950408889634, kLn2Hi = 0.6931471803691238, kLn2Lo = 1.9082149292705877e-10;
  constexpr double kShift = 6755399441055744.0;  // 1.5 x 2^52
  const double shifted = t * kLog2e + kShift;
  const double n = shifted - kShift;
  const double r = (t - n * kLn2Hi) - n * kLn2Lo;
  double p = 1.0 / 6227020800.0;  // 1 / 13!
  p = p * r + 1.0 / 479001600.0;
  p = p * r + 1.0 / 39916800.0;
  p = p * r + 1.0 / 3628800.0;
  p = p * r + 1.0 / 362880.0;
  p = p * r + 1.0 / 40320.0;
  p = p * r + 1.0 / 5040.0;
  p = p * r + 1.0 / 720.0;
  p = p * r + 1.0 / 120.0;
  p = p * r + 1.0 / 24.0;
  p = p * r + 1.0 / 6.0;
  p = p * r + 0.5;
  p = p * r + 1.0;
  p = p * r + 1.0;
  const std::uint64_t two_n = (std::bit_cast<std::uint64_t>(shifted) + 1023) << 52;
  return p * std::bit_cast<double>(two_n);
}

/// sin(d) and cos(d) for |d| <= pi / 32, within 2 units in the last place
/// of std::sin and std::cos (tests/expseries_test.cpp): their Taylor series
/// to d^9 and d^8; the first terms left out, d^11 / 11! and d^10 / 10!,
/// are at most 2.1e-18 of sin d and 2.3e-17 there, a fifth of the last
/// place or less.
struct SinCos {
  double sin, cos;
};
[[gnu::always_inline]] inline SinCos sincos_small(double d) {
  const double d2 = d * d;
  return {d * (1.0 + d2 * (-1.0 / 6 + d2 * (1.0 / 120 + d2 * (-1.0 / 5040 + d2 * (1.0 / 362880))))),
          1.0 + d2 * (-0.5 + d2 * (1.0 / 24 + d2 * (-1.0 / 720 + d2 * (1.0 / 40320))))};
}

/// sin(2 pi u) and cos(2 pi u) for 0 <= u <= 1, within 2.3e-16 of them,
/// and within 2 units in the last place where they are small
/// (tests/expseries_test.cpp): u in quarter turns, 4 u = k + f with k the
/// nearest integer (f exact), the sine and cosine of d = f pi / 2, |d| <=
/// pi / 4, by their Taylor series to d^17 and d^16 (the first terms left
/// out, d^19 / 19! and d^18 / 18!, below 1e-19 and 3e-18 there), then
/// turned by k quarter turns. Reduced in turns, the angle's rounding does
/// not grow with it as in std::sin(2 pi u). Branch-free (selects only), so
/// that loops over random deviates vectorise.
[[gnu::always_inline]] inline SinCos sincos_turns(double u) {
  constexpr double kShift = 6755399441055744.0;  // 1.5 x 2^52
  constexpr double kHalfPi = 1.5707963267948966;
  const double t = 4.0 * u;
  const double k = (t + kShift) - kShift;
  const double d = (t - k) * kHalfPi, d2 = d * d;
  double s = -1.0 / 355687428096000.0;  // -1 / 17!
  s = s * d2 + 1.0 / 1307674368000.0;
  s = s * d2 - 1.0 / 6227020800.0;
  s = s * d2 + 1.0 / 39916800.0;
  s = s * d2 - 1.0 / 362880.0;
  s = s * d2 + 1.0 / 5040.0;
  s = s * d2 - 1.0 / 120.0;
  s = s * d2 + 1.0 / 6.0;
  s = d - d * (d2 * s);
  double c = 1.0 / 20922789888000.0;  // 1 / 16!
  c = c * d2 - 1.0 / 87178291200.0;
  c = c * d2 + 1.0 / 479001600.0;
  c = c * d2 - 1.0 / 3628800.0;
  c = c * d2 + 1.0 / 40320.0;
  c = c * d2 - 1.0 / 720.0;
  c = c * d2 + 1.0 / 24.0;
  c = c * d2 - 0.5;
  c = 1.0 + d2 * c;
  // k quarter turns (k = 4 is none): (s, c), (c, -s), (-s, -c), (-c, s)
  const bool odd = k == 1.0 || k == 3.0;
  const double sin_abs = odd ? c : s, cos_abs = odd ? s : c;
  return {k == 2.0 || k == 3.0 ? -sin_abs : sin_abs, k == 1.0 || k == 2.0 ? -cos_abs : cos_abs};
}

/// ln(x) for a positive normal x, within 1 unit in the last place of
/// std::log (tests/expseries_test.cpp); zero, subnormals, infinities and
/// NaN give wrong results. x = 2^e m with m in [sqrt(1/2), sqrt(2)),
/// moved there by adding the offset of sqrt(1/2)'s bits before the
/// exponent is split off, and ln m = 2 atanh(s) with s = (m - 1) / (m + 1),
/// |s| <= 0.1716, written f - f^2/2 + s (f^2/2 + R) with f = m - 1 so that
/// the rounding of s only touches the small terms, as fdlibm's log does
/// (Sun Microsystems 1993); R by the series of atanh to s^21 (the first
/// term left out, s^23 / 23, is below 1e-18 of 2 s); e ln 2 with ln 2 in
/// two parts (Cody & Waite 1980). e becomes a double through the bits of
/// 2^52 + e + 1023, since AVX2 has no vector conversion of 64-bit
/// integers. Branch-free.
[[gnu::always_inline]] inline double log_positive(double x) {
  constexpr double kLn2Hi = 0.6931471803691238, kLn2Lo = 1.9082149292705877e-10;
  constexpr std::uint64_t kSqrtHalf = 0x3fe6a09e667f3bcdULL, kOne = 0x3ff0000000000000ULL;
  const std::uint64_t ix = std::bit_cast<std::uint64_t>(x) + (kOne - kSqrtHalf);
  const double e = std::bit_cast<double>((ix >> 52) | 0x4330000000000000ULL) - (4503599627370496.0 + 1023.0);
  const double m = std::bit_cast<double>((ix & 0x000fffffffffffffULL) + kSqrtHalf);
  const double f = m - 1.0;  // exact: m is within a factor 2 of 1
  const double s = f / (2.0 + f), s2 = s * s, hfsq = 0.5 * f * f;
  double p = 2.0 / 21;
  p = p * s2 + 2.0 / 19;
  p = p * s2 + 2.0 / 17;
  p = p * s2 + 2.0 / 15;
  p = p * s2 + 2.0 / 13;
  p = p * s2 + 2.0 / 11;
  p = p * s2 + 2.0 / 9;
  p = p * s2 + 2.0 / 7;
  p = p * s2 + 2.0 / 5;
  p = p * s2 + 2.0 / 3;
  // ln m = 2 s + s R = f - hfsq + s (hfsq + R), R = s^2 p: the rounding of
  // s then only touches the small terms
  return e * kLn2Hi + (f - (hfsq - (s * (hfsq + s2 * p) + e * kLn2Lo)));
}

}  // namespace heft
