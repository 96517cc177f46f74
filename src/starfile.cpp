#include "heft/starfile.hpp"

#include <algorithm>
#include <cmath>
#include <istream>
#include <nlohmann/json.hpp>

#include "heft/error.hpp"

namespace heft {
namespace {

using nlohmann::json;

// Unit suffixes heft's JSON keys carry; a key that differs from an accepted
// one only in this suffix is reported as a wrong unit, not as unknown.
constexpr const char* kUnits[] = {"mas", "arcsec", "as", "uas", "deg", "rad", "yr", "jd", "mjd",
                                  "m_s", "km_s", "msun", "mjup", "dex", "au", "pc"};

std::string unit_suffix(const std::string& key, std::string& stem) {
  for (const char* u : kUnits) {
    const std::string suf = std::string("_") + u;
    if (key.size() > suf.size() && key.compare(key.size() - suf.size(), suf.size(), suf) == 0) {
      stem = key.substr(0, key.size() - suf.size());
      return u;
    }
  }
  return "";
}

class Reader {
 public:
  explicit Reader(std::string file) : file_(std::move(file)) {}

  [[noreturn]] void fail(const std::string& path, const std::string& rule) const {
    throw InputError::at_json(file_, path.empty() ? "/" : path, rule);
  }

  // Rejects keys outside `allowed`, naming a wrong unit when that is the cause.
  void check_keys(const json& obj, const std::string& path, const std::vector<std::string>& allowed) const {
    if (!obj.is_object()) fail(path, "must be a JSON object");
    for (auto it = obj.begin(); it != obj.end(); ++it) {
      const std::string& k = it.key();
      if (std::find(allowed.begin(), allowed.end(), k) != allowed.end()) continue;
      std::string stem;
      if (!unit_suffix(k, stem).empty())
        for (const auto& a : allowed) {
          std::string astem;
          const std::string au = unit_suffix(a, astem);
          if (!au.empty() && astem == stem)
            fail(path + "/" + k, "wrong unit '" + k.substr(stem.size() + 1) + "': give '" + a + "' (" +
                                     au + ")");
        }
      fail(path + "/" + k, "unknown key '" + k + "'");
    }
  }

  double number(const json& obj, const std::string& path, const std::string& key, bool required,
                double fallback = std::nan("")) const {
    const auto it = obj.find(key);
    if (it == obj.end() || it->is_null()) {
      if (required) fail(path + "/" + key, "missing required field '" + key + "'");
      return fallback;
    }
    if (!it->is_number()) fail(path + "/" + key, "must be a number");
    const double v = it->get<double>();
    if (!std::isfinite(v)) fail(path + "/" + key, "must be finite");
    return v;
  }

  double positive(const json& obj, const std::string& path, const std::string& key) const {
    const double v = number(obj, path, key, true);
    if (!(v > 0)) fail(path + "/" + key, "must be > 0");
    return v;
  }

  double epoch(const json& obj, const std::string& path) const {
    const double t = number(obj, path, "epoch_yr", true);
    if (!(t >= kEpochMinYr && t <= kEpochMaxYr))
      fail(path + "/epoch_yr", "epoch outside the plausible range [1900, 2200] (decimal years)");
    return t;
  }

  double corr(const json& obj, const std::string& path) const {
    const double c = number(obj, path, "corr", false, 0.0);
    if (!(std::abs(c) < 1)) fail(path + "/corr", "correlation must lie in (-1, 1)");
    return c;
  }

