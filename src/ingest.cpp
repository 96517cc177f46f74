#include "heft/ingest.hpp"

#include <algorithm>
#include <cmath>
#include <unordered_map>

#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/propagate.hpp"
#include "heft/units.hpp"

namespace heft {
namespace {

enum class Kind { kAngle, kSmallAngle, kPm, kCorr, kTime, kVelocity, kMass, kMag, kAge, kText };

struct Unit {
  const char* name;
  double scale;
  double offset;
};

const std::vector<Unit>& units_of(Kind k) {
  static const std::vector<Unit> angle = {{"deg", 1, 0}, {"rad", units::kDegPerRad, 0},
                                          {"h", 15, 0}};
  static const std::vector<Unit> small = {{"mas", 1, 0}, {"uas", 1e-3, 0}, {"arcsec", 1e3, 0},
                                          {"deg", 3.6e6, 0}, {"rad", units::kMasPerRad, 0}};
  static const std::vector<Unit> pm = {{"mas/yr", 1, 0}, {"uas/yr", 1e-3, 0},
                                       {"arcsec/yr", 1e3, 0}, {"deg/yr", 3.6e6, 0},
                                       {"rad/yr", units::kMasPerRad, 0}};
  static const std::vector<Unit> corr = {{"1", 1, 0}};
  // Julian epoch from JD / MJD: J = 2000 + (JD - 2451545) / 365.25.
  static const std::vector<Unit> time = {
      {"yr", 1, 0},
      {"jd", 1 / units::kJulianYearDays, 2000.0 - 2451545.0 / units::kJulianYearDays},
      {"mjd", 1 / units::kJulianYearDays, 2000.0 - 51544.5 / units::kJulianYearDays}};
  static const std::vector<Unit> vel = {{"km/s", 1, 0}, {"m/s", 1e-3, 0}};
  static const std::vector<Unit> mass = {{"msun", 1, 0}, {"mjup", 1 / units::kMjupPerMsun, 0}};
  static const std::vector<Unit> mag = {{"mag", 1, 0}};
  static const std::vector<Unit> age = {{"myr", 1, 0}, {"gyr", 1e3, 0}, {"yr", 1e-6, 0}};
  static const std::vector<Unit> text = {};
  switch (k) {
    case Kind::kAngle: return angle;
    case Kind::kSmallAngle: return small;
    case Kind::kPm: return pm;
    case Kind::kCorr: return corr;
    case Kind::kTime: return time;
    case Kind::kVelocity: return vel;
    case Kind::kMass: return mass;
    case Kind::kMag: return mag;
    case Kind::kAge: return age;
    case Kind::kText: return text;
  }
  return text;
}

const std::map<std::string, Kind>& epoch_field_kinds() {
  static const std::map<std::string, Kind> m = [] {
    std::map<std::string, Kind> k = {
        {"epoch", Kind::kTime},        {"ra", Kind::kAngle},
        {"dec", Kind::kAngle},         {"parallax", Kind::kSmallAngle},
        {"pmra", Kind::kPm},           {"pmdec", Kind::kPm},
        {"ra_error", Kind::kSmallAngle}, {"dec_error", Kind::kSmallAngle},
        {"parallax_error", Kind::kSmallAngle}, {"pmra_error", Kind::kPm},
        {"pmdec_error", Kind::kPm},    {"window_start", Kind::kTime},
        {"window_end", Kind::kTime}};
    for (const char* c : kCorrNames) k[c] = Kind::kCorr;
    return k;
  }();
  return m;
}

const std::map<std::string, Kind>& star_field_kinds() {
  static const std::map<std::string, Kind> m = {
      {"id", Kind::kText},        {"mass", Kind::kMass}, {"mass_error", Kind::kMass},
      {"rv", Kind::kVelocity},    {"rv_error", Kind::kVelocity},
      {"mag", Kind::kMag},        {"age_myr", Kind::kAge}};
  return m;
}

std::string unit_list(Kind k) {
  std::string s;
  for (const auto& u : units_of(k)) s += (s.empty() ? "" : ", ") + std::string(u.name);
  return s;
}

FieldSource parse_source(const nlohmann::json& j, Kind kind, const std::string& path,
                         const std::string& file) {
  FieldSource src;
  const auto& allowed = units_of(kind);
  std::string unit = allowed.empty() ? "" : allowed.front().name;
  if (j.is_string()) {
    src.column = j.get<std::string>();
  } else if (j.is_number()) {
    if (kind == Kind::kText) throw InputError::at_json(file, path, "a text field needs a column");
    src.constant = j.get<double>();
  } else if (j.is_object()) {
    for (const auto& [key, v] : j.items()) {
      if (key == "column") {
        if (!v.is_string()) throw InputError::at_json(file, path + "/column", "must be a string");
        src.column = v.get<std::string>();
      } else if (key == "value") {
        if (!v.is_number()) throw InputError::at_json(file, path + "/value", "must be a number");
        if (kind == Kind::kText) throw InputError::at_json(file, path, "a text field needs a column");
        src.constant = v.get<double>();
      } else if (key == "unit") {
        if (!v.is_string()) throw InputError::at_json(file, path + "/unit", "must be a string");
        unit = v.get<std::string>();
      } else {
        throw InputError::at_json(file, path + "/" + key,
                                  "unknown key (allowed: column, value, unit)");
      }
    }
    if (src.column.empty() == std::isnan(src.constant))
      throw InputError::at_json(file, path, "give exactly one of 'column' and 'value'");
  } else {
    throw InputError::at_json(file, path,
                              "must be a column name, a number, or {column|value, unit}");
  }
  if (!allowed.empty()) {
    const auto it = std::find_if(allowed.begin(), allowed.end(),
                                 [&](const Unit& u) { return unit == u.name; });
    if (it == allowed.end())
      throw InputError::at_json(file, path + "/unit",
                                "unit '" + unit + "' not allowed here (use one of " +
                                    unit_list(kind) + ")");
    src.scale = it->scale;
    src.offset = it->offset;
    src.unit = unit;
    if (!std::isnan(src.constant)) src.constant = src.constant * src.scale + src.offset;
  }
  return src;
}

EpochMap parse_epoch_map(const nlohmann::json& j, const std::string& path,
                         const std::string& file) {
  if (!j.is_object()) throw InputError::at_json(file, path, "must be an object");
  EpochMap m;
  for (const auto& [key, v] : j.items()) {
    const std::string p = path + "/" + key;
    if (key == "columns" || key == "star") {
      if (!v.is_object()) throw InputError::at_json(file, p, "must be an object");
      const auto& kinds = key == "columns" ? epoch_field_kinds() : star_field_kinds();
      auto& target = key == "columns" ? m.fields : m.star_fields;
      for (const auto& [field, spec] : v.items()) {
        const auto k = kinds.find(field);
        if (k == kinds.end())
          throw InputError::at_json(file, p + "/" + field, "unknown canonical field");
        target[field] = parse_source(spec, k->second, p + "/" + field, file);
      }
    } else if (key == "carry") {
      if (!v.is_object()) throw InputError::at_json(file, p, "must be an object");
      for (const auto& [field, spec] : v.items()) {
        const auto it = std::find(std::begin(kCarriedFields), std::end(kCarriedFields), field);
        if (it == std::end(kCarriedFields))
          throw InputError::at_json(file, p + "/" + field, "not a carried field (ruwe, excess_noise_mas)");
        m.carry[field] = parse_source(spec, field == "ruwe" ? Kind::kCorr : Kind::kSmallAngle, p + "/" + field, file);
        if (m.carry[field].column.empty())
          throw InputError::at_json(file, p + "/" + field, "a carried field needs a column");
      }
    } else if (key == "weight_matrix") {
      // {"columns": [15 names]} or {"column": "UW"}: UW_1 ... UW_15 (a FITS
      // vector column), else UW1 ... UW15.
      if (!v.is_object()) throw InputError::at_json(file, p, "must be an object with 'columns' or 'column'");
      if (v.contains("columns")) {
        const auto& c = v["columns"];
        if (!c.is_array() || c.size() != 15)
          throw InputError::at_json(file, p + "/columns", "must list the 15 columns of the upper triangle");
        for (const auto& n : c) {
          if (!n.is_string()) throw InputError::at_json(file, p + "/columns", "column names must be strings");
          m.weight_matrix.push_back(n.get<std::string>());
        }
      } else if (v.contains("column") && v["column"].is_string()) {
        m.weight_matrix_vector = v["column"].get<std::string>();  // resolved against the header
      } else {
        throw InputError::at_json(file, p, "must have 'columns' (15 names) or 'column' (a vector column)");
      }
    } else if (key == "epoch") {
      m.fields["epoch"] = parse_source(v, Kind::kTime, p, file);
    } else if (key == "window") {
      if (!v.is_array() || v.size() != 2 || !v[0].is_number() || !v[1].is_number())
        throw InputError::at_json(file, p, "must be [start, end] in decimal years");
      m.fields["window_start"].constant = v[0].get<double>();
      m.fields["window_end"].constant = v[1].get<double>();
    } else {
      throw InputError::at_json(file, p, "unknown key (allowed: epoch, window, columns, star, carry, weight_matrix)");
    }
  }
  // With a weight matrix the errors and correlations come from it.
  for (const char* req : {"epoch", "ra", "dec", "parallax", "pmra", "pmdec", "ra_error",
                          "dec_error", "parallax_error", "pmra_error", "pmdec_error"})
    if (!m.fields.count(req) && ((m.weight_matrix.empty() && m.weight_matrix_vector.empty()) ||
                                 !std::string_view(req).ends_with("_error")))
      throw InputError::at_json(file, path + "/columns", std::string("missing field '") + req + "'");
  return m;
}

// Canonical slot of a field name in an Astrometry or a StarRecord.
double* epoch_slot(Astrometry& a, const std::string& f) {
  static const std::map<std::string, double Astrometry::*> m = {
      {"epoch", &Astrometry::epoch_yr},
      {"ra", &Astrometry::ra_deg},
      {"dec", &Astrometry::dec_deg},
      {"parallax", &Astrometry::parallax_mas},
      {"pmra", &Astrometry::pmra_mas_yr},
      {"pmdec", &Astrometry::pmdec_mas_yr},
      {"ra_error", &Astrometry::ra_error_mas},
      {"dec_error", &Astrometry::dec_error_mas},
      {"parallax_error", &Astrometry::parallax_error_mas},
      {"pmra_error", &Astrometry::pmra_error_mas_yr},
      {"pmdec_error", &Astrometry::pmdec_error_mas_yr},
      {"window_start", &Astrometry::window_start_yr},
      {"window_end", &Astrometry::window_end_yr}};
  const auto it = m.find(f);
  if (it != m.end()) return &(a.*(it->second));
  for (std::size_t k = 0; k < kCorrNames.size(); ++k)
    if (f == kCorrNames[k]) return &a.corr[k];
  return nullptr;
}

double* star_slot(StarRecord& s, const std::string& f) {
  if (f == "mass") return &s.mass_msun;
  if (f == "mass_error") return &s.mass_error_msun;
  if (f == "rv") return &s.rv_km_s;
  if (f == "rv_error") return &s.rv_error_km_s;
  if (f == "mag") return &s.mag;
  if (f == "age_myr") return &s.age_myr;
  return nullptr;
}

MatchResult collect_leftovers(MatchResult r, std::size_t n_early, std::size_t n_late,
                              const std::vector<std::string>& early_reason,
                              const std::vector<std::string>& late_reason) {
  std::vector<char> used_e(n_early, 0), used_l(n_late, 0);
  for (auto [e, l] : r.pairs) used_e[e] = used_l[l] = 1;
  for (std::size_t i = 0; i < n_early; ++i)
    if (!used_e[i])
      r.leftovers.push_back({true, i, early_reason.empty() || early_reason[i].empty() ? "unmatched" : early_reason[i]});
  for (std::size_t i = 0; i < n_late; ++i)
    if (!used_l[i])
      r.leftovers.push_back({false, i, late_reason.empty() || late_reason[i].empty() ? "unmatched" : late_reason[i]});
  return r;
}

std::unordered_map<std::string, std::size_t> key_index(const std::vector<RawEntry>& rows,
                                                       std::vector<std::string>& reason) {
  std::unordered_map<std::string, std::size_t> idx;
  reason.assign(rows.size(), "");
  std::unordered_map<std::string, std::size_t> first;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    auto [it, fresh] = first.emplace(rows[i].key, i);
    if (!fresh) {
      reason[i] = "ambiguous";
      reason[it->second] = "ambiguous";
    }
  }
  for (std::size_t i = 0; i < rows.size(); ++i)
    if (reason[i].empty()) idx.emplace(rows[i].key, i);
  return idx;
}

}  // namespace

