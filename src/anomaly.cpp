#include "heft/anomaly.hpp"

#include <ceres/jet.h>

#include <iterator>

#include "heft/stats.hpp"

namespace heft {

AnomalyModel::AnomalyModel(const Astrometry& early, const Astrometry& late, double rv)
    : ra1_rad(units::deg_to_rad(early.ra_deg)),
      dec1_rad(units::deg_to_rad(early.dec_deg)),
      ra2_rad(units::deg_to_rad(late.ra_deg)),
      dec2_rad(units::deg_to_rad(late.dec_deg)),
      plx2_mas(late.parallax_mas),
      rv_km_s(rv),
      dt_yr(late.epoch_yr - early.epoch_yr),
      pm1{early.pmra_mas_yr, early.pmdec_mas_yr},
      pm2{late.pmra_mas_yr, late.pmdec_mas_yr} {}

template <typename T>
void AnomalyModel::baseline(const T* x, T pml_late[2], T pml_early[2]) const {
  using std::cos;
  const T mas = T(1.0 / units::kMasPerRad);
  // Offsets in alpha* are along the small circle: d_alpha = d_alpha* / cos(dec).
  const T ra1 = T(ra1_rad) + x[0] * mas / T(cos(dec1_rad));
  const T dec1 = T(dec1_rad) + x[1] * mas;
  const T ra2 = T(ra2_rad) + x[5] * mas / T(cos(dec2_rad));
  const T dec2 = T(dec2_rad) + x[6] * mas;
  const T plx2 = T(plx2_mas) + x[7];
  const T rv = T(rv_km_s) + x[10];
  long_baseline_pm(ra1, dec1, ra2, dec2, plx2, rv, dt_yr, pml_late, pml_early);
}

template <typename T>
void AnomalyModel::assemble(const T* x, const T pml_late[2], const T pml_early[2], T* y) const {
  using std::sqrt;
  const T plx2 = T(plx2_mas) + x[7];
  y[0] = pml_late[0];
  y[1] = pml_late[1];
  y[2] = T(pm2[0]) + x[8] - pml_late[0];
  y[3] = T(pm2[1]) + x[9] - pml_late[1];
  y[4] = T(pm1[0]) + x[3] - pml_early[0];
  y[5] = T(pm1[1]) + x[4] - pml_early[1];
  // Tangential velocity anomaly (m/s); the tiny offset keeps the derivative
  // of the norm finite at exactly zero anomaly.
  const T norm = sqrt(y[2] * y[2] + y[3] * y[3] + T(1e-300));
  y[6] = norm * T(units::kKmsPerAuYr * 1e3) / plx2;
}

template <typename T>
void AnomalyModel::operator()(const T* x, T* y) const {
  T pml_late[2], pml_early[2];
  baseline(x, pml_late, pml_early);
  assemble(x, pml_late, pml_early, y);
}

template void AnomalyModel::operator()(const double*, double*) const;

Eigen::Matrix<double, kAnomalyOutputs, kAnomalyInputs> anomaly_jacobian(
    const AnomalyModel& model, Eigen::Matrix<double, kAnomalyOutputs, 1>& y) {
  // The baseline's trigonometry is most of the Jacobian's cost and depends
  // on six inputs: Jets of six there, of all eleven only in assemble.
  constexpr int kNb = std::size(AnomalyModel::kBaselineInputs);
  using BaseJet = ceres::Jet<double, kNb>;
  using Jet = ceres::Jet<double, kAnomalyInputs>;
  BaseJet xb[kAnomalyInputs], late_b[2], early_b[2];
  for (int i = 0; i < kAnomalyInputs; ++i) xb[i] = BaseJet(0.0);
  for (int k = 0; k < kNb; ++k) xb[AnomalyModel::kBaselineInputs[k]] = BaseJet(0.0, k);
  model.baseline(xb, late_b, early_b);
  const auto widen = [](const BaseJet& b) {
    Jet j(b.a);
    for (int k = 0; k < kNb; ++k) j.v(AnomalyModel::kBaselineInputs[k]) = b.v(k);
    return j;
  };
  const Jet pml_late[2] = {widen(late_b[0]), widen(late_b[1])};
  const Jet pml_early[2] = {widen(early_b[0]), widen(early_b[1])};
  Jet x[kAnomalyInputs], out[kAnomalyOutputs];
  for (int i = 0; i < kAnomalyInputs; ++i) x[i] = Jet(0.0, i);
  model.assemble(x, pml_late, pml_early, out);
  Eigen::Matrix<double, kAnomalyOutputs, kAnomalyInputs> jac;
  for (int r = 0; r < kAnomalyOutputs; ++r) {
    y(r) = out[r].a;
    jac.row(r) = out[r].v.transpose();
  }
  return jac;
}

AnomalyResult compute_anomaly(const Astrometry& early, const Astrometry& late, double rv_km_s,
                              double rv_error_km_s, bool& ok, std::string& why) {
  const AnomalyModel model(early, late, rv_km_s);
  Eigen::Matrix<double, kAnomalyOutputs, 1> y;
  const auto jac = anomaly_jacobian(model, y);
  // The input covariance is block diagonal (catalogues independent, rv
  // separate): sum the three blocks' contributions with small fixed-size
  // products instead of one 11x11 sandwich.
  const Eigen::Matrix<double, kAnomalyOutputs, 5> je = jac.leftCols<5>();
  const Eigen::Matrix<double, kAnomalyOutputs, 5> jl = jac.middleCols<5>(5);
  const Eigen::Matrix<double, kAnomalyOutputs, 1> jr = jac.col(10);
  const Eigen::Matrix<double, kAnomalyOutputs, kAnomalyOutputs> c_rv =
      (rv_error_km_s * rv_error_km_s) * jr * jr.transpose();
  // The sum is symmetric: its upper triangle, mirrored.
  Eigen::Matrix<double, kAnomalyOutputs, kAnomalyOutputs> upper;
  upper.triangularView<Eigen::Upper>() =
      je.lazyProduct(early.covariance()).lazyProduct(je.transpose()) +
      jl.lazyProduct(late.covariance()).lazyProduct(jl.transpose()) + c_rv;
  const Eigen::Matrix<double, kAnomalyOutputs, kAnomalyOutputs> cout =
      upper.selfadjointView<Eigen::Upper>();

  AnomalyResult r;
  r.dt_yr = model.dt_yr;
  r.pml_late_mas_yr = y.segment<2>(0);
  r.pml_cov = cout.block<2, 2>(0, 0);
  r.dpm_late_mas_yr = y.segment<2>(2);
  r.dpm_early_mas_yr = y.segment<2>(4);
  r.dpm_cov = cout.block<4, 4>(2, 2);
  r.pml_dpm_cov = cout.block<2, 4>(0, 2);
  r.rv_cov_share = c_rv.block<4, 4>(2, 2).trace() / r.dpm_cov.trace();
  r.chi2_late = mahalanobis_sq<2>(r.dpm_late_mas_yr, r.dpm_cov.block<2, 2>(0, 0));
  r.chi2_early = mahalanobis_sq<2>(r.dpm_early_mas_yr, r.dpm_cov.block<2, 2>(2, 2));
  r.chi2_joint = mahalanobis_sq<4>(y.segment<4>(2), r.dpm_cov);
  ok = std::isfinite(r.chi2_late) && std::isfinite(r.chi2_early) && std::isfinite(r.chi2_joint) &&
       y.allFinite();
  if (!ok) {
    why = y.allFinite() ? "singular_anomaly_covariance" : "non_finite_model";
    return r;
  }
  r.sig_late = chi2_to_sigma(r.chi2_late, 2);
  r.sig_joint = chi2_to_sigma(r.chi2_joint, 4);
  r.reflex_vel_late_m_s = y(6);
  r.reflex_vel_late_error_m_s = std::sqrt(cout(6, 6));
  return r;
}

}  // namespace heft
