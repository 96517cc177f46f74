#include "heft/window.hpp"

#include <algorithm>

#include <ceres/jet.h>

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

// The derivatives in ln P of the moments m0 = int f dtau and m1 = int f tau
// dtau over [ts, te] of a function f of the mean anomaly alone, from its
// values fs, fe at the ends: with sigma = tau + d the time since the
// orbit's reference epoch, df/d ln P = -sigma df/dtau, and by parts
// int -sigma f' dtau = m0 - [tau f] - d [f] and
// int -sigma f' tau dtau = 2 m1 - [tau^2 f] - d ([tau f] - m0).
void moments_dlnp(double ts, double te, double d, double fs, double fe, double m0, double m1, double& g0,
                  double& g1) {
  const double ends1 = te * fe - ts * fs, ends2 = te * te * fe - ts * ts * fs;
  g0 = m0 - ends1 - d * (fe - fs);
  g1 = 2.0 * m1 - ends2 - d * (ends1 - m0);
}

void continuous_dlnp(const Orbit<double>& o, const Window& w, double m_start, const KeplerState<double>& ks,
                     const KeplerState<double>& ke, WindowBasis<double>& b, WindowBasis<double>& db) {
  const detail::WindowMoments<double> m = detail::continuous_window_moments(o, w, m_start, ks, ke);
  b = detail::continuous_line_fit(w, m);
  const double ts = w.start_yr - w.ref_epoch_yr, te = w.end_yr - w.ref_epoch_yr;
  const double d = w.ref_epoch_yr - o.ref_epoch_yr, e = o.ecc, rb = std::sqrt(1.0 - e * e);
  detail::WindowMoments<double> g;
  moments_dlnp(ts, te, d, ks.cos_E - e, ke.cos_E - e, m.sx, m.sxt, g.sx, g.sxt);
  moments_dlnp(ts, te, d, rb * ks.sin_E, rb * ke.sin_E, m.sy, m.syt, g.sy, g.syt);
  db = detail::continuous_line_fit(w, g);
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


void window_basis_dlnp(const Orbit<double>& o, const Window& w, WindowBasis<double>& b, WindowBasis<double>& db) {
  if (!detail::window_domain(o)) {
    b = db = window_basis(o, w);  // NaN
    return;
  }
  if (w.times_yr.empty()) {
    double ms, me;
    detail::window_end_anomalies(o, w, ms, me);
    continuous_dlnp(o, w, ms, kepler_state(ms, o.ecc), kepler_state(me, o.ecc), b, db);
    return;
  }
  // Discrete times: Ceres' automatic derivative, dP / d ln P = P.
  using J = ceres::Jet<double, 1>;
  J period(o.period_yr, 0);
  period.v[0] = o.period_yr;
  const Orbit<J> oj{period, J(o.ecc), J(o.inc_rad), J(o.arg_peri_rad), J(o.node_rad),
                    J(o.mean_anom_ref_rad), o.ref_epoch_yr};
  const WindowBasis<J> bj = window_basis(oj, w);
  b = {bj.x0.a, bj.xs.a, bj.y0.a, bj.ys.a};
  db = {bj.x0.v[0], bj.xs.v[0], bj.y0.v[0], bj.ys.v[0]};
}

void window_basis_pair_dlnp(const Orbit<double>& o, const Window& w1, const Window& w2, WindowBasis<double>& b1,
                            WindowBasis<double>& b2, WindowBasis<double>& db1, WindowBasis<double>& db2) {
  if (!detail::pair_batch(o, w1, w2)) {
    window_basis_dlnp(o, w1, b1, db1);
    window_basis_dlnp(o, w2, b2, db2);
    return;
  }
  double m[4];
  KeplerState<double> k[4];
  detail::pair_end_states(o, w1, w2, m, k);
  continuous_dlnp(o, w1, m[0], k[0], k[1], b1, db1);
  continuous_dlnp(o, w2, m[2], k[2], k[3], b2, db2);
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