IngestMap parse_ingest_map(const nlohmann::json& j, const std::string& file) {
  if (!j.is_object()) throw InputError::at_json(file, "", "the map must be a JSON object");
  IngestMap m;
  bool have_early = false, have_late = false;
  for (const auto& [key, v] : j.items()) {
    if (key == "early") {
      m.early = parse_epoch_map(v, "/early", file);
      have_early = true;
    } else if (key == "late") {
      m.late = parse_epoch_map(v, "/late", file);
      have_late = true;
    } else if (key != "comment") {
      throw InputError::at_json(file, "/" + key, "unknown key (allowed: early, late, comment)");
    }
  }
  if (!have_early) throw InputError::at_json(file, "/early", "missing");
  if (!have_late) throw InputError::at_json(file, "/late", "missing");
  return m;
}

std::vector<RawEntry> read_raw_catalogue(std::istream& in, const std::string& name,
                                         const EpochMap& map, const std::string& key_column) {
  CsvReader csv(in, name);
  if (!csv.next()) throw InputError(name, 0, 0, "empty file: no header row");
  const std::vector<std::string> header(csv.fields().begin(), csv.fields().end());
  auto find = [&](const std::string& col) -> int {
    for (std::size_t i = 0; i < header.size(); ++i)
      if (header[i] == col) return static_cast<int>(i);
    throw InputError(name, csv.line(), 0, "missing column '" + col + "' named in the map");
  };
  struct Bound {
    double* (*slot)(RawEntry&, const std::string&);
    std::string field;
    FieldSource src;
    int index;
  };
  std::vector<Bound> bound;
  int key_index_col = key_column.empty() ? -1 : find(key_column);
  int id_col = -1;
  for (const auto& [f, src] : map.fields)
    bound.push_back({[](RawEntry& e, const std::string& f) { return epoch_slot(e.astrometry, f); },
                     f, src, src.column.empty() ? -1 : find(src.column)});
  for (const auto& [f, src] : map.star_fields) {
    if (f == "id") {
      id_col = find(src.column);
      continue;
    }
    bound.push_back({[](RawEntry& e, const std::string& f) { return star_slot(e.star, f); }, f,
                     src, src.column.empty() ? -1 : find(src.column)});
  }
  std::vector<std::pair<std::string, Bound>> carried;
  for (const auto& [f, src] : map.carry) carried.push_back({f, {nullptr, f, src, find(src.column)}});
  std::vector<int> uw_cols;
  if (!map.weight_matrix_vector.empty()) {
    const std::string& base = map.weight_matrix_vector;
    const bool vector = std::find(header.begin(), header.end(), base + "_1") != header.end();
    for (int k = 1; k <= 15; ++k) uw_cols.push_back(find(base + (vector ? "_" : "") + std::to_string(k)));
  }
  for (const auto& c : map.weight_matrix) uw_cols.push_back(find(c));
  std::vector<RawEntry> rows;
  while (csv.next()) {
    const auto& f = csv.fields();
    if (f.size() != header.size())
      throw InputError(name, csv.line(), 0,
                       "row has " + std::to_string(f.size()) + " fields, header has " +
                           std::to_string(header.size()));
    RawEntry e;
    e.line = csv.line();
    if (key_index_col >= 0) e.key = f[key_index_col];
    if (id_col >= 0) e.star.id = f[id_col];
    // Field `col` as a number into v; false when empty.
    auto number = [&](int col, const std::string& what, double& v) {
      const std::string_view text = f[col];
      if (text.empty()) return false;
      if (!parse_double(text, v))
        throw InputError(name, csv.line(), csv.column(col),
                         "column '" + header[col] + "' (" + what + "): not a number: '" + std::string(text) + "'");
      return true;
    };
    for (const auto& b : bound) {
      double* slot = b.slot(e, b.field);
      double v;
      if (b.index < 0)
        *slot = b.src.constant;
      else if (number(b.index, b.field, v))
        *slot = v * b.src.scale + b.src.offset;
    }
    for (const auto& [field, b] : carried) {
      double v = kAbsent;
      e.carried[field] = number(b.index, field, v) && present(v) ? v * b.src.scale + b.src.offset : kAbsent;
    }
    if (!uw_cols.empty()) {
      double u[15];
      bool all = true;
      for (int k = 0; k < 15; ++k) {
        const bool given = number(uw_cols[k], "weight matrix", u[k]);
        all = given && present(u[k]) && all;
      }
      Eigen::Matrix<double, 5, 5> cov;
      if (all && !covariance_from_weight_matrix(u, cov))
        throw InputError(name, csv.line(), csv.column(uw_cols[0]), "weight matrix is singular or not finite");
      if (all) {
        // The catalogue's own errors, where mapped, must agree (they are
        // rounded, hence 5 %): a check of the element order.
        Astrometry& a = e.astrometry;
        const double given[5] = {a.ra_error_mas, a.dec_error_mas, a.parallax_error_mas, a.pmra_error_mas_yr,
                                 a.pmdec_error_mas_yr};
        for (int k = 0; k < 5; ++k)
          if (present(given[k]) && std::abs(std::sqrt(cov(k, k)) / given[k] - 1.0) > 0.05)
            throw InputError(name, csv.line(), csv.column(uw_cols[0]),
                             "the weight matrix gives error " + format_double(std::sqrt(cov(k, k))) +
                                 " where the catalogue gives " + format_double(given[k]) +
                                 ": not the element order of docs/formats.md (Presets)");
        a.set_covariance(cov);
      }
    }
    rows.push_back(std::move(e));
  }
  return rows;
}

