#pragma once
/// \file rng.hpp
/// Portable random numbers: the same seed gives the same numbers on every
/// platform and compiler. The standard library's distributions are not
/// portable, so heft uses its own transforms on top of xoshiro256**.
///
/// One stream per (seed, star id): `Rng::for_star(seed, id)`, so sharding and
/// thread counts cannot change results.

#include <cstdint>
#include <string_view>

namespace heft {

/// xoshiro256** 1.0 (Blackman & Vigna 2018, "Scrambled linear pseudorandom
/// number generators"), seeded through SplitMix64 as its authors recommend.
class Rng {
 public:
  explicit Rng(std::uint64_t seed);
  /// The stream for one star: seed and id are hashed together (FNV-1a 64 of
  /// the id, mixed with the seed by SplitMix64).
  static Rng for_star(std::uint64_t seed, std::string_view star_id);

  /// Next raw 64-bit output.
  std::uint64_t next();
  /// Uniform double in [0, 1) with 53 random bits.
  double uniform();
  /// Uniform double in (0, 1): never exactly 0 (safe for log).
  double uniform_open();
  /// Uniform in [lo, hi).
  double uniform(double lo, double hi) { return lo + (hi - lo) * uniform(); }
  /// Standard normal deviate (Box-Muller, both values used in turn).
  double normal();
  /// Log-uniform in [lo, hi), lo > 0.
  double log_uniform(double lo, double hi);
  /// Gamma(shape, 1) deviate (Marsaglia & Tsang 2000, ACM TOMS 26, 363;
  /// shape < 1 through the boost U^(1/shape)).
  double gamma(double shape);
  /// Beta(a, b) deviate from two gamma deviates.
  double beta(double a, double b);

 private:
  std::uint64_t s_[4];
  double spare_normal_ = 0.0;
  bool has_spare_ = false;
};

/// SplitMix64 step (Steele, Lea & Flood 2014): advances `state`, returns the
/// mixed output.
std::uint64_t splitmix64(std::uint64_t& state);

/// FNV-1a 64-bit hash of a byte string (Fowler, Noll & Vo).
std::uint64_t fnv1a64(std::string_view bytes);

}  // namespace heft
