#pragma once
/// \file window.hpp
/// What a catalogue reports for a star on a curved path: the least-squares
/// straight line (position at the reference epoch and proper motion) through
/// the true track sampled over the catalogue's observing window.
///
/// The host's reflex track is linear in the orbit's X = cos E - e and
/// Y = sqrt(1 - e^2) sin E (Thiele-Innes, kepler.hpp), so the window fit of
/// the track is the same linear combination of the fits of X(t) and Y(t):
/// WindowBasis holds those four numbers, which depend on (P, e, M0) only.
/// Reference for the method: Kervella et al. 2019, A&A 623, A72, Sect. 3;
/// derivation and the closed-form test oracle in docs/method.md.

#include <cmath>
#include <limits>
#include <vector>

#include "heft/kepler.hpp"

namespace heft {

/// A catalogue's observing window and reference epoch (decimal Julian
/// years). With `times_yr` empty the sampling is uniform and continuous over
/// [start_yr, end_yr]; otherwise the fit uses those discrete times with
/// `weights` (all 1 if empty).
struct Window {
  double start_yr, end_yr, ref_epoch_yr;
  std::vector<double> times_yr;
  std::vector<double> weights;
};

/// Least-squares line fits X(t) ~ x0 + xs (t - t_ref), Y(t) ~ y0 + ys (t - t_ref)
/// over a window (x0, y0 dimensionless; xs, ys per Julian year).
template <typename T>
struct WindowBasis {
  T x0, xs, y0, ys;
};

/// Catalogue-reported reflex of the host: position offset at the reference
/// epoch (mas) and proper motion (mas/yr), relative to the barycentre.
template <typename T>
struct WindowFit {
  T dra_mas, ddec_mas, pmra_mas_yr, pmdec_mas_yr;
};

namespace detail {
/// Antiderivatives in E of X w, X w u, Y w / b and Y w u / b, with
/// X = cos E - e, b Y = sqrt(1 - e^2) sin E, w = 1 - e cos E (= du/dE) and
/// u = E - e sin E (docs/method.md, Sect. 6): the window moments in closed form.
/// Takes sin E and cos E from the Kepler solve (kepler_state).
template <typename T>
[[gnu::always_inline]] inline void window_antiderivatives(const KeplerState<T>& k, const T& e, T f[4]) {
  const T &E = k.E, &s = k.sin_E, &c = k.cos_E;
  const T s2 = T(2.0) * s * c, c2 = c * c - s * s;
  const T ee = T(1.0) + e * e;
  f[0] = ee * s - T(1.5) * e * E - T(0.25) * e * s2;
  f[1] = ee * (E * s + c) - e * (E * E * T(0.25) + E * s2 * T(0.25) + c2 * T(0.125)) -
         e * E * E * T(0.5) - e * ee * s * s * T(0.5) - e * e * c * c * c / T(3.0) - e * e * c;
  f[2] = -c - e * s * s * T(0.5);
  f[3] = s - E * c - e * (E * T(0.5) - s2 * T(0.25)) - e * (-E * c2 * T(0.25) + s2 * T(0.125)) +
         e * e * s * s * s / T(3.0);
}
}  // namespace detail

namespace detail {
/// Mean anomalies at the ends of a continuous window, shifted by the same
/// whole turns (only differences matter).
template <typename T>
void window_end_anomalies(const Orbit<T>& o, const Window& w, T& m_start, T& m_end) {
  using std::floor;
  const double turns = units::kTwoPi * floor(scalar_of(mean_anomaly(o, w.start_yr)) / units::kTwoPi);
  m_start = mean_anomaly(o, w.start_yr) - T(turns);
  m_end = mean_anomaly(o, w.end_yr) - T(turns);
}

/// Whether window_basis's closed forms apply: 0 <= e < 1, finite P > 0.
template <typename T>
bool window_domain(const Orbit<T>& o) {
  const double e_val = scalar_of(o.ecc), p_val = scalar_of(o.period_yr);
  return e_val >= 0.0 && e_val < 1.0 && p_val > 0.0 && std::isfinite(p_val);
}

/// The window fit from the sums s0 = sum w, s1 = sum w tau, s2 = sum w tau^2
/// and the data sums of X and Y (tau = t - t_ref).
template <typename T>
WindowBasis<T> line_fit(const T& s0, const T& s1, const T& s2, const T& sx, const T& sxt, const T& sy,
                        const T& syt) {
  const T det = s0 * s2 - s1 * s1;
  const T xs = (s0 * sxt - s1 * sx) / det, ys = (s0 * syt - s1 * sy) / det;
  return {(sx - xs * s1) / s0, xs, (sy - ys * s1) / s0, ys};
}

/// The data moments of a continuous window, tau = t - t_ref:
/// sx = int X dtau, sxt = int X tau dtau, sy and syt alike.
template <typename T>
struct WindowMoments {
  T sx, sxt, sy, syt;
};

/// The line fit of moments m over a continuous window.
template <typename T>
WindowBasis<T> continuous_line_fit(const Window& w, const WindowMoments<T>& m) {
  const double ts = w.start_yr - w.ref_epoch_yr, te = w.end_yr - w.ref_epoch_yr;
  return line_fit(T(te - ts), T((te * te - ts * ts) / 2.0), T((te * te * te - ts * ts * ts) / 3.0), m.sx, m.sxt,
                  m.sy, m.syt);
}

/// The moments of a continuous window from the Kepler states at its ends
/// (mean anomalies m_start, m_end from window_end_anomalies).
template <typename T>
WindowMoments<T> continuous_window_moments(const Orbit<T>& o, const Window& w, const T& m_start,
                                           const KeplerState<T>& k_start, const KeplerState<T>& k_end) {
  using std::sqrt;
  const T e = o.ecc;
  const T b = sqrt(T(1.0) - e * e);
  const T k = o.period_yr / T(units::kTwoPi);  // yr per rad of mean anomaly
  const double ts = w.start_yr - w.ref_epoch_yr;
  T fs[4], fe[4];
  window_antiderivatives(k_start, e, fs);
  window_antiderivatives(k_end, e, fe);
  // dt = k w dE and tau = ts + k (u - Ms), u = E - e sin E (du = w dE).
  const T c0 = T(ts) - k * m_start;
  const T sx = k * (fe[0] - fs[0]);
  const T sy = k * b * (fe[2] - fs[2]);
  return {sx, c0 * sx + k * k * (fe[1] - fs[1]), sy, c0 * sy + k * k * b * (fe[3] - fs[3])};
}

/// Window fit over a continuous window from the Kepler states at its ends.
template <typename T>
WindowBasis<T> continuous_window_basis(const Orbit<T>& o, const Window& w, const T& m_start,
                                       const KeplerState<T>& k_start, const KeplerState<T>& k_end) {
  return continuous_line_fit(w, continuous_window_moments(o, w, m_start, k_start, k_end));
}
}  // namespace detail

/// Window fit of X(t), Y(t) for orbit (P, e, M0) (angles of `o` unused).
/// Continuous sampling is integrated in eccentric anomaly,
/// dt = P (1 - e cos E) dE / 2 pi, where every moment has an elementary
/// antiderivative: Kepler's equation is solved only at the window ends and
/// the cost does not grow with the number of orbits in the window.
template <typename T>
WindowBasis<T> window_basis(const Orbit<T>& o, const Window& w) {
  using std::sqrt;
  if (!detail::window_domain(o)) {
    const T nan(std::numeric_limits<double>::quiet_NaN());
    return {nan, nan, nan, nan};  // outside the domain: the caller sees NaN
  }
  if (w.times_yr.empty()) {
    T ms, me;
    detail::window_end_anomalies(o, w, ms, me);
    return detail::continuous_window_basis(o, w, ms, kepler_state(ms, o.ecc), kepler_state(me, o.ecc));
  }
  const T e = o.ecc;
  const T b = sqrt(T(1.0) - e * e);
  T s0(0.0), s1(0.0), s2(0.0), sx(0.0), sxt(0.0), sy(0.0), syt(0.0);
  for (std::size_t i = 0; i < w.times_yr.size(); ++i) {
    const T wi(w.weights.empty() ? 1.0 : w.weights[i]);
    const double tau = w.times_yr[i] - w.ref_epoch_yr;
    const KeplerState<T> k = kepler_state(mean_anomaly(o, w.times_yr[i]), e);
    const T X = k.cos_E - e, Y = b * k.sin_E;
    s0 += wi;
    s1 += wi * tau;
    s2 += wi * tau * tau;
    sx += wi * X;
    sxt += wi * X * tau;
    sy += wi * Y;
    syt += wi * Y * tau;
  }
  return detail::line_fit(s0, s1, s2, sx, sxt, sy, syt);
}

namespace detail {
/// Whether two windows' fits take one batch of four Kepler solves: both
/// continuous, o in the domain.
template <typename T>
bool pair_batch(const Orbit<T>& o, const Window& w1, const Window& w2) {
  return w1.times_yr.empty() && w2.times_yr.empty() && window_domain(o);
}
/// The mean anomalies at the two windows' ends (start 1, end 1, start 2,
/// end 2) and their Kepler states, solved as one batch.
template <typename T>
void pair_end_states(const Orbit<T>& o, const Window& w1, const Window& w2, T m[4], KeplerState<T> k[4]) {
  window_end_anomalies(o, w1, m[0], m[1]);
  window_end_anomalies(o, w2, m[2], m[3]);
  kepler_states4(m, o.ecc, k);
}
}  // namespace detail

/// window_basis for two windows at once (the two catalogues): with both
/// windows continuous, the four Kepler solves at their ends run as one
/// four-lane batch (kepler_solutions4); equal to two window_basis calls to
/// round-off (tests/window_test.cpp).
template <typename T>
void window_basis_pair(const Orbit<T>& o, const Window& w1, const Window& w2, WindowBasis<T>& b1,
                       WindowBasis<T>& b2) {
  if (!detail::pair_batch(o, w1, w2)) {
    b1 = window_basis(o, w1);
    b2 = window_basis(o, w2);
    return;
  }
  T m[4];
  KeplerState<T> k[4];
  detail::pair_end_states(o, w1, w2, m, k);
  b1 = detail::continuous_window_basis(o, w1, m[0], k[0], k[1]);
  b2 = detail::continuous_window_basis(o, w2, m[2], k[2], k[3]);
}

/// window_basis_pair for n orbits at once (plain doubles): the windows' end
/// anomalies of all n orbits first, then their Kepler solves, then the fits
/// (in SIMD lanes where the processor has AVX2).
/// Each solve is a long chain of dependent steps; issued back to back, the
/// independent chains overlap in the processor. Equal to n window_basis_pair
/// calls bit for bit (tests/window_test.cpp).
void window_basis_pairs(const Orbit<double>* o, std::size_t n, const Window& w1, const Window& w2,
                        WindowBasis<double>* b1, WindowBasis<double>* b2);

/// window_basis and its derivative with respect to ln P at fixed e and
/// mean anomaly at o.ref_epoch_yr (db: the four numbers of WindowBasis,
/// each differentiated). X depends on P through M = M0 + 2 pi (t - t0) / P
/// alone, so dX/d ln P = -(t - t0) dX/dt; over a continuous window,
/// integration by parts turns its moments into X at the ends and the
/// moments of X itself (docs/method.md, "The window fits' derivative in
/// ln P"), a few operations beyond window_basis (no further Kepler solve;
/// discrete windows take Ceres' Jet). Agrees with Ceres' automatic
/// derivative through window_basis to round-off (tests/window_test.cpp).
void window_basis_dlnp(const Orbit<double>& o, const Window& w, WindowBasis<double>& b, WindowBasis<double>& db);

/// window_basis_dlnp for the two catalogues' windows at once, with the four
/// Kepler solves at their ends as one batch (as window_basis_pair).
void window_basis_pair_dlnp(const Orbit<double>& o, const Window& w1, const Window& w2, WindowBasis<double>& b1,
                            WindowBasis<double>& b2, WindowBasis<double>& db1, WindowBasis<double>& db2);

/// The catalogue-reported reflex of the host for a companion of mass ratio
/// q = m2 / (m1 + m2) on relative orbit o with semi-major axis a_au, seen
/// at parallax_mas.
template <typename T>
WindowFit<T> fit_reflex(const Orbit<T>& o, const T& a_au, const T& q, const T& parallax_mas,
                        const Window& w) {
  const WindowBasis<T> wb = window_basis(o, w);
  const ThieleInnes<T> ti = thiele_innes(T(1.0), o.inc_rad, o.arg_peri_rad, o.node_rad);
  const T s = -q * a_au * parallax_mas;  // host side, mas
  return {s * (ti.B * wb.x0 + ti.G * wb.y0), s * (ti.A * wb.x0 + ti.F * wb.y0),
          s * (ti.B * wb.xs + ti.G * wb.ys), s * (ti.A * wb.xs + ti.F * wb.ys)};
}

/// Closed-form slope / instantaneous-velocity ratio for uniform sampling of
/// a circular orbit over a window centred on the reference epoch:
/// g(x) = 3 (sin x - x cos x) / x^3, x = pi W / P (docs/method.md); its
/// series 1 - x^2/10 + x^4/280 - x^6/15120 below x = 1e-2.
double circular_window_efficiency(double window_over_period);

}  // namespace heft
