#include "heft/prior.hpp"

#include <cmath>
#include <limits>

#include "heft/error.hpp"
#include "heft/io.hpp"

namespace heft {

double Distribution::draw(Rng& rng) const {
  switch (kind) {
    case Kind::kFixed: return p1;
    case Kind::kUniform: return rng.uniform(p1, p2);
    case Kind::kLogUniform: return rng.log_uniform(p1, p2);
    case Kind::kBeta: return rng.beta(p1, p2);
  }
  return p1;
}

double Distribution::log_pdf(double x) const {
  const double ninf = -std::numeric_limits<double>::infinity();
  switch (kind) {
    case Kind::kFixed: return 0.0;
    case Kind::kUniform: return x >= p1 && x <= p2 ? -std::log(p2 - p1) : ninf;
    case Kind::kLogUniform: return x >= p1 && x <= p2 ? -std::log(x * std::log(p2 / p1)) : ninf;
    case Kind::kBeta:
      if (!(x > 0 && x < 1)) return ninf;
      return (p1 - 1) * std::log(x) + (p2 - 1) * std::log1p(-x) + std::lgamma(p1 + p2) -
             std::lgamma(p1) - std::lgamma(p2);
  }
  return ninf;
}

std::string Distribution::str() const {
  switch (kind) {
    case Kind::kFixed: return format_double(p1);
    case Kind::kUniform: return "uniform:" + format_double(p1) + "," + format_double(p2);
    case Kind::kLogUniform: return "loguniform:" + format_double(p1) + "," + format_double(p2);
    case Kind::kBeta: return "beta:" + format_double(p1) + "," + format_double(p2);
  }
  return "";
}

Distribution Distribution::parse(const std::string& text, const std::string& option) {
  auto fail = [&](const std::string& why) -> Distribution {
    throw UsageError(option, text, why);
  };
  Distribution d;
  const auto colon = text.find(':');
  const std::string kind = colon == std::string::npos ? "fixed" : text.substr(0, colon);
  const std::string args = colon == std::string::npos ? text : text.substr(colon + 1);
  if (kind == "fixed") {
    if (!parse_double(args, d.p1) || !std::isfinite(d.p1)) return fail("not a number");
    return d;
  }
  const auto comma = args.find(',');
  if (comma == std::string::npos || !parse_double(args.substr(0, comma), d.p1) ||
      !parse_double(args.substr(comma + 1), d.p2) || !std::isfinite(d.p1) || !std::isfinite(d.p2))
    return fail("expected KIND:A,B with two numbers");
  if (kind == "uniform") d.kind = Kind::kUniform;
  else if (kind == "loguniform") d.kind = Kind::kLogUniform;
  else if (kind == "beta") d.kind = Kind::kBeta;
  else return fail("unknown distribution (fixed, uniform, loguniform, beta)");
  if (d.kind != Kind::kBeta && !(d.p1 < d.p2)) return fail("need A < B");
  if (d.kind == Kind::kLogUniform && !(d.p1 > 0)) return fail("loguniform needs A > 0");
  if (d.kind == Kind::kBeta && !(d.p1 > 0 && d.p2 > 0)) return fail("beta needs A, B > 0");
  return d;
}

std::string MassPrior::describe() const {
  if (upper_limit())
    return "uniform in companion mass on [0, m_max] (upper limit); " + format_double(m_max_mjup) + " MJup";
  return "log-uniform in companion mass on [m_min, m_max]; " + format_double(m_min_mjup) + " to " +
         format_double(m_max_mjup) + " MJup";
}

MassPrior PriorOptions::mass_prior(bool upper_limit) const {
  if (upper_limit) return {MassPrior::Kind::kUniform, 0.0, m_max_mjup};
  return {MassPrior::Kind::kLogUniform, m_min_mjup, m_max_mjup};
}

void PriorOptions::validate() const {
  if (!(m_min_mjup > 0 && m_min_mjup < m_max_mjup))
    throw UsageError("--m-min", format_double(m_min_mjup), "must be positive and below --m-max");
  const bool in_unit = ecc.kind == Distribution::Kind::kBeta ||
                       (ecc.kind == Distribution::Kind::kFixed ? ecc.p1 >= 0 && ecc.p1 < 1
                                                               : ecc.p1 >= 0 && ecc.p2 < 1);
  if (!in_unit) throw UsageError("--ecc", ecc.str(), "eccentricities must lie in [0, 1)");
}

std::string mass_prior_help() {
  return "log-uniform in companion mass on [m_min, m_max] for a detection; uniform in mass on [0, m_max] "
         "for an upper limit (sig_joint below --detect-sigma and no relative astrometry), so that the limit "
         "does not depend on m_min";
}

bool host_mass_prior(double star_mass_msun, double star_mass_error_msun, double default_msun,
                     double default_error_msun, HostMass& out) {
  const bool own = !std::isnan(star_mass_msun);
  out.mass_msun = own ? star_mass_msun : default_msun;
  out.error_msun = own ? star_mass_error_msun : default_error_msun;
  if (!(out.mass_msun > 0)) return false;  // also false for NaN
  if (!(out.error_msun > 0)) out.error_msun = kDefaultHostMassRelError * out.mass_msun;
  return true;
}

}  // namespace heft
