#pragma once
/// \file units.hpp
/// Physical constants and unit conversions used everywhere in heft.
///
/// Every constant names its unit and its source. Conversions between file
/// units (deg, mas, mas/yr, km/s, Julian years) and internal units (rad,
/// rad/yr) happen through these names only.

#include <numbers>

namespace heft::units {

/// Astronomical unit (km). IAU 2012 Resolution B2 (exact).
inline constexpr double kAuKm = 149597870.7;
/// Astronomical unit (m). IAU 2012 Resolution B2 (exact).
inline constexpr double kAuM = kAuKm * 1e3;
/// Day (s) and Julian year (days, s). IAU definition.
inline constexpr double kDaySeconds = 86400.0;
inline constexpr double kJulianYearDays = 365.25;
inline constexpr double kJulianYearSeconds = kJulianYearDays * kDaySeconds;
/// Speed of 1 AU per Julian year, in km/s: 4.740470463533348...
/// Derived from the IAU 2012 au; the value 4.740470446 quoted in the
/// Hipparcos catalogue documentation (ESA 1997) comes from the IAU 1976 au.
inline constexpr double kKmsPerAuYr = kAuKm / kJulianYearSeconds;

/// Nominal solar mass parameter GM_sun (m^3 s^-2). IAU 2015 Resolution B3.
inline constexpr double kGMSunM3S2 = 1.3271244e20;
/// Nominal Jupiter mass parameter GM_jup (m^3 s^-2). IAU 2015 Resolution B3.
inline constexpr double kGMJupM3S2 = 1.2668653e17;
/// Jupiter masses per solar mass (ratio of the two nominal values).
inline constexpr double kMjupPerMsun = kGMSunM3S2 / kGMJupM3S2;
/// GM_sun in AU^3 / Julian yr^2 (about 4 pi^2): Kepler's third law is
/// P_yr^2 = 4 pi^2 a_au^3 / (kGMSunAu3Yr2 * M_msun).
inline constexpr double kGMSunAu3Yr2 =
    kGMSunM3S2 * kJulianYearSeconds * kJulianYearSeconds / (kAuM * kAuM * kAuM);

/// Plausibility limits of a star's astrometry (screen notes implausible_*),
/// facts of the trade quoted from memory: the largest known proper motion,
/// Barnard's star, is 10.39 arcsec/yr; the largest parallax, Proxima
/// Centauri, 768 mas; the Galaxy's local escape speed is about 550 km/s
/// (Piffl et al. 2014, A&A 562, A91). The limits leave room above each.
inline constexpr double kImplausiblePmMasYr = 11000.0;
inline constexpr double kImplausibleParallaxMas = 800.0;
inline constexpr double kImplausibleVtanKmS = 1000.0;

/// Floor of the default RV prior width of a star without an RV (km/s): the
/// order of the local disc's velocity dispersion per axis (about 20-40 km/s,
/// e.g. Dehnen & Binney 1998, MNRAS 298, 387; from memory).
inline constexpr double kRvPriorFloorKmS = 30.0;
/// Share of the anomaly covariance (trace) above which the assumed RV's
/// term is said to dominate it (screen note rv_prior_dominates).
inline constexpr double kRvDominatesShare = 0.5;

inline constexpr double kPi = std::numbers::pi;
inline constexpr double kTwoPi = 2.0 * std::numbers::pi;
/// Degrees per radian; milliarcseconds per radian.
inline constexpr double kDegPerRad = 180.0 / std::numbers::pi;
inline constexpr double kMasPerRad = kDegPerRad * 3600.0e3;
/// Microarcseconds per milliarcsecond.
inline constexpr double kUasPerMas = 1.0e3;

inline constexpr double deg_to_rad(double deg) { return deg / kDegPerRad; }
inline constexpr double rad_to_deg(double rad) { return rad * kDegPerRad; }
inline constexpr double mas_to_rad(double mas) { return mas / kMasPerRad; }
inline constexpr double rad_to_mas(double rad) { return rad * kMasPerRad; }

}  // namespace heft::units
