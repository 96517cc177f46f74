#include "heft/window.hpp"

#include <algorithm>

namespace heft {

void window_basis_pairs(const Orbit<double>* o, std::size_t n, const Window& w1, const Window& w2,
                        WindowBasis<double>* b1, WindowBasis<double>* b2) {
  if (!w1.times_yr.empty() || !w2.times_yr.empty()) {
    for (std::size_t i = 0; i < n; ++i) window_basis_pair(o[i], w1, w2, b1[i], b2[i]);
    return;
  }
  // Groups of kGroup orbits keep the state on the stack.
  constexpr std::size_t kGroup = 8;
  double m[kGroup][4];
  KeplerState<double> k[kGroup][4];
  for (std::size_t begin = 0; begin < n; begin += kGroup) {
    const std::size_t end = std::min(n, begin + kGroup);
    for (std::size_t i = begin; i < end; ++i) {
      if (!detail::window_domain(o[i])) continue;
      detail::window_end_anomalies(o[i], w1, m[i - begin][0], m[i - begin][1]);
      detail::window_end_anomalies(o[i], w2, m[i - begin][2], m[i - begin][3]);
    }
    for (std::size_t i = begin; i < end; ++i)
      if (detail::window_domain(o[i])) kepler_states4(m[i - begin], o[i].ecc, k[i - begin]);
    for (std::size_t i = begin; i < end; ++i) {
      if (!detail::window_domain(o[i])) {
        window_basis_pair(o[i], w1, w2, b1[i], b2[i]);  // NaN, as there
        continue;
      }
      const double* mi = m[i - begin];
      const KeplerState<double>* ki = k[i - begin];
      b1[i] = detail::continuous_window_basis(o[i], w1, mi[0], ki[0], ki[1]);
      b2[i] = detail::continuous_window_basis(o[i], w2, mi[2], ki[2], ki[3]);
    }
  }
}

double circular_window_efficiency(double r) {
  const double x = units::kPi * r;
  if (x < 1e-2) {
    const double x2 = x * x;
    return 1.0 - x2 / 10.0 + x2 * x2 / 280.0 - x2 * x2 * x2 / 15120.0;
  }
  return 3.0 * (std::sin(x) - x * std::cos(x)) / (x * x * x);
}

}  // namespace heft
