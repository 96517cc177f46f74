#include "heft/predict.hpp"

#include <algorithm>
#include <array>
#include <cmath>

#include "heft/angles.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/kepler.hpp"
#include "heft/stats.hpp"

namespace heft {

namespace {
// The draw's companion on the sky at the date, in units of its angular
// semi-major axis; and that axis (mas).
OrbitPoint<double> draw_point(const OrbitDraw& d, double date_yr) {
  const Orbit<double> o{d.period_yr,
                        d.ecc,
                        units::deg_to_rad(d.inc_deg),
                        units::deg_to_rad(d.arg_peri_deg),
                        units::deg_to_rad(d.node_deg),
                        units::deg_to_rad(d.mean_anom_deg),
                        d.ref_epoch_yr};
  return orbit_point(o, date_yr);
}
}  // namespace

std::vector<SkyOffset> sky_offsets(const std::vector<OrbitDraw>& draws, double date_yr) {
  std::vector<SkyOffset> out;
  out.reserve(draws.size());
  for (const auto& d : draws) {
    const OrbitPoint<double> p = draw_point(d, date_yr);
    const double s = d.a_au * d.parallax_mas;
    double sep, pa;
    separation_pa(s * p.x, s * p.y, sep, pa);
    out.push_back({s * p.y, s * p.x, sep, units::rad_to_deg(pa), d.weight});
  }
  return out;
}

SkyTracks::SkyTracks(const std::vector<OrbitDraw>& draws) {
  tracks_.reserve(draws.size());
  for (const auto& d : draws) {
    const ThieleInnes<double> ti = thiele_innes(d.a_au * d.parallax_mas, units::deg_to_rad(d.inc_deg),
                                                units::deg_to_rad(d.arg_peri_deg), units::deg_to_rad(d.node_deg));
    tracks_.push_back({ti.A, ti.B, ti.F, ti.G, d.ecc, std::sqrt(1.0 - d.ecc * d.ecc),
                       units::deg_to_rad(d.mean_anom_deg), units::kTwoPi / d.period_yr, d.ref_epoch_yr});
  }
}

void SkyTracks::separations(double date_yr, std::vector<double>& sep_mas) const {
  const std::size_t n = tracks_.size();
  sep_mas.resize(n);
  for (std::size_t k0 = 0; k0 < n; k0 += 4) {
    const std::size_t lanes = std::min<std::size_t>(4, n - k0);
    double m[4] = {0.0, 0.0, 0.0, 0.0}, e[4] = {0.0, 0.0, 0.0, 0.0};
    for (std::size_t i = 0; i < lanes; ++i) {
      const Track& t = tracks_[k0 + i];
      m[i] = t.mean_anom_ref_rad + t.mean_motion_rad_yr * (date_yr - t.ref_epoch_yr);
      e[i] = t.ecc;
    }
    KeplerSolution ks[4];
    kepler_solutions4(m, e, ks);
    for (std::size_t i = 0; i < lanes; ++i) {
      const Track& t = tracks_[k0 + i];
      const double X = ks[i].cos_E - t.ecc, Y = t.root_1me2 * ks[i].sin_E;
      const double x = t.A * X + t.F * Y, y = t.B * X + t.G * Y;
      sep_mas[k0 + i] = std::sqrt(x * x + y * y);  // mas: far from overflow
    }
  }
}

const std::vector<ColumnUnit>& prediction_column_units() {
  static const std::vector<ColumnUnit> cols = {
      {"id", ""},           {"date_yr", "yr"},      {"n_draws", ""},          {"ess", ""},
      {"sep_lo95", "mas"},  {"sep_lo68", "mas"},    {"sep_med", "mas"},       {"sep_hi68", "mas"},
      {"sep_hi95", "mas"},  {"pa_mean_deg", "deg"}, {"pa_resultant", ""},     {"pa_modes_deg", "deg"},
      {"pa_arc68_start_deg", "deg"}, {"pa_arc68_width_deg", "deg"}, {"p_in_wa", ""},
      {"notes", ""}};
  return cols;
}

std::string prediction_header() { return header_line(prediction_column_units()); }

void append_prediction_row(std::string& out, const std::string& id, std::size_t n_draws, const SkyPrediction& p) {
  append_csv_field(out, id);
  for (double v : {p.date_yr, static_cast<double>(n_draws), p.ess, p.sep_q[0], p.sep_q[1], p.sep_q[2], p.sep_q[3],
                   p.sep_q[4], p.pa_mean_deg, p.pa_resultant}) {
    out += ',';
    append_double(out, v);
  }
  out += ',';
  for (std::size_t k = 0; k < p.pa_modes_deg.size(); ++k) {
    if (k) out += '|';
    append_double(out, p.pa_modes_deg[k]);
  }
  for (double v : {p.pa_arc68_start_deg, p.pa_arc68_width_deg, p.p_in_wa}) {
    out += ',';
    append_double(out, v);
  }
  out += p.pa_constrained ? "," : ",pa_unconstrained";
  out += '\n';
}

const std::vector<ColumnUnit>& grid_column_units() {
  static const std::vector<ColumnUnit> cols = {
      {"id", ""}, {"date_yr", "yr"}, {"dra_mas", "mas"}, {"ddec_mas", "mas"}, {"density_per_mas2", "mas-2"}};
  return cols;
}

std::string grid_header() { return header_line(grid_column_units()); }

void append_grid_rows(std::string& out, const std::string& id, const SkyPrediction& p) {
  const int n = p.grid_n;
  const double cell = 2.0 * p.grid_half_mas / n;
  for (int j = 0; j < n; ++j)
    for (int i = 0; i < n; ++i) {
      append_csv_field(out, id);
      for (double v : {p.date_yr, -p.grid_half_mas + (i + 0.5) * cell, -p.grid_half_mas + (j + 0.5) * cell,
                       p.density[static_cast<std::size_t>(j) * n + i]}) {
        out += ',';
        append_double(out, v);
      }
      out += '\n';
    }
}

SkyGrid read_sky_grid(std::istream& in, const std::string& name, const std::string& id, double date_yr) {
  ColumnTable t(in, name, {"id", "date_yr", "dra_mas", "ddec_mas", "density_per_mas2"});
  const int c_id = t.index("id"), c_date = t.index("date_yr"), c_e = t.index("dra_mas"), c_n = t.index("ddec_mas"),
            c_d = t.index("density_per_mas2");
  SkyGrid g;
  g.id = id;
  g.date_yr = date_yr;
  std::vector<std::array<double, 3>> cells;
  while (t.next()) {
    if (g.id.empty()) g.id = std::string(t.text(c_id));
    if (t.text(c_id) != g.id) continue;
    const double d = t.number(c_date);
    if (std::isnan(g.date_yr)) g.date_yr = d;
    if (std::abs(d - g.date_yr) > 1e-9) continue;
    const double v = t.number(c_d);
    if (v < 0) t.fail(c_d, "density must be >= 0");
    cells.push_back({t.number(c_e), t.number(c_n), v});
  }
  g.n = static_cast<int>(std::lround(std::sqrt(static_cast<double>(cells.size()))));
  if (cells.empty() || static_cast<std::size_t>(g.n) * g.n != cells.size())
    throw InputError(name, 0, 0, "no square density map for star '" + g.id + "' at the date");
  double lo = 1e300, hi = -1e300;
  for (const auto& c : cells) {
    lo = std::min(lo, c[0]);
    hi = std::max(hi, c[0]);
  }
  const double cell = g.n > 1 ? (hi - lo) / (g.n - 1) : 1.0;
  g.half_mas = (hi - lo + cell) / 2;
  g.density.assign(cells.size(), 0.0);
  for (const auto& c : cells) {
    const int i = bin_index(c[0], -g.half_mas, cell, g.n), j = bin_index(c[1], -g.half_mas, cell, g.n);
    if (i >= 0 && j >= 0) g.density[static_cast<std::size_t>(j) * g.n + i] = c[2];
  }
  return g;
}

void shortest_arc(std::vector<std::pair<double, double>> a, double fraction, double& start_deg, double& width_deg) {
  start_deg = 0.0;
  width_deg = 360.0;
  if (a.empty()) return;
  double total = 0.0;
  for (auto& [x, w] : a) {
    x = wrap_360(x);
    total += w;
  }
  std::sort(a.begin(), a.end());
  const std::size_t n = a.size();
  // Two pointers over the circle unrolled once: arc from a[i] to a[j mod n].
  double acc = 0.0;
  std::size_t j = 0;
  for (std::size_t i = 0; i < n; ++i) {
    if (j < i) {
      j = i;
      acc = 0.0;
    }
    while (acc < fraction * total && j < i + n) {
      acc += a[j % n].second;
      ++j;
    }
    if (acc < fraction * total) break;
    const double end = a[(j - 1) % n].first + (j - 1 >= n ? 360.0 : 0.0);
    const double width = end - a[i].first;
    if (width < width_deg) {
      width_deg = width;
      start_deg = a[i].first;
    }
    acc -= a[i].second;
  }
}

SkyPrediction predict_sky(const std::vector<OrbitDraw>& draws, double date_yr, const PredictOptions& opt) {
  return summarize_sky(sky_offsets(draws, date_yr), date_yr, opt);
}

BestDate best_date(const std::vector<OrbitDraw>& draws, const std::vector<double>& dates_yr,
                   const std::function<double(const std::vector<double>&)>& value) {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  BestDate b{nan, nan, nan};
  const SkyTracks tracks(draws);
  std::vector<double> sep_mas;
  for (std::size_t k = 0; k < dates_yr.size(); ++k) {
    tracks.separations(dates_yr[k], sep_mas);
    const double v = value(sep_mas);
    if (k == 0) b.first_value = v;
    if (k == 0 || v > b.value) b = {dates_yr[k], v, b.first_value};
  }
  return b;
}

SkyPrediction summarize_sky(const std::vector<SkyOffset>& off, double date_yr, const PredictOptions& opt) {
  SkyPrediction r;
  r.date_yr = date_yr;
  for (std::size_t k = 0; k < off.size(); ++k)
    if (!std::isfinite(off[k].sep_mas) || !std::isfinite(off[k].pa_deg))
      throw NumericError("draw " + std::to_string(k + 1), "predict at " + format_double(date_yr),
                         "the orbit gives a non-finite sky offset");
  double sw = 0.0, sw2 = 0.0, c = 0.0, s = 0.0, c2 = 0.0, s2 = 0.0, in = 0.0;
  std::vector<std::pair<double, double>> sep, pa;
  for (const auto& o : off) {
    sw += o.weight;
    sw2 += o.weight * o.weight;
    sep.emplace_back(o.sep_mas, o.weight);
    pa.emplace_back(o.pa_deg, o.weight);
    c += o.weight * std::cos(units::deg_to_rad(o.pa_deg));
    s += o.weight * std::sin(units::deg_to_rad(o.pa_deg));
    c2 += o.weight * std::cos(2.0 * units::deg_to_rad(o.pa_deg));
    s2 += o.weight * std::sin(2.0 * units::deg_to_rad(o.pa_deg));
    if (o.sep_mas >= opt.iwa_mas && o.sep_mas <= opt.owa_mas) in += o.weight;
  }
  if (!(sw > 0)) return r;
  r.ess = effective_sample_size(sw, sw2);
  std::sort(sep.begin(), sep.end());
  const double qs[5] = {0.025, 0.16, 0.5, 0.84, 0.975};
  for (int k = 0; k < 5; ++k) r.sep_q[k] = weighted_quantile(sep, sw, qs[k]);
  r.p_in_wa = in / sw;
  // Circular statistics (e.g. Mardia & Jupp 2000, Directional Statistics, ch. 2).
  r.pa_mean_deg = wrap_360(units::rad_to_deg(std::atan2(s, c)));
  r.pa_resultant = std::hypot(c, s) / sw;
  // Axial data: the doubled angles (Mardia & Jupp 2000, Sect. 9.1).
  r.pa_resultant_axial = std::hypot(c2, s2) / sw;
  r.pa_constrained = std::max(r.pa_resultant, r.pa_resultant_axial) >= kMinPaResultant;
  shortest_arc(pa, 0.68, r.pa_arc68_start_deg, r.pa_arc68_width_deg);
  // Modes: 1-deg histogram smoothed with a circular 5-deg Gaussian kernel.
  std::vector<double> hist(360, 0.0), smooth(360, 0.0);
  for (const auto& [x, w] : pa)
    if (const int k = bin_index(x, 0.0, 1.0, 360); k >= 0) hist[k] += w;
  for (int i = 0; i < 360; ++i)
    for (int d = -15; d <= 15; ++d) smooth[i] += hist[(i + d + 360) % 360] * std::exp(-0.5 * d * d / 25.0);
  const double peak = *std::max_element(smooth.begin(), smooth.end());
  std::vector<std::pair<double, double>> modes;
  for (int i = 0; i < 360; ++i) {
    const double l = smooth[(i + 359) % 360], h = smooth[(i + 1) % 360];
    if (smooth[i] > l && smooth[i] >= h && smooth[i] >= 0.25 * peak) modes.emplace_back(smooth[i], i + 0.5);
  }
  std::sort(modes.rbegin(), modes.rend());
  if (r.pa_constrained)
    for (const auto& m : modes) r.pa_modes_deg.push_back(m.second);
  // Density map.
  // Sized from the draws, so that a tight prediction is resolved: the 68 %
  // region's larger extent, radial or along its position-angle arc.
  r.grid_half_mas = opt.grid_half_mas > 0 ? opt.grid_half_mas : 1.2 * weighted_quantile(sep, sw, 0.995);
  if (!(r.grid_half_mas > 0)) r.grid_half_mas = 1.0;  // every draw on the star: a 1-mas map
  const double extent68 =
      std::max(r.sep_q[3] - r.sep_q[1], r.sep_q[2] * units::deg_to_rad(r.pa_arc68_width_deg));
  const double cells = extent68 > 0 ? std::ceil(kGridCellsAcross68 * 2.0 * r.grid_half_mas / extent68) : kGridMaxCells;
  r.grid_n = opt.grid_n > 0 ? opt.grid_n
                            : static_cast<int>(std::clamp(cells, double(kGridMinCells), double(kGridMaxCells)));
  const int n = r.grid_n;
  const double h = r.grid_half_mas, cell = 2.0 * h / n;
  r.density.assign(static_cast<std::size_t>(n) * n, 0.0);
  for (const auto& o : off) {
    const int i = bin_index(o.east_mas, -h, cell, n), j = bin_index(o.north_mas, -h, cell, n);
    if (i >= 0 && j >= 0) r.density[static_cast<std::size_t>(j) * n + i] += o.weight;
  }
  for (double& v : r.density) v /= sw * cell * cell;
  return r;
}

nlohmann::ordered_json prediction_json(const std::string& id, std::size_t n_draws, const SkyPrediction& p) {
  return {{"id", id},
          {"date_yr", p.date_yr},
          {"n_draws", n_draws},
          {"ess", p.ess},
          {"sep_mas", quantiles_json({{2.5, p.sep_q[0]}, {16, p.sep_q[1]}, {50, p.sep_q[2]}, {84, p.sep_q[3]},
                                      {97.5, p.sep_q[4]}})},
          {"pa_deg", {{"circular_mean", json_number(p.pa_mean_deg)}, {"resultant", json_number(p.pa_resultant)},
                      {"resultant_axial", json_number(p.pa_resultant_axial)}, {"constrained", p.pa_constrained},
                      {"modes", p.pa_modes_deg}, {"arc68_start", json_number(p.pa_arc68_start_deg)},
                      {"arc68_width", json_number(p.pa_arc68_width_deg)}}},
          {"p_in_wa", p.p_in_wa},
          {"notes", p.pa_constrained ? std::vector<std::string>{} : std::vector<std::string>{"pa_unconstrained"}}};
}

}  // namespace heft
