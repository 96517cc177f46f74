#pragma once
/// \file starfile.hpp
/// The JSON star file of the deep fit (schema in docs/formats.md, "Star
/// file"): one star's two catalogue solutions, its host-mass prior and the
/// follow-up data (relative astrometry of the companion, radial velocities).

#include <iosfwd>
#include <string>
#include <vector>

#include "heft/catalog.hpp"

namespace heft {

/// One epoch of relative astrometry (companion minus host).
struct RelativeEpoch {
  double epoch_yr;
  bool polar;       ///< true: separation and position angle; false: offsets
  double v1, v2;    ///< sep_mas, pa_deg; or dra_mas (Delta alpha*), ddec_mas
  double e1, e2;    ///< their errors (mas, deg; or mas, mas)
  double corr;      ///< correlation of v1 and v2
};

/// One radial velocity of the host.
struct RvPoint {
  double epoch_yr, rv_m_s, error_m_s;
  int instrument;   ///< index into StarFile::instruments
};

/// Prior on the host mass.
struct HostMassPrior {
  enum class Kind { kNormal, kLogNormal } kind = Kind::kNormal;
  double center_msun = 0.0;  ///< mean (normal) or median (log-normal)
  double width = 0.0;        ///< sigma in Msun (normal) or in dex (log-normal)
};

struct StarFile {
  StarRecord star;
  HostMassPrior host_mass;
  std::vector<RelativeEpoch> relative;
  std::vector<RvPoint> rv;
  std::vector<std::string> instruments;  ///< in order of first appearance
};

/// Epochs of follow-up data must lie in this range (decimal years).
inline constexpr double kEpochMinYr = 1900.0, kEpochMaxYr = 2200.0;

/// Reads and validates a star file. Every problem is an InputError naming
/// the file and the JSON pointer (e.g. "/relative_astrometry/2/sep_mas") and
/// the rule: malformed JSON, a missing field, an unknown key, a quantity
/// given in a unit heft does not take (e.g. "sep_arcsec"), a value outside its
/// domain, an epoch outside [kEpochMinYr, kEpochMaxYr], a star row that
/// fails validate_star. Catalogue windows missing from the star take
/// `windows`.
StarFile read_star_file(std::istream& in, const std::string& name, const WindowDefaults& windows = {});

/// The star file as JSON text (the schema read_star_file reads; numbers in
/// shortest round-trip form).
std::string star_file_json(const StarFile& f);

}  // namespace heft
