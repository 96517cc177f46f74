#pragma once
/// \file prior.hpp
/// The priors shared by curve, fit, rank and simulate: the distribution
/// type given on the command line, and the one rule for a host mass.

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
