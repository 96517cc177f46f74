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
/// reduces its argument first.

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

}  // namespace heft
