// The one host-mass rule, shared by heft curve and heft fit (and so by
// curve --method profile): the same star gets the same host-mass prior
// everywhere.
#include <catch2/catch.hpp>

#include "heft/curve.hpp"
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
