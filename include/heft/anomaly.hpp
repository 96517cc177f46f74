#pragma once
/// \file anomaly.hpp
/// Long-baseline proper motion and proper-motion anomalies at both catalogue
/// epochs, with the full covariance from the exact Jacobian (Ceres Jets)
/// with respect to all ten catalogue parameters and the radial velocity.

#include <Eigen/Core>
#include <cmath>

#include "heft/catalog.hpp"
#include "heft/propagate.hpp"

namespace heft {

/// Long-baseline proper motion: the uniform space motion through the early
/// direction (ra1, dec1) at t1 and the late direction (ra2, dec2) at
/// t2 = t1 + dt_yr, with the late parallax and the late radial velocity.
///
/// Given: ra1_rad, dec1_rad, ra2_rad, dec2_rad (rad); parallax2_mas (mas);
///        rv_km_s (km/s, at t2); dt_yr > 0 (Julian years).
/// Returned: pm_late[2] = (mu_alpha*, mu_delta) at t2 and pm_early[2] at t1
///        (mas/yr), each in the local frame of its own epoch.
/// Notes:
/// 1. In units of the distance at t2, the space velocity is
///    V = mu_r r2 + V_t, and r2 - V dt must point along r1. With
///    c = r1 . r2 this gives, in closed form,
///    V_t = (1 - mu_r dt) (r2 - r1 / c) / dt,  mu_r = rv parallax / A.
/// 2. The early PM then follows from rigorous propagation (propagate.hpp)
///    of the late state by -dt (ESA 1997, Vol. 1, Sect. 1.5.5), read in
///    the early direction's triad (the propagated direction is r1).
template <typename T>
void long_baseline_pm(const T& ra1_rad, const T& dec1_rad, const T& ra2_rad, const T& dec2_rad,
                      const T& parallax2_mas, const T& rv_km_s, double dt_yr, T pm_late[2],
                      T pm_early[2]) {
  T p1[3], q1[3], r1[3], p2[3], q2[3], r2[3];
  normal_triad(ra1_rad, dec1_rad, p1, q1, r1);
  normal_triad(ra2_rad, dec2_rad, p2, q2, r2);
  const T to_rad = T(1.0 / units::kMasPerRad);
  const T mur = rv_km_s * parallax2_mas / T(units::kKmsPerAuYr) * to_rad;  // rad/yr
  const T c = r1[0] * r2[0] + r1[1] * r2[1] + r1[2] * r2[2];
  const T scale = (T(1.0) - mur * T(dt_yr)) / T(dt_yr);
  T vt[3];
  for (int k = 0; k < 3; ++k) vt[k] = scale * (r2[k] - r1[k] / c);
  pm_late[0] = (p2[0] * vt[0] + p2[1] * vt[1] + p2[2] * vt[2]) / to_rad;
  pm_late[1] = (q2[0] * vt[0] + q2[1] * vt[1] + q2[2] * vt[2]) / to_rad;
  // The motion propagated back to t1 points along r1 by construction, so
  // its proper motion is read in the early triad (p1, q1): the same values
  // as propagate()'s, without its atan2s and second triad.
  T u[3], mu[3], f;
  propagate_vectors(p2, q2, r2, pm_late[0], pm_late[1], mur, -dt_yr, u, mu, f);
  pm_early[0] = (p1[0] * mu[0] + p1[1] * mu[1] + p1[2] * mu[2]) / to_rad;
  pm_early[1] = (q1[0] * mu[0] + q1[1] * mu[1] + q1[2] * mu[2]) / to_rad;
}

/// Number of input parameters of the anomaly model: early 5, late 5, rv.
inline constexpr int kAnomalyInputs = 11;
/// Outputs: pml_late (2), dpm_late (2), dpm_early (2), reflex_vel_late (1).
inline constexpr int kAnomalyOutputs = 7;

/// The anomaly model as a function of offsets from the catalogue values:
/// x = (d_alpha*1, d_delta1 [mas], d_parallax1 [mas], d_pmra1, d_pmdec1
/// [mas/yr], the same five for the late catalogue, d_rv [km/s]).
/// Output y as listed at kAnomalyOutputs; reflex_vel_late in m/s.
struct AnomalyModel {
  AnomalyModel(const Astrometry& early, const Astrometry& late, double rv_km_s);

  template <typename T>
  void operator()(const T* x, T* y) const;

  /// The inputs that the long-baseline PM depends on; the others enter y
  /// linearly (parallax1 not at all).
  static constexpr int kBaselineInputs[6] = {0, 1, 5, 6, 7, 10};
  /// The model in two parts, y = assemble(x, baseline(x)), so that the
  /// Jacobian can carry through the costly first part only the derivatives
  /// it has (anomaly_jacobian). baseline: long_baseline_pm at the offsets x.
  template <typename T>
  void baseline(const T* x, T pml_late[2], T pml_early[2]) const;
  template <typename T>
  void assemble(const T* x, const T pml_late[2], const T pml_early[2], T* y) const;

  double ra1_rad, dec1_rad, ra2_rad, dec2_rad, plx2_mas, rv_km_s, dt_yr;
  double pm1[2], pm2[2];
};

/// Everything the screen reports for one star (units in the names).
struct AnomalyResult {
  double dt_yr = kAbsent;
  Eigen::Vector2d pml_late_mas_yr;
  Eigen::Matrix2d pml_cov;
  Eigen::Vector2d dpm_late_mas_yr, dpm_early_mas_yr;
  /// Covariance of (dpm_late ra, dec, dpm_early ra, dec), (mas/yr)^2.
  Eigen::Matrix4d dpm_cov;
  /// Cross-covariance of pml_late (rows) with the dpm vector (columns).
  Eigen::Matrix<double, 2, 4> pml_dpm_cov;
  double chi2_late = kAbsent, chi2_early = kAbsent, chi2_joint = kAbsent;
  double sig_late = kAbsent, sig_joint = kAbsent;
  double reflex_vel_late_m_s = kAbsent, reflex_vel_late_error_m_s = kAbsent;
  /// Share of the trace of the 4x4 anomaly covariance that comes from the
  /// RV's uncertainty (0 with an exact RV).
  double rv_cov_share = kAbsent;
};

/// Computes the anomaly of a calibrated star.
/// Given: early, late (calibrated catalogue solutions), rv_km_s and
///        rv_error_km_s (measured, or assumed with its prior width).
/// Returned: the result; `ok` false with `why` set when a covariance is
///        singular (the caller flags the row failed:<why>).
AnomalyResult compute_anomaly(const Astrometry& early, const Astrometry& late, double rv_km_s,
                              double rv_error_km_s, bool& ok, std::string& why);

/// Jacobian (kAnomalyOutputs x kAnomalyInputs) of AnomalyModel at x = 0, by
/// Ceres automatic differentiation (the baseline part in Jets of its six
/// inputs, then the chain rule through Jets of all eleven); `y` receives
/// the values.
Eigen::Matrix<double, kAnomalyOutputs, kAnomalyInputs> anomaly_jacobian(
    const AnomalyModel& model, Eigen::Matrix<double, kAnomalyOutputs, 1>& y);

}  // namespace heft
