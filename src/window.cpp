#include "heft/window.hpp"

namespace heft {
namespace detail {
namespace {
// Gauss-Legendre rule by Newton iteration on P_12 (Golub & Welsch would do
// as well); computed once.
struct GaussLegendre12 {
  std::array<double, 12> x, w;
  GaussLegendre12() {
    const int n = 12;
    for (int i = 0; i < n; ++i) {
      double z = std::cos(units::kPi * (i + 0.75) / (n + 0.5)), pp = 0;
      for (int it = 0; it < 100; ++it) {
        double p1 = 1, p2 = 0;
        for (int j = 1; j <= n; ++j) {
          const double p3 = p2;
          p2 = p1;
          p1 = ((2.0 * j - 1.0) * z * p2 - (j - 1.0) * p3) / j;
        }
        pp = n * (z * p1 - p2) / (z * z - 1.0);
        const double dz = p1 / pp;
        z -= dz;
        if (std::abs(dz) < 1e-16) break;
      }
      x[i] = z;
      w[i] = 2.0 / ((1.0 - z * z) * pp * pp);
    }
  }
};
const GaussLegendre12& rule() {
  static const GaussLegendre12 r;
  return r;
}
}  // namespace
const std::array<double, 12>& gl_nodes() { return rule().x; }
const std::array<double, 12>& gl_weights() { return rule().w; }
}  // namespace detail

double circular_window_efficiency(double r) {
  const double x = units::kPi * r;
  if (x < 1e-2) {
    const double x2 = x * x;
    return 1.0 - x2 / 10.0 + x2 * x2 / 280.0 - x2 * x2 * x2 / 15120.0;
  }
  return 3.0 * (std::sin(x) - x * std::cos(x)) / (x * x * x);
}

}  // namespace heft
