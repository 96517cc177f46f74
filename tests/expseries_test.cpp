#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>

#include "heft/expseries.hpp"

using namespace heft;

// The reference is the C library's exp (glibc's, correctly rounded in all
// but rare cases; common practice, no source for the bound below).
TEST_CASE("exp_nonpositive: within 5e-16 of std::exp over [-708, 0]", "[expseries]") {
  double worst = 0.0, worst_t = 0.0;
  const int n = 2'000'000;
  for (int i = 0; i <= n; ++i) {
    const double t = -708.0 * i / n;
    const double ref = std::exp(t);
    const double rel = std::abs(exp_nonpositive(t) - ref) / ref;
    if (rel > worst) {
      worst = rel;
      worst_t = t;
    }
  }
  INFO("worst relative error " << worst << " at t = " << worst_t);
  CHECK(worst < 5e-16);  // about two units in the last place
  // Near 0, where the reduction leaves r = t, and at the halfway points of
  // the reduction (r = +-ln 2 / 2), the worst places for the series.
  for (double t : {0.0, -1e-300, -1e-17, -1e-8, -0.5 * std::log(2.0), -1.5 * std::log(2.0), -40.0, -707.9}) {
    INFO("t = " << t);
    CHECK(std::abs(exp_nonpositive(t) - std::exp(t)) <= 1e-15 * std::exp(t));
  }
  CHECK(exp_nonpositive(0.0) == 1.0);
}

// The reference is the C library's sin and cos (glibc's, correctly rounded
// in all but rare cases; common practice, no source for the bound below).
TEST_CASE("sincos_small: within 2 ulp of std::sin and std::cos for |d| <= pi / 32", "[expseries]") {
  const double d_max = std::acos(-1.0) / 32;
  double worst_sin = 0.0, worst_cos = 0.0;
  const int n = 2'000'000;
  for (int i = -n; i <= n; ++i) {
    const double d = d_max * i / n;
    const SinCos sc = sincos_small(d);
    if (d != 0.0) worst_sin = std::max(worst_sin, std::abs(sc.sin - std::sin(d)) / std::abs(std::sin(d)));
    worst_cos = std::max(worst_cos, std::abs(sc.cos - std::cos(d)));  // cos d is within 0.5 % of 1
  }
  INFO("worst relative error of sin " << worst_sin << ", absolute of cos " << worst_cos);
  CHECK(worst_sin < 2.3e-16);  // 2^-52: at most two units in the last place
  CHECK(worst_cos < 2.3e-16);
  // at the ends, where the series' truncation is largest, and tiny angles
  for (double d : {d_max, -d_max, 1e-300, 1e-8, -1e-3}) {
    INFO("d = " << d);
    CHECK(std::abs(sincos_small(d).sin - std::sin(d)) <= 2.3e-16 * std::abs(std::sin(d)));
    CHECK(std::abs(sincos_small(d).cos - std::cos(d)) <= 2.3e-16);
  }
  CHECK(sincos_small(0.0).sin == 0.0);
  CHECK(sincos_small(0.0).cos == 1.0);
}

