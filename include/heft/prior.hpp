#pragma once
/// \file prior.hpp
/// The priors shared by curve, fit, rank and simulate: the distribution
/// type given on the command line, the one companion-mass prior, the
/// options every prior-using command embeds, and the one rule for a host
/// mass. docs/method.md, Sect. 8 and 9.

#include <cmath>
#include <limits>
#include <string>

#include "heft/rng.hpp"

namespace heft {

/// A one-parameter-family distribution given on the command line:
/// "V" or "fixed:V", "uniform:A,B", "loguniform:A,B", "beta:A,B".
struct Distribution {
  enum class Kind { kFixed, kUniform, kLogUniform, kBeta } kind = Kind::kFixed;
  double p1 = 0.0, p2 = 0.0;
  double draw(Rng& rng) const;
  /// Log density at x (-inf outside the support; 0 for kFixed).
  double log_pdf(double x) const;
  std::string str() const;
  /// Parses the text form; throws UsageError naming `option`.
  static Distribution parse(const std::string& text, const std::string& option);
};

/// Lower end of an upper limit's uniform mass prior where a coordinate in
/// ln mass needs one (the fit, the profile curve): this fraction of m_max.
/// The prior mass cut off, 1e-4, is far below any quoted quantile.
inline constexpr double kUpperLimitFloorFraction = 1e-4;

/// The companion-mass prior of heft, the same in curve, fit and rank.
/// A detection is log-uniform on [m_min, m_max]; an upper limit (a star
/// below --detect-sigma without relative astrometry) is uniform in mass on
/// [0, m_max], so that the limit does not depend on m_min.
struct MassPrior {
  enum class Kind { kLogUniform, kUniform } kind = Kind::kLogUniform;
  double m_min_mjup = 0.1, m_max_mjup = 200.0;  ///< kUniform: m_min_mjup is 0

  bool upper_limit() const { return kind == Kind::kUniform; }
  /// Lower end in the ln-mass coordinate of the fit: m_min, or
  /// kUpperLimitFloorFraction m_max for an upper limit.
  double floor_mjup() const { return upper_limit() ? kUpperLimitFloorFraction * m_max_mjup : m_min_mjup; }
  /// ln of the prior density of x = ln(mass / MJup), up to a constant:
  /// 0 (log-uniform) or x (uniform in mass), -inf outside [floor, m_max].
  /// Templated for Ceres Jets (the bounds test uses the value only).
  template <typename T>
  T log_density_ln_mass(const T& x, double x_value) const {
    if (!(x_value >= std::log(floor_mjup()) && x_value <= std::log(m_max_mjup)))
      return T(-std::numeric_limits<double>::infinity());
    return upper_limit() ? x : T(0.0);
  }
  /// One-line description for the JSON "priors" object and --help.
  std::string describe() const;
};

/// The prior choices every prior-using command takes (curve, fit, rank):
/// embedded in CurveOptions and FitOptions, bound once on the command line.
struct PriorOptions {
  double m_min_mjup = 0.1, m_max_mjup = 200.0;  ///< mass prior bounds (MJup)
  Distribution ecc{Distribution::Kind::kUniform, 0.0, 0.95};
  /// Below this sig_joint (and without relative astrometry) a star gets an
  /// upper limit with the uniform mass prior.
  double detect_sigma = 3.0;

  bool upper_limit(double sig_joint) const { return !(sig_joint >= detect_sigma); }
  MassPrior mass_prior(bool upper_limit) const;
  /// Throws UsageError naming the option when the bounds are not ordered
  /// or the eccentricity prior leaves [0, 1).
  void validate() const;
};

/// What the mass prior is, in words, for --help (both modes).
std::string mass_prior_help();

/// A host-mass prior: normal with `mass_msun` and `error_msun` (Msun).
struct HostMass {
  double mass_msun, error_msun;
};

/// The one host-mass rule of heft. The star's own `mass` (with
/// `mass_error`) wins; a star without one takes `default_msun` and
/// `default_error_msun` (the --host-mass options; absent = NaN). A mass
/// without a positive error gets kDefaultHostMassRelError of the mass (no
/// host mass is known exactly). Returns false when there is no mass.
bool host_mass_prior(double star_mass_msun, double star_mass_error_msun, double default_msun,
                     double default_error_msun, HostMass& out);
/// Relative error given to a host mass without one.
inline constexpr double kDefaultHostMassRelError = 0.01;

}  // namespace heft
