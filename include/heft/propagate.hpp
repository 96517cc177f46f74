#pragma once
/// \file propagate.hpp
/// Rigorous epoch propagation of astrometric parameters under uniform space
/// motion, with perspective effects; templated on the scalar so that Ceres
/// Jets carry exact derivatives through it.
///
/// Reference: ESA 1997, The Hipparcos and Tycho Catalogues, ESA SP-1200,
/// Vol. 1, Sect. 1.5.5 ("rigorous treatment"); the same kinematic model as
/// IAU SOFA/ERFA eraStarpm, less its light-time correction.

#include <cmath>

#include "heft/units.hpp"

namespace heft {

/// Astrometric state of a star at one epoch.
/// ra_rad, dec_rad: ICRS coordinates (rad); parallax_mas (mas);
/// pmra_mas_yr = mu_alpha* = mu_alpha cos(dec) and pmdec_mas_yr (mas/yr);
/// rv_km_s: radial velocity (km/s, positive receding).
template <typename T>
struct SkyState {
  T ra_rad, dec_rad, parallax_mas, pmra_mas_yr, pmdec_mas_yr, rv_km_s;
};

/// Normal triad at (ra, dec): p (towards east), q (towards north), r (radial).
template <typename T>
void normal_triad(const T& ra_rad, const T& dec_rad, T p[3], T q[3], T r[3]) {
  using std::cos;
  using std::sin;
  const T sa = sin(ra_rad), ca = cos(ra_rad), sd = sin(dec_rad), cd = cos(dec_rad);
  p[0] = -sa;      p[1] = ca;       p[2] = T(0.0);
  q[0] = -sd * ca; q[1] = -sd * sa; q[2] = cd;
  r[0] = cd * ca;  r[1] = cd * sa;  r[2] = sd;
}

/// Unit vector -> (ra in [0, 2 pi), dec), both rad.
template <typename T>
void direction_to_radec(const T u[3], T& ra_rad, T& dec_rad) {
  using std::atan2;
  using std::sqrt;
  ra_rad = atan2(u[1], u[0]);
  if (ra_rad < T(0.0)) ra_rad += T(units::kTwoPi);
  dec_rad = atan2(u[2], sqrt(u[0] * u[0] + u[1] * u[1]));
}

/// The direction and proper-motion vector after dt_yr Julian years (either
/// sign) under uniform space motion, from a state given by its normal triad
/// (p, q, r) at t0, its proper motion and its radial proper motion.
///
/// Given: p, q, r (normal_triad at t0); pmra_mas_yr, pmdec_mas_yr (mas/yr);
///        mur_rad_yr = rv * parallax / A (rad/yr); dt_yr = t - t0.
/// Returned: u (unit direction at t); mu (proper-motion vector at t, rad/yr);
///        f (the distance at t0 over the distance at t).
/// Notes:
/// 1. f = [1 + 2 mu_r t + (mu^2 + mu_r^2) t^2]^(-1/2);
///    u = [r0 (1 + mu_r t) + mu0_vec t] f;
///    mu_vec = [mu0_vec (1 + mu_r t) - r0 mu^2 t] f^3
///    (ESA 1997, Vol. 1, Eqs. 1.5.13-1.5.19).
/// 2. For callers that have the triad already, or that know the direction
///    at t (long_baseline_pm): the rest of propagate() is trigonometry.
template <typename T>
void propagate_vectors(const T p[3], const T q[3], const T r[3], const T& pmra_mas_yr, const T& pmdec_mas_yr,
                       const T& mur_rad_yr, double dt_yr, T u[3], T mu[3], T& f) {
  using std::sqrt;
  const T to_rad = T(1.0 / units::kMasPerRad);
  const T mua = pmra_mas_yr * to_rad, mud = pmdec_mas_yr * to_rad;
  T mu0[3];
  for (int k = 0; k < 3; ++k) mu0[k] = p[k] * mua + q[k] * mud;
  const T mu2 = mua * mua + mud * mud;
  const T t(dt_yr);
  const T one_mur_t = T(1.0) + mur_rad_yr * t;
  f = T(1.0) / sqrt(T(1.0) + T(2.0) * mur_rad_yr * t + (mu2 + mur_rad_yr * mur_rad_yr) * t * t);
  const T f3 = f * f * f;
  for (int k = 0; k < 3; ++k) {
    u[k] = (r[k] * one_mur_t + mu0[k] * t) * f;
    mu[k] = (mu0[k] * one_mur_t - r[k] * mu2 * t) * f3;
  }
}

/// Propagates a state by dt_yr Julian years (either sign) under uniform
/// space motion.
///
/// Given: s (state at t0), dt_yr = t - t0 (Julian years).
/// Returned: the state at t.
/// Notes:
/// 1. Radial proper motion mu_r = rv * parallax / A (A = units::kKmsPerAuYr);
///    u and mu_vec by propagate_vectors; parallax = parallax0 f;
///    mu_r' = [mu_r + (mu^2 + mu_r^2) t] f^2 (ESA 1997, Vol. 1,
///    Eqs. 1.5.13-1.5.19).
/// 2. No light-time or relativistic terms: the catalogues' own model.
template <typename T>
SkyState<T> propagate(const SkyState<T>& s, double dt_yr) {
  const T to_rad = T(1.0 / units::kMasPerRad);
  T p[3], q[3], r[3];
  normal_triad(s.ra_rad, s.dec_rad, p, q, r);
  const T mur = s.rv_km_s * s.parallax_mas / T(units::kKmsPerAuYr) * to_rad;
  T u[3], mu[3], f;
  propagate_vectors(p, q, r, s.pmra_mas_yr, s.pmdec_mas_yr, mur, dt_yr, u, mu, f);
  SkyState<T> out;
  direction_to_radec(u, out.ra_rad, out.dec_rad);
  T p1[3], q1[3], r1[3];
  normal_triad(out.ra_rad, out.dec_rad, p1, q1, r1);
  out.pmra_mas_yr = (p1[0] * mu[0] + p1[1] * mu[1] + p1[2] * mu[2]) / to_rad;
  out.pmdec_mas_yr = (q1[0] * mu[0] + q1[1] * mu[1] + q1[2] * mu[2]) / to_rad;
  out.parallax_mas = s.parallax_mas * f;
  const T mua = s.pmra_mas_yr * to_rad, mud = s.pmdec_mas_yr * to_rad;
  const T mur1 = (mur + (mua * mua + mud * mud + mur * mur) * T(dt_yr)) * f * f;
  out.rv_km_s = mur1 / to_rad * T(units::kKmsPerAuYr) / out.parallax_mas;
  return out;
}

/// Angle between two directions (rad), from atan2(|u x v|, u . v): accurate
/// for tiny and for near-antipodal separations, unlike acos of the dot.
double angular_separation_rad(double ra1_rad, double dec1_rad, double ra2_rad, double dec2_rad);

/// Offsets of (ra2, dec2) from (ra1, dec1) in the tangent frame at 1:
/// d_ra* (towards east) and d_dec (towards north), mas, by gnomonic
/// projection. Used to compare positions at the micro-arcsecond level.
void tangent_offset_mas(double ra1_rad, double dec1_rad, double ra2_rad, double dec2_rad,
                        double& dra_star_mas, double& ddec_mas);

}  // namespace heft
