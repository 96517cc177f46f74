// The one host-mass rule, shared by heft curve and heft fit (and so by
// curve --method profile): the same star gets the same host-mass prior
// everywhere.
#include <catch2/catch.hpp>

#include <cmath>

#include "heft/curve.hpp"
#include "heft/error.hpp"
#include "heft/fit.hpp"
#include "heft/prior.hpp"

using namespace heft;

TEST_CASE("prior: one host-mass rule", "[prior]") {
  HostMass h{};
  REQUIRE(host_mass_prior(0.9, 0.05, 1.2, 0.2, h));
  CHECK(h.mass_msun == 0.9);
  CHECK(h.error_msun == 0.05);  // the star's own mass wins over the defaults
  REQUIRE(host_mass_prior(0.9, kAbsent, 1.2, 0.2, h));
  CHECK(h.error_msun == Approx(0.009).epsilon(1e-15));  // no error: 1 % of the mass
  REQUIRE(host_mass_prior(kAbsent, kAbsent, 1.2, 0.2, h));
  CHECK(h.mass_msun == 1.2);
  CHECK(h.error_msun == 0.2);
  REQUIRE(host_mass_prior(kAbsent, kAbsent, 1.2, kAbsent, h));
  CHECK(h.error_msun == Approx(0.012).epsilon(1e-15));
  CHECK_FALSE(host_mass_prior(kAbsent, kAbsent, kAbsent, kAbsent, h));
  CHECK_FALSE(host_mass_prior(-1.0, 0.1, 1.0, 0.1, h));

  // curve and fit read the same prior from a star without a mass error
  // (once 0 in curve and 1 % in fit).
  StarRecord star;
  star.mass_msun = 0.8;
  bool ok_curve = false, ok_fit = false;
  const AnomalyData d = anomaly_data(star, AnomalyResult{}, kAbsent, kAbsent, ok_curve);
  const StarFile f = star_file_of(star, kAbsent, kAbsent, ok_fit);
  REQUIRE(ok_curve);
  REQUIRE(ok_fit);
  CHECK(d.host_mass_msun == f.host_mass.center_msun);
  CHECK(d.host_mass_error_msun == f.host_mass.width);
  CHECK(d.host_mass_error_msun == Approx(0.008).epsilon(1e-15));
}

TEST_CASE("prior: one companion-mass prior for curve, fit and the profile curve", "[prior]") {
  PriorOptions p;
  p.m_min_mjup = 2.0;
  p.m_max_mjup = 50.0;
  const MassPrior det = p.mass_prior(false), ul = p.mass_prior(true);
  CHECK_FALSE(det.upper_limit());
  CHECK(ul.upper_limit());
  CHECK(det.floor_mjup() == 2.0);
  CHECK(ul.m_min_mjup == 0.0);  // uniform on [0, m_max]: m_min plays no part
  CHECK(ul.floor_mjup() == kUpperLimitFloorFraction * 50.0);
  // Densities of x = ln m: log-uniform in m is flat in x; uniform in m is
  // proportional to e^x, ln density x (change of variables, dm = m dx).
  const double x = std::log(10.0);
  CHECK(det.log_density_ln_mass(x, x) == 0.0);
  CHECK(ul.log_density_ln_mass(x, x) == x);
  CHECK(std::isinf(det.log_density_ln_mass(0.0, 0.0)));                          // 1 MJup < m_min
  CHECK(std::isinf(ul.log_density_ln_mass(std::log(60.0), std::log(60.0))));    // above m_max
  CHECK(ul.describe().find("uniform in companion mass on [0, m_max]") == 0);
  CHECK(p.upper_limit(2.99));
  CHECK_FALSE(p.upper_limit(3.0));
  CHECK(p.upper_limit(std::nan("")));  // no significance: no detection
  PriorOptions bad = p;
  bad.m_min_mjup = 60.0;
  CHECK_THROWS_AS(bad.validate(), UsageError);
  bad = p;
  bad.ecc = {Distribution::Kind::kUniform, 0.0, 1.2};
  CHECK_THROWS_AS(bad.validate(), UsageError);
  CHECK_NOTHROW(p.validate());

  // The fit takes the same prior: an upper limit without imaging, a
  // detection as soon as the star has relative astrometry.
  StarRecord star;
  star.id = "P";
  star.mass_msun = 1.0;
  star.early = {1991.25, 0, 0, 10, 0, 0, 1, 1, 1, 1, 1, {}, 1989.85, 1993.21};
  star.late = {2016.0, 0, 0, 10, 0, 0, 0.1, 0.1, 0.1, 0.1, 0.1, {}, 2014.57, 2017.41};
  bool ok = false;
  StarFile f = star_file_of(star, kAbsent, kAbsent, ok);
  REQUIRE(ok);
  AnomalyResult r;
  r.sig_joint = 1.0;
  r.pml_cov = Eigen::Matrix2d::Identity();
  r.dpm_cov = Eigen::Matrix4d::Identity();
  r.pml_dpm_cov.setZero();
  r.pml_late_mas_yr.setZero();
  r.dpm_late_mas_yr.setZero();
  r.dpm_early_mas_yr.setZero();
  FitOptions fo;
  fo.prior = p;
  const FitModel limit(f, r, fo);
  CHECK(limit.upper_limit());
  CHECK(limit.mass_floor_mjup() == ul.floor_mjup());
  f.relative.push_back({2024.0, false, 100.0, 50.0, 1.0, 1.0, 0.0});
  const FitModel imaged(f, r, fo);
  CHECK_FALSE(imaged.upper_limit());
  CHECK(imaged.mass_floor_mjup() == det.floor_mjup());
}