 private:
  std::string file_;
};

void read_star(const Reader& r, const json& j, StarRecord& star) {
  std::vector<std::string> names = star_field_names();
  r.check_keys(j, "/star", names);
  for (const auto& n : names) {
    bool required = false;
    double* slot = star_field(star, n, &required);
    *slot = r.number(j, "/star", n, required, *slot);
  }
}

HostMassPrior read_host_mass(const Reader& r, const json& j) {
  HostMassPrior p;
  const std::string path = "/host_mass";
  if (!j.is_object()) r.fail(path, "must be a JSON object");
  const auto it = j.find("prior");
  if (it == j.end() || !it->is_string()) r.fail(path + "/prior", "missing field 'prior' (\"normal\" or \"lognormal\")");
  const std::string kind = it->get<std::string>();
  if (kind == "normal") {
    r.check_keys(j, path, {"prior", "mean_msun", "sigma_msun"});
    p.kind = HostMassPrior::Kind::kNormal;
    p.center_msun = r.positive(j, path, "mean_msun");
    p.width = r.positive(j, path, "sigma_msun");
  } else if (kind == "lognormal") {
    r.check_keys(j, path, {"prior", "median_msun", "sigma_dex"});
    p.kind = HostMassPrior::Kind::kLogNormal;
    p.center_msun = r.positive(j, path, "median_msun");
    p.width = r.positive(j, path, "sigma_dex");
  } else {
    r.fail(path + "/prior", "unknown prior '" + kind + "' (\"normal\" or \"lognormal\")");
  }
  return p;
}

RelativeEpoch read_relative(const Reader& r, const json& j, const std::string& path) {
  if (!j.is_object()) r.fail(path, "must be a JSON object");
  RelativeEpoch e{};
  e.polar = j.contains("sep_mas") || j.contains("pa_deg");
  if (e.polar) {
    r.check_keys(j, path, {"epoch_yr", "sep_mas", "pa_deg", "sep_error_mas", "pa_error_deg", "corr", "label"});
    e.v1 = r.positive(j, path, "sep_mas");
    e.v2 = r.number(j, path, "pa_deg", true);
    e.e1 = r.positive(j, path, "sep_error_mas");
    e.e2 = r.positive(j, path, "pa_error_deg");
  } else {
    r.check_keys(j, path, {"epoch_yr", "dra_mas", "ddec_mas", "dra_error_mas", "ddec_error_mas", "corr", "label"});
    e.v1 = r.number(j, path, "dra_mas", true);
    e.v2 = r.number(j, path, "ddec_mas", true);
    e.e1 = r.positive(j, path, "dra_error_mas");
    e.e2 = r.positive(j, path, "ddec_error_mas");
  }
  if (j.contains("label") && !j["label"].is_string()) r.fail(path + "/label", "must be a string");
  e.epoch_yr = r.epoch(j, path);
  e.corr = r.corr(j, path);
  return e;
}

RvPoint read_rv(const Reader& r, const json& j, const std::string& path, std::vector<std::string>& instruments) {
  r.check_keys(j, path, {"epoch_yr", "rv_m_s", "error_m_s", "instrument"});
  RvPoint p{};
  p.epoch_yr = r.epoch(j, path);
  p.rv_m_s = r.number(j, path, "rv_m_s", true);
  p.error_m_s = r.positive(j, path, "error_m_s");
  const auto it = j.find("instrument");
  if (it == j.end() || !it->is_string() || it->get<std::string>().empty())
    r.fail(path + "/instrument", "missing instrument label (a non-empty string)");
  const std::string label = it->get<std::string>();
  const auto f = std::find(instruments.begin(), instruments.end(), label);
  p.instrument = static_cast<int>(f - instruments.begin());
  if (f == instruments.end()) instruments.push_back(label);
  return p;
}

}  // namespace

StarFile read_star_file(std::istream& in, const std::string& name, const WindowDefaults& windows) {
  const Reader r(name);
  const json j = read_json(in, name);
  r.check_keys(j, "", {"id", "star", "host_mass", "relative_astrometry", "radial_velocities"});
  StarFile f;
  const auto id = j.find("id");
  if (id == j.end() || !id->is_string() || id->get<std::string>().empty())
    r.fail("/id", "missing star id (a non-empty string)");
  f.star.id = id->get<std::string>();
  if (!j.contains("star")) r.fail("/star", "missing the catalogue solutions ('star')");
  read_star(r, j["star"], f.star);
  Astrometry& e = f.star.early;
  Astrometry& l = f.star.late;
  if (!present(e.window_start_yr)) e.window_start_yr = windows.early_start_yr;
  if (!present(e.window_end_yr)) e.window_end_yr = windows.early_end_yr;
  if (!present(l.window_start_yr)) l.window_start_yr = windows.late_start_yr;
  if (!present(l.window_end_yr)) l.window_end_yr = windows.late_end_yr;
  const std::string bad = validate_star(f.star);
  if (!bad.empty()) r.fail("/star", "invalid catalogue solutions: " + bad);

  if (j.contains("host_mass")) {
    f.host_mass = read_host_mass(r, j["host_mass"]);
  } else if (present(f.star.mass_msun) && present(f.star.mass_error_msun) && f.star.mass_error_msun > 0) {
    f.host_mass = {HostMassPrior::Kind::kNormal, f.star.mass_msun, f.star.mass_error_msun};
  } else {
    r.fail("/host_mass", "missing host-mass prior (or star mass with a positive mass_error)");
  }
  if (j.contains("relative_astrometry")) {
    const json& a = j["relative_astrometry"];
    if (!a.is_array()) r.fail("/relative_astrometry", "must be an array");
    for (std::size_t k = 0; k < a.size(); ++k)
      f.relative.push_back(read_relative(r, a[k], "/relative_astrometry/" + std::to_string(k)));
  }
  if (j.contains("radial_velocities")) {
    const json& a = j["radial_velocities"];
    if (!a.is_array()) r.fail("/radial_velocities", "must be an array");
    for (std::size_t k = 0; k < a.size(); ++k)
      f.rv.push_back(read_rv(r, a[k], "/radial_velocities/" + std::to_string(k), f.instruments));
  }
  return f;
}

std::string star_file_json(const StarFile& f) {
  nlohmann::ordered_json j;
  j["id"] = f.star.id;
  nlohmann::ordered_json star;
  StarRecord s = f.star;
  for (const auto& n : star_field_names()) {
    const double v = *star_field(s, n);
    if (present(v)) star[n] = v;
  }
  j["star"] = star;
  if (f.host_mass.kind == HostMassPrior::Kind::kNormal)
    j["host_mass"] = {{"prior", "normal"}, {"mean_msun", f.host_mass.center_msun}, {"sigma_msun", f.host_mass.width}};
  else
    j["host_mass"] = {{"prior", "lognormal"}, {"median_msun", f.host_mass.center_msun}, {"sigma_dex", f.host_mass.width}};
  nlohmann::ordered_json rel = nlohmann::ordered_json::array();
  for (const auto& e : f.relative) {
    nlohmann::ordered_json x = {{"epoch_yr", e.epoch_yr}};
    if (e.polar) {
      x["sep_mas"] = e.v1;
      x["sep_error_mas"] = e.e1;
      x["pa_deg"] = e.v2;
      x["pa_error_deg"] = e.e2;
    } else {
      x["dra_mas"] = e.v1;
      x["dra_error_mas"] = e.e1;
      x["ddec_mas"] = e.v2;
      x["ddec_error_mas"] = e.e2;
    }
    if (e.corr != 0.0) x["corr"] = e.corr;
    rel.push_back(x);
  }
  j["relative_astrometry"] = rel;
  nlohmann::ordered_json rv = nlohmann::ordered_json::array();
  for (const auto& v : f.rv)
    rv.push_back({{"epoch_yr", v.epoch_yr}, {"rv_m_s", v.rv_m_s}, {"error_m_s", v.error_m_s},
                  {"instrument", f.instruments.at(v.instrument)}});
  j["radial_velocities"] = rv;
  return j.dump(1) + "\n";
}

}  // namespace heft