MatchResult match_by_key(const std::vector<RawEntry>& early, const std::vector<RawEntry>& late) {
  std::vector<std::string> re, rl;
  const auto ei = key_index(early, re);
  const auto li = key_index(late, rl);
  MatchResult r;
  for (std::size_t i = 0; i < late.size(); ++i) {
    if (!rl[i].empty()) continue;
    const auto it = ei.find(late[i].key);
    if (it != ei.end()) r.pairs.emplace_back(it->second, i);
  }
  return collect_leftovers(std::move(r), early.size(), late.size(), re, rl);
}

MatchResult match_by_pairs(const std::vector<RawEntry>& early, const std::vector<RawEntry>& late,
                           const std::vector<std::pair<std::string, std::string>>& pairs) {
  std::vector<std::string> re, rl;
  const auto ei = key_index(early, re);
  const auto li = key_index(late, rl);
  MatchResult r;
  std::vector<int> claimed_e(early.size(), 0), claimed_l(late.size(), 0);
  std::vector<std::pair<std::size_t, std::size_t>> cand;
  for (const auto& [ek, lk] : pairs) {
    const auto a = ei.find(ek), b = li.find(lk);
    if (a == ei.end() || b == li.end()) continue;
    cand.emplace_back(a->second, b->second);
    ++claimed_e[a->second];
    ++claimed_l[b->second];
  }
  for (auto [e, l] : cand) {
    if (claimed_e[e] == 1 && claimed_l[l] == 1) r.pairs.emplace_back(e, l);
    else re[e] = rl[l] = "ambiguous";
  }
  std::sort(r.pairs.begin(), r.pairs.end(),
            [](const auto& x, const auto& y) { return x.second < y.second; });
  return collect_leftovers(std::move(r), early.size(), late.size(), re, rl);
}

