#include "heft/window.hpp"

#include <algorithm>

namespace heft {

void window_basis_pairs(const Orbit<double>* o, std::size_t n, const Window& w1, const Window& w2,
                        WindowBasis<double>* b1, WindowBasis<double>* b2) {
  if (!w1.times_yr.empty() || !w2.times_yr.empty()) {
    for (std::size_t i = 0; i < n; ++i) window_basis_pair(o[i], w1, w2, b1[i], b2[i]);
    return;
  }
  // Groups of kGroup orbits keep the state on the stack; a group's solves
  // run as one batch (kepler_solutions), so that they overlap.
  constexpr std::size_t kGroup = 8;
  double m[kGroup][4], e[kGroup][4];
  KeplerSolution k[kGroup][4];
  for (std::size_t begin = 0; begin < n; begin += kGroup) {
    const std::size_t end = std::min(n, begin + kGroup);
    std::size_t n_in = 0;  // orbits in the window model's domain, packed
    for (std::size_t i = begin; i < end; ++i) {
      if (!detail::window_domain(o[i])) continue;
      detail::window_end_anomalies(o[i], w1, m[n_in][0], m[n_in][1]);
      detail::window_end_anomalies(o[i], w2, m[n_in][2], m[n_in][3]);
      std::fill_n(e[n_in], 4, o[i].ecc);
      ++n_in;
    }
    kepler_solutions(m[0], e[0], k[0], 4 * n_in);
    std::size_t j = 0;
    for (std::size_t i = begin; i < end; ++i) {
      if (!detail::window_domain(o[i])) {
        window_basis_pair(o[i], w1, w2, b1[i], b2[i]);  // NaN, as there
        continue;
      }
      const double* mj = m[j];
      const KeplerSolution* kj = k[j++];
      b1[i] = detail::continuous_window_basis(o[i], w1, mj[0], state_of(kj[0]), state_of(kj[1]));
      b2[i] = detail::continuous_window_basis(o[i], w2, mj[2], state_of(kj[2]), state_of(kj[3]));
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
