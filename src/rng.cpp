#include "heft/rng.hpp"

#include <cmath>

#include "heft/units.hpp"

namespace heft {
namespace {
inline std::uint64_t rotl(std::uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }
}  // namespace

std::uint64_t splitmix64(std::uint64_t& state) {
  std::uint64_t z = (state += 0x9e3779b97f4a7c15ULL);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}

std::uint64_t fnv1a64(std::string_view bytes) {
  std::uint64_t h = 0xcbf29ce484222325ULL;
  for (unsigned char c : bytes) {
    h ^= c;
    h *= 0x100000001b3ULL;
  }
  return h;
}

Rng::Rng(std::uint64_t seed) {
  std::uint64_t st = seed;
  for (auto& s : s_) s = splitmix64(st);
}

Rng Rng::for_star(std::uint64_t seed, std::string_view star_id) {
  std::uint64_t st = seed ^ 0x6a09e667f3bcc909ULL;
  std::uint64_t mixed = splitmix64(st) ^ fnv1a64(star_id);
  return Rng(mixed);
}

std::uint64_t Rng::next() {
  const std::uint64_t result = rotl(s_[1] * 5, 7) * 9;
  const std::uint64_t t = s_[1] << 17;
  s_[2] ^= s_[0];
  s_[3] ^= s_[1];
  s_[1] ^= s_[2];
  s_[0] ^= s_[3];
  s_[2] ^= t;
  s_[3] = rotl(s_[3], 45);
  return result;
}

double Rng::uniform() { return static_cast<double>(next() >> 11) * 0x1.0p-53; }

double Rng::uniform_open() {
  return (static_cast<double>(next() >> 12) + 0.5) * 0x1.0p-52;
}

double Rng::normal() {
  if (has_spare_) {
    has_spare_ = false;
    return spare_normal_;
  }
  const double r = std::sqrt(-2.0 * std::log(uniform_open()));
  const double phi = units::kTwoPi * uniform();
  spare_normal_ = r * std::sin(phi);
  has_spare_ = true;
  return r * std::cos(phi);
}

double Rng::log_uniform(double lo, double hi) {
  return lo * std::exp(std::log(hi / lo) * uniform());
}

double Rng::gamma(double shape) {
  if (shape < 1.0) return gamma(shape + 1.0) * std::pow(uniform_open(), 1.0 / shape);
  const double d = shape - 1.0 / 3.0, c = 1.0 / std::sqrt(9.0 * d);
  for (;;) {
    double x, v;
    do {
      x = normal();
      v = 1.0 + c * x;
    } while (v <= 0.0);
    v = v * v * v;
    const double u = uniform_open();
    if (u < 1.0 - 0.0331 * x * x * x * x) return d * v;
    if (std::log(u) < 0.5 * x * x + d * (1.0 - v + std::log(v))) return d * v;
  }
}

double Rng::beta(double a, double b) {
  const double x = gamma(a), y = gamma(b);
  return x / (x + y);
}

}  // namespace heft