MatchResult match_by_position(const std::vector<RawEntry>& early,
                              const std::vector<RawEntry>& late, double radius_arcsec) {
  const double radius_rad = units::mas_to_rad(radius_arcsec * 1e3);
  // Early stars sorted by declination; each search scans a declination strip.
  std::vector<std::size_t> order(early.size());
  for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
  std::sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
    return early[a].astrometry.dec_deg < early[b].astrometry.dec_deg;
  });
  std::vector<double> decs(order.size());
  for (std::size_t i = 0; i < order.size(); ++i) decs[i] = early[order[i]].astrometry.dec_deg;
  const double radius_deg = units::rad_to_deg(radius_rad);

  std::vector<std::string> re(early.size()), rl(late.size());
  std::vector<long> best_of_late(late.size(), -1);
  std::vector<int> claims(early.size(), 0);
  for (std::size_t i = 0; i < late.size(); ++i) {
    const Astrometry& a = late[i].astrometry;
    const double t_early = early.empty() ? a.epoch_yr : early.front().astrometry.epoch_yr;
    const SkyState<double> s{units::deg_to_rad(a.ra_deg), units::deg_to_rad(a.dec_deg),
                             present(a.parallax_mas) && a.parallax_mas > 0 ? a.parallax_mas : 0.0,
                             a.pmra_mas_yr, a.pmdec_mas_yr, 0.0};
    if (!std::isfinite(s.ra_rad + s.dec_rad + s.pmra_mas_yr + s.pmdec_mas_yr)) continue;
    const SkyState<double> back = propagate(s, t_early - a.epoch_yr);
    const double dec_deg = units::rad_to_deg(back.dec_rad);
    auto lo = std::lower_bound(decs.begin(), decs.end(), dec_deg - radius_deg);
    int inside = 0;
    double best = radius_rad;
    long best_k = -1;
    for (auto it = lo; it != decs.end() && *it <= dec_deg + radius_deg; ++it) {
      const std::size_t k = order[it - decs.begin()];
      const double d = angular_separation_rad(back.ra_rad, back.dec_rad,
                                              units::deg_to_rad(early[k].astrometry.ra_deg),
                                              units::deg_to_rad(early[k].astrometry.dec_deg));
      if (d <= radius_rad) {
        ++inside;
        if (d <= best) {
          best = d;
          best_k = static_cast<long>(k);
        }
      }
    }
    if (inside > 1) rl[i] = "ambiguous";
    else if (best_k >= 0) {
      best_of_late[i] = best_k;
      ++claims[best_k];
    }
  }
  MatchResult r;
  for (std::size_t i = 0; i < late.size(); ++i) {
    const long k = best_of_late[i];
    if (k < 0) continue;
    if (claims[k] == 1) r.pairs.emplace_back(static_cast<std::size_t>(k), i);
    else re[k] = rl[i] = "ambiguous";
  }
  return collect_leftovers(std::move(r), early.size(), late.size(), re, rl);
}

