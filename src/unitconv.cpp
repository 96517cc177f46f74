#include "heft/unitconv.hpp"

#include <algorithm>
#include <cctype>
#include <map>

#include "heft/units.hpp"

namespace heft {
namespace {

// Angles in mas, time spans in Julian years, epochs as Julian years.
const std::map<std::string, UnitScale>& unit_table() {
  static const std::map<std::string, UnitScale> t = [] {
    const double mas_per_deg = 3.6e6;
    std::map<std::string, UnitScale> m;
    const std::pair<const char*, double> angles[] = {
        {"mas", 1.0},       {"uas", 1e-3},       {"arcsec", 1e3},         {"arcmin", 6e4},
        {"deg", mas_per_deg}, {"degree", mas_per_deg}, {"rad", units::kMasPerRad},
        {"h", 15 * mas_per_deg}, {"hourangle", 15 * mas_per_deg}};
    // Time spans for proper motions; "a" is the IAU symbol of the Julian year.
    const std::pair<const char*, double> spans[] = {{"yr", 1.0}, {"a", 1.0}, {"year", 1.0}};
    for (const auto& [n, s] : angles) {
      m[n] = {"angle", s, 0.0};
      for (const auto& [tn, ts] : spans) m[std::string(n) + "/" + tn] = {"angle/time", s / ts, 0.0};
      m[std::string(n) + "-2"] = {"angle-2", 1.0 / (s * s), 0.0};
    }
    // Epochs as Julian years: J = 2000 + (JD - 2451545) / 365.25.
    for (const auto& [tn, ts] : spans) m[tn] = {"time", ts, 0.0};
    m["jd"] = {"time", 1 / units::kJulianYearDays, 2000.0 - 2451545.0 / units::kJulianYearDays};
    m["mjd"] = {"time", 1 / units::kJulianYearDays, 2000.0 - 51544.5 / units::kJulianYearDays};
    m["km/s"] = {"speed", 1.0, 0.0};
    m["m/s"] = {"speed", 1e-3, 0.0};
    for (const char* n : {"msun", "solmass", "m_sun"}) m[n] = {"mass", 1.0, 0.0};
    for (const char* n : {"mjup", "jupitermass", "m_jup"}) m[n] = {"mass", 1.0 / units::kMjupPerMsun, 0.0};
    m["au"] = {"length", 1.0, 0.0};
    m["pc"] = {"length", 648000.0 / units::kPi, 0.0};  // 1 pc = 648000 / pi AU (IAU 2015 Resolution B2)
    m["mag"] = {"mag", 1.0, 0.0};
    m["myr"] = {"age", 1.0, 0.0};
    m["gyr"] = {"age", 1e3, 0.0};
    for (const char* n : {"", "1", "dimensionless", "sigma"}) m[n] = {"1", 1.0, 0.0};
    return m;
  }();
  return t;
}

// One spelling: lower case; "X Y-1", "X.Y**-1", "X Y^-1", "X / Y" -> "X/Y";
// "X**-2", "X^-2", "1 / X2" -> "X-2".
std::string normalise(std::string_view text) {
  std::string s;
  for (char c : text) s += static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  s.erase(0, s.find_first_not_of(' '));
  s.erase(s.find_last_not_of(' ') + 1);
  for (const char* pow : {"**", "^"})
    for (std::size_t p; (p = s.find(pow)) != std::string::npos;) s.erase(p, std::string_view(pow).size());
  // astropy's generic form puts spaces around '/': "mas / yr".
  for (std::size_t p; (p = s.find(" /")) != std::string::npos;) s.erase(p, 1);
  for (std::size_t p; (p = s.find("/ ")) != std::string::npos;) s.erase(p + 1, 1);
  // "1 / mas2" (astropy) is mas-2.
  if (s.size() > 3 && s.compare(0, 2, "1/") == 0 && s.back() == '2') s = s.substr(2, s.size() - 3) + "-2";
  std::string out;
  for (std::size_t i = 0; i < s.size(); ++i) {
    const char c = s[i];
    if ((c == ' ' || c == '.') && i + 1 < s.size()) {
      // A product with a factor to the power -1 is a quotient.
      const std::size_t end = s.find_first_of(" .", i + 1);
      const std::string factor = s.substr(i + 1, end == std::string::npos ? std::string::npos : end - i - 1);
      if (factor.size() > 2 && factor.compare(factor.size() - 2, 2, "-1") == 0) {
        out += "/" + factor.substr(0, factor.size() - 2);
        i = end == std::string::npos ? s.size() : end - 1;
        continue;
      }
      out += '.';
      continue;
    }
    out += c;
  }
  return out;
}

}  // namespace

bool parse_unit(std::string_view text, UnitScale& out) {
  const auto& t = unit_table();
  const auto it = t.find(normalise(text));
  if (it == t.end()) return false;
  out = it->second;
  return true;
}

bool unit_conversion(std::string_view from, std::string_view to, double& scale, double& offset) {
  UnitScale a, b;
  if (!parse_unit(from, a) || !parse_unit(to, b) || a.dimension != b.dimension) return false;
  // value_base = v a.scale + a.offset = w b.scale + b.offset.
  scale = a.scale / b.scale;
  offset = (a.offset - b.offset) / b.scale;
  return true;
}

}  // namespace heft
