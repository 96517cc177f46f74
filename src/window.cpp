#include "heft/window.hpp"

#include <algorithm>

namespace heft {
namespace {
constexpr std::size_t kGroup = 8;

// What continuous_window_basis needs of kGroup orbits over one window, one
// array per quantity so that the lanes load them whole.
struct WindowLanes {
  double p[kGroup], ecc[kGroup], m_start[kGroup];
  double e_s[kGroup], sin_s[kGroup], cos_s[kGroup], e_e[kGroup], sin_e[kGroup], cos_e[kGroup];
};

// continuous_window_basis for n <= kGroup orbits over window w, in SIMD
// lanes where the processor has AVX2, without contraction
// (CMakeLists.txt), so that each fit is the one-by-one fit bit for bit.
__attribute__((target_clones("arch=x86-64-v3", "default"))) void window_fits_lanes(const WindowLanes& l,
                                                                                   std::size_t n, const Window& w,
                                                                                   WindowBasis<double>* __restrict out) {
  for (std::size_t i = 0; i < n; ++i) {
    const Orbit<double> o{l.p[i], l.ecc[i], 0.0, 0.0, 0.0, 0.0, 0.0};
    out[i] = detail::continuous_window_basis(o, w, l.m_start[i], {l.e_s[i], l.sin_s[i], l.cos_s[i]},
                                             {l.e_e[i], l.sin_e[i], l.cos_e[i]});
  }
}
}  // namespace

void window_basis_pairs(const Orbit<double>* o, std::size_t n, const Window& w1, const Window& w2,
                        WindowBasis<double>* b1, WindowBasis<double>* b2) {
  if (!w1.times_yr.empty() || !w2.times_yr.empty()) {
    for (std::size_t i = 0; i < n; ++i) window_basis_pair(o[i], w1, w2, b1[i], b2[i]);
    return;
  }
  // Groups of kGroup orbits keep the state on the stack; a group's solves
  // run as one batch (kepler_solutions), so that they overlap.
  double m[kGroup][4], e[kGroup][4];
  KeplerSolution k[kGroup][4];
  WindowLanes lanes[2];
  for (std::size_t begin = 0; begin < n; begin += kGroup) {
    const std::size_t end = std::min(n, begin + kGroup);
    std::size_t n_in = 0;  // orbits in the window model's domain, packed
    for (std::size_t i = begin; i < end; ++i) {
      if (!detail::window_domain(o[i])) continue;
      detail::window_end_anomalies(o[i], w1, m[n_in][0], m[n_in][1]);
      detail::window_end_anomalies(o[i], w2, m[n_in][2], m[n_in][3]);
      std::fill_n(e[n_in], 4, o[i].ecc);
      for (WindowLanes& l : lanes) {
        l.p[n_in] = o[i].period_yr;
        l.ecc[n_in] = o[i].ecc;
      }
      ++n_in;
    }
    kepler_solutions(m[0], e[0], k[0], 4 * n_in);
    for (int w = 0; w < 2; ++w)
      for (std::size_t j = 0; j < n_in; ++j) {
        WindowLanes& l = lanes[w];
        const KeplerSolution &ks = k[j][2 * w], &ke = k[j][2 * w + 1];
        l.m_start[j] = m[j][2 * w];
        l.e_s[j] = ks.E;
        l.sin_s[j] = ks.sin_E;
        l.cos_s[j] = ks.cos_E;
        l.e_e[j] = ke.E;
        l.sin_e[j] = ke.sin_E;
        l.cos_e[j] = ke.cos_E;
      }
    WindowBasis<double> f1[kGroup], f2[kGroup];
    window_fits_lanes(lanes[0], n_in, w1, f1);
    window_fits_lanes(lanes[1], n_in, w2, f2);
    std::size_t j = 0;
    for (std::size_t i = begin; i < end; ++i) {
      if (!detail::window_domain(o[i])) {
        window_basis_pair(o[i], w1, w2, b1[i], b2[i]);  // NaN, as there
        continue;
      }
      b1[i] = f1[j];
      b2[i] = f2[j++];
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