std::vector<std::pair<std::string, std::string>> read_pairs(std::istream& in,
                                                            const std::string& name) {
  CsvReader csv(in, name);
  if (!csv.next()) throw InputError(name, 0, 0, "empty file: no header row");
  if (csv.fields().size() < 2)
    throw InputError(name, csv.line(), 0, "a cross-match table needs two columns (early, late)");
  std::vector<std::pair<std::string, std::string>> pairs;
  while (csv.next()) {
    if (csv.fields().size() < 2)
      throw InputError(name, csv.line(), 0, "row needs an early and a late key");
    pairs.emplace_back(std::string(csv.fields()[0]), std::string(csv.fields()[1]));
  }
  return pairs;
}

StarRecord join_entries(const RawEntry& early, const RawEntry& late) {
  StarRecord s;
  s.early = early.astrometry;
  s.late = late.astrometry;
  auto pick = [](double l, double e) { return present(l) ? l : e; };
  s.mass_msun = pick(late.star.mass_msun, early.star.mass_msun);
  s.mass_error_msun = pick(late.star.mass_error_msun, early.star.mass_error_msun);
  s.rv_km_s = pick(late.star.rv_km_s, early.star.rv_km_s);
  s.rv_error_km_s = pick(late.star.rv_error_km_s, early.star.rv_error_km_s);
  s.mag = pick(late.star.mag, early.star.mag);
  s.age_myr = pick(late.star.age_myr, early.star.age_myr);
  s.id = !late.star.id.empty()    ? late.star.id
         : !early.star.id.empty() ? early.star.id
         : !late.key.empty()      ? late.key
                                  : early.key;
  return s;
}