// The reference is the C library's sin and cos in x87 extended precision
// (64-bit significand) of 2 pi w, w = u - j / 2 (exact) with |w| <= 1/4,
// times (-1)^j: relative to 1e-19 also next to the half turns (common
// practice, no source for the bound below).
TEST_CASE("sincos_turns: within 2.3e-16 of sin and cos of 2 pi u over [0, 1], 2 ulp where small", "[expseries]") {
  const long double two_pi = 6.283185307179586476925286766559005768L;
  double worst_sin = 0.0, worst_cos = 0.0, worst_sin_rel = 0.0;
  const auto check = [&](double u) {
    const SinCos sc = sincos_turns(u);
    const double j = std::nearbyint(2.0 * u), w = u - 0.5 * j;
    const long double sign = std::fmod(j, 2.0) == 0.0 ? 1.0L : -1.0L;
    const long double ref_s = sign * std::sin(two_pi * w), ref_c = sign * std::cos(two_pi * w);
    worst_sin = std::max(worst_sin, static_cast<double>(std::fabs(sc.sin - ref_s)));
    worst_cos = std::max(worst_cos, static_cast<double>(std::fabs(sc.cos - ref_c)));
    // relative where the sine is small: the reduction in turns is exact
    if (std::fabs(ref_s) < 1e-3L && ref_s != 0.0L)
      worst_sin_rel = std::max(worst_sin_rel, static_cast<double>(std::fabs((sc.sin - ref_s) / ref_s)));
  };
  const int n = 4'000'000;
  for (int i = 0; i <= n; ++i) check(static_cast<double>(i) / n);
  // next to the quarter turns, where k changes, and next to 0 and 1/2
  for (double c : {0.0, 0.125, 0.25, 0.375, 0.5, 0.625, 0.75, 0.875, 1.0})
    for (int i = -1000; i <= 1000; ++i)
      if (const double u = c + i * 1e-12; u >= 0.0 && u <= 1.0) check(u);
  for (double u : {1e-300, 1e-17, 0x1.0p-53, std::nextafter(0.5, 0.0), std::nextafter(0.5, 1.0),
                   std::nextafter(1.0, 0.0)})
    check(u);
  INFO("worst absolute error of sin " << worst_sin << ", of cos " << worst_cos << "; relative of small sines "
                                      << worst_sin_rel);
  CHECK(worst_sin < 2.3e-16);  // 2^-52
  CHECK(worst_cos < 2.3e-16);
  CHECK(worst_sin_rel < 4.5e-16);  // 2^-51: two units in the last place
  CHECK(sincos_turns(0.0).sin == 0.0);
  CHECK(sincos_turns(0.0).cos == 1.0);
  CHECK(sincos_turns(0.25).sin == 1.0);
  CHECK(sincos_turns(0.5).sin == 0.0);  // std::sin of 2 pi 0.5 in double is 1.2e-16
  CHECK(sincos_turns(0.75).cos == 0.0);
}

// The reference is the C library's log (glibc's, correctly rounded in all
// but rare cases; common practice, no source for the bound below).
TEST_CASE("log_positive: within 1 ulp of std::log for positive normal numbers", "[expseries]") {
  const auto ulps = [](double x) {
    const double ref = std::log(x);
    return std::abs(log_positive(x) - ref) / (std::nextafter(std::abs(ref), INFINITY) - std::abs(ref));
  };
  double worst = 0.0, worst_x = 0.0;
  const auto check = [&](double x) {
    if (const double u = ulps(x); u > worst) {
      worst = u;
      worst_x = x;
    }
  };
  // log-spaced over the whole normal range, then densely over [1/2, 2],
  // the reduced range, and next to 1, where ln x is tiny
  const int n = 2'000'000;
  for (int i = 0; i <= n; ++i) check(std::exp(-708.0 + 1417.0 * i / n));
  for (int i = 0; i <= n; ++i) check(0.5 + 1.5 * i / n);
  for (int i = -n; i <= n; ++i)
    if (i != 0) check(1.0 + 1e-6 * i / n);
  INFO("worst " << worst << " ulp at x = " << worst_x);
  CHECK(worst <= 1.0);
  // the ends of the reduction and of the normal range, where the offset of
  // sqrt(1/2)'s bits carries into the exponent or not
  for (double x : {std::sqrt(0.5), std::nextafter(std::sqrt(0.5), 0.0), std::sqrt(2.0),
                   std::nextafter(std::sqrt(2.0), 2.0), 0.5, 2.0, 1e-300, 2.2250738585072014e-308,
                   1.7976931348623157e308}) {
    INFO("x = " << x);
    CHECK(ulps(x) <= 1.0);
  }
  CHECK(log_positive(1.0) == 0.0);
}
