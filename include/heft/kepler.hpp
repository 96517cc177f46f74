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

#include <cmath>
#include <vector>

#include "heft/units.hpp"

namespace heft {

/// Solves Kepler's equation E - e sin E = M for the eccentric anomaly.
/// Given: M (rad, any value), e (0 <= e < 1).
/// Returned: E (rad), in the same 2 pi turn as M (E = M at M = k pi).
/// Notes: safeguarded Newton iteration on a bracket, so it converges for
/// every (M, e) including e = 0.99 near M = 0 and 2 pi; accurate to ~1e-15.
double solve_kepler(double mean_anom_rad, double ecc);

/// Batched solve for one eccentricity and many mean anomalies: a cubic
/// Hermite table of E(M) followed by Newton polishing. Same accuracy as
/// solve_kepler.
class KeplerSolver {
 public:
  explicit KeplerSolver(double ecc, int n_nodes = 1024);
  double operator()(double mean_anom_rad) const;
  void solve(const double* mean_anom_rad, double* ecc_anom_rad, std::size_t n) const;
  double ecc() const { return e_; }

 private:
  double e_, h_;
  std::vector<double> E_, dE_, sin_, cos_;
};

/// The value part of a scalar (the Jet's .a), for control flow.
inline double scalar_of(double x) { return x; }
template <int N>
double scalar_of(const ceres::Jet<double, N>& x) {
  return x.a;
}

/// Eccentric anomaly for any scalar: doubles directly; Ceres Jets by the
/// implicit derivative dE = (dM + sin E de) / (1 - e cos E).
inline double eccentric_anomaly(double mean_anom_rad, double ecc) {
  return solve_kepler(mean_anom_rad, ecc);
}
template <int N>
ceres::Jet<double, N> eccentric_anomaly(const ceres::Jet<double, N>& m,
                                        const ceres::Jet<double, N>& e) {
  const double E = solve_kepler(m.a, e.a);
  const double denom = 1.0 - e.a * std::cos(E);
  return ceres::Jet<double, N>(E, (m.v + std::sin(E) * e.v) / denom);
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
  const T E = eccentric_anomaly(mean_anomaly(o, t_yr), o.ecc);
  const ThieleInnes<T> ti = thiele_innes(T(1.0), o.inc_rad, o.arg_peri_rad, o.node_rad);
  const T cE = cos(E), sE = sin(E);
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

}  // namespace heft
