#include "heft/simulate.hpp"

#include <Eigen/Cholesky>

#include "heft/units.hpp"

namespace heft {

CatalogueModel default_early_model() {
  return {1991.25, 1989.85, 1993.21, 0.5, 1.0, 0.5, 1.0, 0.3};
}

CatalogueModel default_late_model() {
  return {2016.0, 2014.57, 2017.41, 0.02, 0.05, 0.02, 0.05, 0.3};
}

Eigen::Matrix<double, 5, 5> random_covariance(const CatalogueModel& m, Rng& rng) {
  Eigen::Matrix<double, 5, 5> a = Eigen::Matrix<double, 5, 5>::Identity();
  for (int i = 0; i < 5; ++i)
    for (int j = 0; j < 5; ++j) a(i, j) += m.corr_scale * rng.normal();
  Eigen::Matrix<double, 5, 5> s = a * a.transpose();
  Eigen::Matrix<double, 5, 1> sig;
  for (int i = 0; i < 3; ++i) sig(i) = rng.log_uniform(m.pos_error_lo_mas, m.pos_error_hi_mas);
  for (int i = 3; i < 5; ++i) sig(i) = rng.log_uniform(m.pm_error_lo_mas_yr, m.pm_error_hi_mas_yr);
  Eigen::Matrix<double, 5, 5> c;
  for (int i = 0; i < 5; ++i)
    for (int j = 0; j < 5; ++j) c(i, j) = s(i, j) / std::sqrt(s(i, i) * s(j, j)) * sig(i) * sig(j);
  return c;
}

void add_noise(Astrometry& a, Rng& rng) {
  Eigen::LLT<Eigen::Matrix<double, 5, 5>> llt(a.covariance());
  Eigen::Matrix<double, 5, 1> z;
  for (int i = 0; i < 5; ++i) z(i) = rng.normal();
  const Eigen::Matrix<double, 5, 1> d = llt.matrixL() * z;
  const double cosd = std::cos(units::deg_to_rad(a.dec_deg));
  a.ra_deg += units::rad_to_deg(units::mas_to_rad(d(0)) / cosd);
  a.ra_deg = std::fmod(a.ra_deg + 360.0, 360.0);
  a.dec_deg += units::rad_to_deg(units::mas_to_rad(d(1)));
  a.parallax_mas += d(2);
  a.pmra_mas_yr += d(3);
  a.pmdec_mas_yr += d(4);
}

Astrometry make_astrometry(const SkyState<double>& truth, const CatalogueModel& m, Rng& rng,
                           bool noise) {
  Astrometry a;
  a.epoch_yr = m.epoch_yr;
  a.window_start_yr = m.window_start_yr;
  a.window_end_yr = m.window_end_yr;
  a.ra_deg = units::rad_to_deg(truth.ra_rad);
  a.dec_deg = units::rad_to_deg(truth.dec_rad);
  a.parallax_mas = truth.parallax_mas;
  a.pmra_mas_yr = truth.pmra_mas_yr;
  a.pmdec_mas_yr = truth.pmdec_mas_yr;
  a.set_covariance(random_covariance(m, rng));
  if (noise) add_noise(a, rng);
  return a;
}

}  // namespace heft