bool covariance_from_weight_matrix(const double u[15], Eigen::Matrix<double, 5, 5>& cov) {
  Eigen::Matrix<double, 5, 5> U = Eigen::Matrix<double, 5, 5>::Zero();
  int k = 0;
  for (int j = 0; j < 5; ++j)
    for (int i = 0; i <= j; ++i) U(i, j) = u[k++];
  if (!U.allFinite() || U.diagonal().cwiseAbs().minCoeff() == 0.0) return false;
  // Sigma = U^-1 U^-T by triangular solves (no explicit normal matrix).
  const Eigen::Matrix<double, 5, 5> Uinv =
      U.triangularView<Eigen::Upper>().solve(Eigen::Matrix<double, 5, 5>::Identity());
  cov = Uinv * Uinv.transpose();
  return cov.allFinite();
}

nlohmann::json overlay_epoch_map(nlohmann::json base, const nlohmann::json& over) {
  if (!base.is_object() || !over.is_object()) return over;
  for (const auto& [key, v] : over.items()) {
    if ((key == "columns" || key == "star" || key == "carry") && v.is_object() && base.contains(key) &&
        base[key].is_object()) {
      for (const auto& [f, spec] : v.items()) base[key][f] = spec;
    } else {
      base[key] = v;
    }
  }
  return base;
}

