#include <erfa.h>
#include <erfam.h>

#include <catch2/catch.hpp>

#include "heft/units.hpp"

using namespace heft::units;

TEST_CASE("km/s per AU/yr derived from the IAU 2012 au and the Julian year", "[units]") {
  // Source: IAU 2012 Resolution B2 (au = 149,597,870.7 km exactly) and the
  // Julian year of 365.25 d of 86400 s: 149597870.7 / 31557600 = 4.740470463533348...
  CHECK(kKmsPerAuYr == Approx(149597870.7 / 31557600.0).epsilon(1e-16));
  CHECK(kKmsPerAuYr == Approx(4.740470463533348).epsilon(1e-15));
  // The value 4.740470446 of the Hipparcos catalogue documentation (ESA 1997,
  // IAU 1976 au) is only mentioned: it differs by ~4e-9 relative.
  CHECK(std::abs(kKmsPerAuYr / 4.740470446 - 1.0) < 5e-9);
  CHECK(std::abs(kKmsPerAuYr / 4.740470446 - 1.0) > 3e-9);
}

TEST_CASE("constants agree with IAU SOFA/ERFA", "[units]") {
  // Source: ERFA erfam.h (ERFA_DAU, ERFA_DJY, ERFA_DAYSEC, ERFA_DR2AS).
  CHECK(kAuM == ERFA_DAU);
  CHECK(kJulianYearDays == ERFA_DJY);
  CHECK(kDaySeconds == ERFA_DAYSEC);
  CHECK(kMasPerRad == Approx(ERFA_DR2AS * 1e3).epsilon(1e-15));
}

TEST_CASE("nominal mass parameters", "[units]") {
  // Source: IAU 2015 Resolution B3: GM_sun = 1.3271244e20, GM_jup = 1.2668653e17 m^3 s^-2.
  CHECK(kGMSunM3S2 == 1.3271244e20);
  CHECK(kGMJupM3S2 == 1.2668653e17);
  // Ratio ~1047.57 (common practice, from memory).
  CHECK(kMjupPerMsun == Approx(1047.57).epsilon(1e-5));
  // Kepler's third law in AU, yr, Msun: GM_sun ~ 4 pi^2 to ~1e-4 (the Gaussian
  // constant with the Julian year; common practice, no source).
  CHECK(kGMSunAu3Yr2 == Approx(4.0 * kPi * kPi).epsilon(2e-4));
}
