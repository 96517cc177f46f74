#pragma once
/// \file kepler.hpp
/// Kepler's equation and Keplerian orbit geometry (Campbell elements and
/// Thiele-Innes constants): the companion's position relative to the host,
/// the host's reflex motion on the sky and its radial velocity.
///
/// Conventions (docs/orbits.md, the one place they are defined):
/// 1. The elements describe the companion's orbit relative to the host;
///    omega is the companion's argument of periastron (the host's is
///    omega + 180 deg).
/// 2. x points north (+Dec), y east (+RA*), z away from the observer. The
///    ascending node is the node where the companion recedes (z increasing);
///    Omega is its position angle, north through east.
/// 3. 0 <= i <= 180 deg; i < 90 deg: position angle increases with time.
/// 4. Radial velocities are positive when receding.
/// Templated on the scalar so that Ceres Jets pass through; Kepler's
/// equation is solved in doubles and Jets get the implicit derivative.

#include <ceres/jet.h>

#include <algorithm>
#include <cmath>
#include <vector>

#include "heft/units.hpp"

namespace heft {

/// The eccentric anomaly with its sine and cosine.
struct KeplerSolution {
  double E, sin_E, cos_E;
};

/// Solves Kepler's equation E - e sin E = M without iteration or branch:
/// the non-iterative starter of Markley (1995, Celest. Mech. Dyn. Astron.
/// 63, 101) and his fifth-order correction, sin and cos by polynomials,
/// the starter's cube root from exponent and mantissa (docs/method.md).
/// Given: M (rad, any value), e (0 <= e < 1).
/// Returned: E (rad, in the same 2 pi turn as M; E = M at M = k pi), sin E
/// and cos E. Accurate to a few 1e-16 rad for every (M, e), e = 0.999 next
/// to periastron included (tests/kepler_test.cpp).
KeplerSolution kepler_solution(double mean_anom_rad, double ecc);

/// kepler_solution for four (M, e) pairs at once, in SIMD lanes where the
/// processor has AVX2 (a clone chosen at load time; SSE2 otherwise).
/// Given: M[4] (rad), e[4] (0 <= e < 1). Returned: out[4]. Each lane's
/// result is independent of the others; it equals kepler_solution's to
/// round-off (FMA contraction in the AVX2 clone), tests/kepler_test.cpp.
void kepler_solutions4(const double* mean_anom_rad, const double* ecc, KeplerSolution* out);

/// kepler_solutions4 for n (M, e) pairs at once, in one loop over SIMD
/// lanes, so that the independent solves overlap (the window model of
/// several orbits: window_basis_pairs). The same results as
/// kepler_solutions4, lane by lane.
void kepler_solutions(const double* mean_anom_rad, const double* ecc, KeplerSolution* out, std::size_t n);

/// The eccentric anomaly alone: kepler_solution(M, e).E.
inline double solve_kepler(double mean_anom_rad, double ecc) {
  return kepler_solution(mean_anom_rad, ecc).E;
}

/// The value part of a scalar (the Jet's .a), for control flow.
inline double scalar_of(double x) { return x; }
template <int N>
double scalar_of(const ceres::Jet<double, N>& x) {
  return x.a;
}

/// Eccentric anomaly with its sine and cosine, for any scalar.
template <typename T>
struct KeplerState {
  T E, sin_E, cos_E;
};

/// The state of a solution, for doubles (jet_state below for Jets).
inline KeplerState<double> state_of(const KeplerSolution& k) { return {k.E, k.sin_E, k.cos_E}; }

/// Doubles directly; Ceres Jets by the implicit derivative
/// dE = (dM + sin E de) / (1 - e cos E) and the chain rule for sin E, cos E.
inline KeplerState<double> kepler_state(double mean_anom_rad, double ecc) {
  return state_of(kepler_solution(mean_anom_rad, ecc));
}
/// The Jet state from the solution at the value parts, by the implicit
/// derivative dE = (dM + sin E de) / (1 - e cos E).
template <int N>
KeplerState<ceres::Jet<double, N>> jet_state(const KeplerSolution& k, const ceres::Jet<double, N>& m,
                                             const ceres::Jet<double, N>& e) {
  using J = ceres::Jet<double, N>;
  const Eigen::Matrix<double, N, 1> dE = (m.v + k.sin_E * e.v) / (1.0 - e.a * k.cos_E);
  return {J(k.E, dE), J(k.sin_E, k.cos_E * dE), J(k.cos_E, -k.sin_E * dE)};
}
template <int N>
KeplerState<ceres::Jet<double, N>> kepler_state(const ceres::Jet<double, N>& m,
                                                const ceres::Jet<double, N>& e) {
  return jet_state(kepler_solution(m.a, e.a), m, e);
}

/// kepler_state for four mean anomalies of one orbit, solved as one batch
/// (kepler_solutions4); Jets get the same implicit derivative.
inline void kepler_states4(const double* m, double e, KeplerState<double>* out) {
  const double es[4] = {e, e, e, e};
  KeplerSolution k[4];
  kepler_solutions4(m, es, k);
  for (int i = 0; i < 4; ++i) out[i] = state_of(k[i]);
}
template <int N>
void kepler_states4(const ceres::Jet<double, N>* m, const ceres::Jet<double, N>& e,
                    KeplerState<ceres::Jet<double, N>>* out) {
  const double ma[4] = {m[0].a, m[1].a, m[2].a, m[3].a}, es[4] = {e.a, e.a, e.a, e.a};
  KeplerSolution k[4];
  kepler_solutions4(ma, es, k);
  for (int i = 0; i < 4; ++i) out[i] = jet_state(k[i], m[i], e);
}

/// Eccentric anomaly alone, for any scalar.
template <typename T>
T eccentric_anomaly(const T& mean_anom_rad, const T& ecc) {
  return kepler_state(mean_anom_rad, ecc).E;
}

/// Thiele-Innes constants of an orbit (in the unit of a).
/// A, B, F, G: sky-plane (x north, y east); C, H: line of sight.
/// x = A X + F Y, y = B X + G Y, z = C X + H Y with
/// X = cos E - e, Y = sqrt(1 - e^2) sin E (e.g. Heintz 1978, Double Stars).
template <typename T>
struct ThieleInnes {
  T A, B, F, G, C, H;
};

template <typename T>
ThieleInnes<T> thiele_innes(const T& a, const T& inc_rad, const T& arg_peri_rad,
                            const T& node_rad) {
  using std::cos;
  using std::sin;
  const T cw = cos(arg_peri_rad), sw = sin(arg_peri_rad);
  const T cn = cos(node_rad), sn = sin(node_rad);
  const T ci = cos(inc_rad), si = sin(inc_rad);
  return {a * (cw * cn - sw * sn * ci),  a * (cw * sn + sw * cn * ci),
          a * (-sw * cn - cw * sn * ci), a * (-sw * sn + cw * cn * ci),
          a * sw * si,                   a * cw * si};
}

/// The inverse on the sky: a, i, omega and Omega from A, B, F, G (the
/// classical visual-binary inversion, e.g. Heintz 1978, Double Stars;
/// Wright & Howard 2009, ApJS 182, 205, Sect. 2): omega + Omega =
/// atan2(B - F, A + G), omega - Omega = atan2(-B - F, A - G), a^2 = k +
/// sqrt(k^2 - j^2) with k = (A^2 + B^2 + F^2 + G^2) / 2 and j = AG - BF =
/// a^2 cos i. Without C and H, (omega, Omega) and (omega + pi, Omega + pi)
/// are the same on the sky; this returns Omega in [0, pi).
struct SkyElements {
  double a, inc_rad, arg_peri_rad, node_rad;
};
inline SkyElements sky_elements_from_thiele_innes(double A, double B, double F, double G) {
  const double k = 0.5 * (A * A + B * B + F * F + G * G), j = A * G - B * F;
  const double a2 = k + std::sqrt(std::max(0.0, k * k - j * j));
  const double sum = std::atan2(B - F, A + G), diff = std::atan2(-B - F, A - G);
  const double node = std::fmod(0.5 * (sum - diff) + 4.0 * units::kPi, units::kPi);
  const double w = std::fmod(sum - node + 4.0 * units::kPi, units::kTwoPi);
  return {std::sqrt(a2), std::acos(std::clamp(j / a2, -1.0, 1.0)), w, node};
}

/// Campbell elements of the companion's orbit relative to the host.
template <typename T>
struct Orbit {
  T period_yr;
  T ecc;
  T inc_rad;
  T arg_peri_rad;        ///< companion's omega
  T node_rad;            ///< position angle of the ascending node
  T mean_anom_ref_rad;   ///< mean anomaly at ref_epoch_yr
  double ref_epoch_yr;
};

/// Position and velocity of the companion relative to the host, in units of
/// a (and a per Julian year): x north, y east, z away from the observer.
template <typename T>
struct OrbitPoint {
  T x, y, z;
  T vx, vy, vz;
};

/// Mean anomaly (rad) at time t_yr.
template <typename T>
T mean_anomaly(const Orbit<T>& o, double t_yr) {
  return o.mean_anom_ref_rad + T(units::kTwoPi) * T(t_yr - o.ref_epoch_yr) / o.period_yr;
}

/// Relative position and velocity at t_yr for a unit semi-major axis.
template <typename T>
OrbitPoint<T> orbit_point(const Orbit<T>& o, double t_yr) {
  using std::cos;
  using std::sin;
  using std::sqrt;
  const KeplerState<T> k = kepler_state(mean_anomaly(o, t_yr), o.ecc);
  const ThieleInnes<T> ti = thiele_innes(T(1.0), o.inc_rad, o.arg_peri_rad, o.node_rad);
  const T cE = k.cos_E, sE = k.sin_E;
  const T b = sqrt(T(1.0) - o.ecc * o.ecc);
  const T X = cE - o.ecc, Y = b * sE;
  const T Edot = T(units::kTwoPi) / o.period_yr / (T(1.0) - o.ecc * cE);
  const T dX = -sE * Edot, dY = b * cE * Edot;
  return {ti.A * X + ti.F * Y,   ti.B * X + ti.G * Y,   ti.C * X + ti.H * Y,
          ti.A * dX + ti.F * dY, ti.B * dX + ti.G * dY, ti.C * dX + ti.H * dY};
}

/// Kepler's third law: period (Julian yr) of semi-major axis a_au for a
/// total mass m_total_msun (IAU 2015 nominal GM_sun).
template <typename T>
T period_from_a(const T& a_au, const T& m_total_msun) {
  using std::sqrt;
  return T(units::kTwoPi) * sqrt(a_au * a_au * a_au / (T(units::kGMSunAu3Yr2) * m_total_msun));
}
/// Inverse of period_from_a: semi-major axis (AU).
template <typename T>
T a_from_period(const T& period_yr, const T& m_total_msun) {
  using std::cbrt;
  const T n = T(units::kTwoPi) / period_yr;
  return cbrt(T(units::kGMSunAu3Yr2) * m_total_msun / (n * n));
}

/// Separation (same unit as x, y) and position angle (rad in [0, 2 pi),
/// north through east) of a relative position.
template <typename T>
void separation_pa(const T& x_north, const T& y_east, T& sep, T& pa_rad) {
  using std::atan2;
  using std::sqrt;
  sep = sqrt(x_north * x_north + y_east * y_east);
  pa_rad = atan2(y_east, x_north);
  if (pa_rad < T(0.0)) pa_rad += T(units::kTwoPi);
}

/// The host's reflex state for a companion of mass ratio
/// q = m2 / (m1 + m2): sky displacement (mas) and velocity (mas/yr)
/// relative to the barycentre, and radial velocity (km/s).
template <typename T>
struct Reflex {
  T dra_mas, ddec_mas;
  T pmra_mas_yr, pmdec_mas_yr;
  T rv_km_s;
};

/// Given: orbit o, semi-major axis a_au of the relative orbit, mass ratio
/// q = m2/(m1+m2), parallax_mas, time t_yr.
template <typename T>
Reflex<T> host_reflex(const Orbit<T>& o, const T& a_au, const T& q, const T& parallax_mas,
                      double t_yr) {
  const OrbitPoint<T> p = orbit_point(o, t_yr);
  const T s = -q * a_au * parallax_mas;  // mas per unit of a, host side
  return {s * p.y, s * p.x, s * p.vy, s * p.vx, -q * a_au * p.vz * T(units::kKmsPerAuYr)};
}

/// Elements of a bound relative orbit from its state at one epoch: the
/// inverse of orbit_point (same frame: x north, y east, z away from the
/// observer). The eccentricity vector and the angular momentum give e, i,
/// Omega and omega; the vis-viva equation a; the eccentric anomaly from the
/// position in the orbital plane (e.g. Murray & Dermott 1999, Solar System
/// Dynamics, Sect. 2.8).
template <typename T>
struct StateElements {
  T a;               ///< semi-major axis (unit of r)
  T ecc;
  T cos_inc;         ///< cos i (i in [0, pi])
  T node_rad;        ///< Omega, in (-pi, pi]
  T arg_peri_rad;    ///< omega, in (-pi, pi]
  T mean_anom_rad;   ///< mean anomaly at the epoch of the state, in (-pi, pi]
  T e_cos_w, e_sin_w;  ///< the eccentricity vector on the node and its normal in the orbit plane
};

/// Given: position r and velocity v (e.g. AU and AU/yr), gm = G (m1 + m2)
/// in the matching unit (e.g. AU^3/yr^2, units::kGMSunAu3Yr2 x Msun).
/// Returns false for a state that is not a bound orbit with 0 < e < 1 and
/// non-zero angular momentum.
template <typename T>
bool elements_from_state(const T r[3], const T v[3], const T& gm, StateElements<T>& el) {
  using std::atan2;
  using std::sin;
  using std::sqrt;
  const T rn = sqrt(r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
  const T v2 = v[0] * v[0] + v[1] * v[1] + v[2] * v[2];
  const T inv_a = T(2.0) / rn - v2 / gm;  // vis-viva
  if (!(inv_a > T(0.0))) return false;
  const T h[3] = {r[1] * v[2] - r[2] * v[1], r[2] * v[0] - r[0] * v[2], r[0] * v[1] - r[1] * v[0]};
  const T hn = sqrt(h[0] * h[0] + h[1] * h[1] + h[2] * h[2]);
  if (!(hn > T(0.0))) return false;
  const T w[3] = {h[0] / hn, h[1] / hn, h[2] / hn};  // (sin i sin Omega, -sin i cos Omega, cos i)
  // Eccentricity vector (v x h) / gm - r / |r|.
  const T ev[3] = {(v[1] * h[2] - v[2] * h[1]) / gm - r[0] / rn, (v[2] * h[0] - v[0] * h[2]) / gm - r[1] / rn,
                   (v[0] * h[1] - v[1] * h[0]) / gm - r[2] / rn};
  const T e = sqrt(ev[0] * ev[0] + ev[1] * ev[1] + ev[2] * ev[2]);
  if (!(e > T(0.0) && e < T(1.0))) return false;
  el.a = T(1.0) / inv_a;
  el.ecc = e;
  el.cos_inc = w[2];
  el.node_rad = atan2(w[0], -w[1]);
  // Node direction n = (cos Omega, sin Omega, 0) and m = w x n, its normal
  // in the orbit plane.
  const T sn = sqrt(w[0] * w[0] + w[1] * w[1]);
  const T n[3] = {-w[1] / sn, w[0] / sn, T(0.0)};
  const T m[3] = {-w[2] * n[1], w[2] * n[0], w[0] * n[1] - w[1] * n[0]};
  el.e_cos_w = ev[0] * n[0] + ev[1] * n[1];
  el.e_sin_w = ev[0] * m[0] + ev[1] * m[1] + ev[2] * m[2];
  el.arg_peri_rad = atan2(el.e_sin_w, el.e_cos_w);
  // Perifocal axes P (to periastron) and Q = w x P; r = a (cos E - e) P + b sin E Q.
  const T P[3] = {ev[0] / e, ev[1] / e, ev[2] / e};
  const T Q[3] = {w[1] * P[2] - w[2] * P[1], w[2] * P[0] - w[0] * P[2], w[0] * P[1] - w[1] * P[0]};
  const T rp = r[0] * P[0] + r[1] * P[1] + r[2] * P[2], rq = r[0] * Q[0] + r[1] * Q[1] + r[2] * Q[2];
  const T E = atan2(rq / (el.a * sqrt(T(1.0) - e * e)), rp / el.a + e);
  el.mean_anom_rad = E - e * sin(E);
  return true;
}

}  // namespace heft