nlohmann::json ingest_preset(const std::string& name, const std::string& option) {
  // Public column names and units of the two archives' tables (docs/formats.md,
  // "Presets"; written from memory of the archives' documentation).
  if (name == "hip2007-main") {
    // The re-reduction of the early mission (van Leeuwen 2007, A&A 474, 653):
    // solutions at 1991.25 as errors plus an upper-triangular weight matrix.
    return nlohmann::json::parse(R"({
      "epoch": 1991.25,
      "window": [1989.85, 1993.21],
      "columns": {"ra": {"column": "RArad", "unit": "deg"}, "dec": {"column": "DErad", "unit": "deg"},
                  "parallax": {"column": "Plx", "unit": "mas"},
                  "pmra": {"column": "pmRA", "unit": "mas/yr"}, "pmdec": {"column": "pmDE", "unit": "mas/yr"},
                  "ra_error": {"column": "e_RArad", "unit": "mas"}, "dec_error": {"column": "e_DErad", "unit": "mas"},
                  "parallax_error": {"column": "e_Plx", "unit": "mas"},
                  "pmra_error": {"column": "e_pmRA", "unit": "mas/yr"},
                  "pmdec_error": {"column": "e_pmDE", "unit": "mas/yr"}},
      "star": {"mag": {"column": "Hpmag", "unit": "mag"}},
      "weight_matrix": {"column": "UW"}
    })");
  }
  if (name == "dr3-source") {
    // The later mission's main source table: epoch 2016.0 in ref_epoch,
    // errors and the ten correlations, RV, G magnitude, RUWE, excess noise.
    nlohmann::json j = nlohmann::json::parse(R"({
      "epoch": {"column": "ref_epoch", "unit": "yr"},
      "window": [2014.57, 2017.41],
      "columns": {"ra": {"column": "ra", "unit": "deg"}, "dec": {"column": "dec", "unit": "deg"},
                  "parallax": {"column": "parallax", "unit": "mas"},
                  "pmra": {"column": "pmra", "unit": "mas/yr"}, "pmdec": {"column": "pmdec", "unit": "mas/yr"},
                  "ra_error": {"column": "ra_error", "unit": "mas"}, "dec_error": {"column": "dec_error", "unit": "mas"},
                  "parallax_error": {"column": "parallax_error", "unit": "mas"},
                  "pmra_error": {"column": "pmra_error", "unit": "mas/yr"},
                  "pmdec_error": {"column": "pmdec_error", "unit": "mas/yr"}},
      "star": {"rv": {"column": "radial_velocity", "unit": "km/s"},
               "rv_error": {"column": "radial_velocity_error", "unit": "km/s"},
               "mag": {"column": "phot_g_mean_mag", "unit": "mag"}},
      "carry": {"ruwe": {"column": "ruwe", "unit": "1"},
                "excess_noise_mas": {"column": "astrometric_excess_noise", "unit": "mas"}}
    })");
    for (const char* c : kCorrNames) j["columns"][c] = {{"column", c}, {"unit", "1"}};
    return j;
  }
  throw UsageError(option, name, "unknown preset (hip2007-main, dr3-source)");
}

std::vector<ColumnUnit> map_column_units(const EpochMap& map) {
  std::vector<ColumnUnit> out;
  for (const auto* fields : {&map.fields, &map.star_fields, &map.carry})
    for (const auto& [name, src] : *fields)
      if (!src.column.empty() && !src.unit.empty()) out.push_back({src.column, src.unit});
  return out;
}

}  // namespace heft
