#include "heft/draws.hpp"

#include <algorithm>
#include <cmath>
#include <set>

#include "heft/io.hpp"

namespace heft {
const std::vector<ColumnUnit>& draw_column_units() {
  static const std::vector<ColumnUnit> cols = {
      {"id", ""},           {"a_au", "AU"},         {"mass_mjup", "Mjup"},   {"ecc", ""},
      {"inc_deg", "deg"},   {"arg_peri_deg", "deg"}, {"node_deg", "deg"},    {"mean_anom_deg", "deg"},
      {"ref_epoch_yr", "yr"}, {"period_yr", "yr"},  {"parallax_mas", "mas"}, {"host_mass_msun", "Msun"},
      {"weight", ""}};
  return cols;
}

namespace {

const std::vector<std::string>& draw_columns() {
  static const std::vector<std::string> cols = column_names(draw_column_units());
  return cols;
}

}  // namespace

std::string draws_header() { return header_line(draw_column_units()); }

void append_draw_row(std::string& out, const std::string& id, const OrbitDraw& d) {
  append_csv_field(out, id);
  for (double v : {d.a_au, d.mass_mjup, d.ecc, d.inc_deg, d.arg_peri_deg, d.node_deg, d.mean_anom_deg,
                   d.ref_epoch_yr, d.period_yr, d.parallax_mas, d.host_mass_msun, d.weight}) {
    out += ',';
    append_double(out, v);
  }
  out += '\n';
}

std::vector<StarDraws> read_draws(std::istream& in, const std::string& name) {
  ColumnTable t(in, name, draw_columns());
  std::vector<int> col;
  for (const auto& c : draw_columns()) col.push_back(t.index(c));
  std::vector<StarDraws> out;
  std::set<std::string> done;
  while (t.next()) {
    const std::string id(t.text(col[0]));
    if (out.empty() || out.back().id != id) {
      if (!done.insert(id).second) t.fail(col[0], "rows of star '" + id + "' are not contiguous");
      out.push_back({id, {}});
    }
    double v[12];
    for (int k = 0; k < 12; ++k) v[k] = t.number(col[k + 1]);
    OrbitDraw d{v[0], v[1], v[2], v[3], v[4], v[5], v[6], v[7], v[8], v[9], v[10], v[11]};
    auto check = [&](bool ok, int k, const char* rule) {
      if (!ok) t.fail(col[k + 1], rule);
    };
    check(d.a_au > 0, 0, "must be > 0");
    check(d.mass_mjup >= 0, 1, "must be >= 0");
    check(d.ecc >= 0 && d.ecc < 1, 2, "must be in [0, 1)");
    check(d.inc_deg >= 0 && d.inc_deg <= 180, 3, "must be in [0, 180]");
    check(d.period_yr > 0, 8, "must be > 0");
    check(d.parallax_mas > 0, 9, "must be > 0");
    check(d.host_mass_msun > 0, 10, "must be > 0");
    check(d.weight >= 0, 11, "must be >= 0");
    check(std::isfinite(d.a_au * d.parallax_mas), 0, "a_au x parallax_mas (the angular semi-major axis) is not finite");
    // heft predicts at dates in [1900, 2200]: the mean anomaly must stay finite there.
    const double dt_max_yr = std::max(std::abs(2200.0 - d.ref_epoch_yr), std::abs(1900.0 - d.ref_epoch_yr));
    check(std::isfinite(std::abs(d.mean_anom_deg) + 360.0 * dt_max_yr / d.period_yr), 8,
          "period too short for its reference epoch: the mean anomaly at dates 1900-2200 is not finite");
    out.back().draws.push_back(d);
  }
  return out;
}

}  // namespace heft
