#include "heft/screen.hpp"

#include <algorithm>
#include <array>
#include <cmath>

#include "heft/io.hpp"
#include "heft/units.hpp"

namespace heft {

void add_plausibility_notes(const StarRecord& star, std::vector<std::string>& notes) {
  bool pm = false, plx = false, vtan = false;
  for (const Astrometry* a : {&star.early, &star.late}) {
    const double pm_mas_yr = std::hypot(a->pmra_mas_yr, a->pmdec_mas_yr);
    pm = pm || pm_mas_yr > units::kImplausiblePmMasYr;
    plx = plx || a->parallax_mas > units::kImplausibleParallaxMas;
    // Only a well-measured parallax (S/N > 5) turns a PM into a speed.
    if (a->parallax_mas > 5.0 * a->parallax_error_mas)
      vtan = vtan || units::kKmsPerAuYr * pm_mas_yr / a->parallax_mas > units::kImplausibleVtanKmS;
  }
  if (pm) notes.push_back("implausible_pm");
  if (plx) notes.push_back("implausible_parallax");
  if (vtan) notes.push_back("implausible_vtan");
}

double rv_prior_sigma_km_s(const Astrometry& late) {
  const double plx_mas = std::max(late.parallax_mas, 3.0 * late.parallax_error_mas);
  const double vt_km_s = units::kKmsPerAuYr * std::hypot(late.pmra_mas_yr, late.pmdec_mas_yr) / plx_mas;
  return std::sqrt(units::kRvPriorFloorKmS * units::kRvPriorFloorKmS + 0.5 * vt_km_s * vt_km_s);
}

ScreenRow screen_star(const StarRecord& star, const std::string& bad_reason,
                      const ScreenOptions& opt) {
  ScreenRow row;
  row.id = star.id;
  if (!bad_reason.empty()) {
    row.status = RowStatus::bad_input(bad_reason);
    return row;
  }
  Astrometry early = star.early, late = star.late;
  bool in_early = true, in_late = true;
  apply_calibration(opt.early, star.mag, early, in_early);
  apply_calibration(opt.late, star.mag, late, in_late);
  if (!in_early || !in_late) row.notes.push_back("no_spin_bin");

  double rv = star.rv_km_s, rv_error = star.rv_error_km_s;
  const bool assumed_rv = !present(rv);
  if (assumed_rv) {
    rv = opt.assume_rv_km_s;
    rv_error = present(opt.rv_sigma_km_s) ? opt.rv_sigma_km_s : rv_prior_sigma_km_s(late);
    row.notes.push_back("no_rv");
  } else if (!present(rv_error)) {
    rv_error = 0.0;
    row.notes.push_back("rv_error_missing");
  }
  add_plausibility_notes(star, row.notes);
  bool ok = false;
  std::string why;
  row.result = compute_anomaly(early, late, rv, rv_error, ok, why);
  row.status = ok ? RowStatus{} : RowStatus::failed(why);
  if (ok && assumed_rv && row.result.rv_cov_share > units::kRvDominatesShare) row.notes.push_back("rv_prior_dominates");
  return row;
}

const std::vector<ColumnUnit>& screen_column_units() {
  static const std::vector<ColumnUnit> cols = {
      {"id", ""},                    {"status", ""},             {"dt_yr", "yr"},
      {"pml_ra", "mas/yr"},          {"pml_dec", "mas/yr"},      {"pml_ra_error", "mas/yr"},
      {"pml_dec_error", "mas/yr"},   {"dpm_late_ra", "mas/yr"},  {"dpm_late_dec", "mas/yr"},
      {"dpm_late_ra_error", "mas/yr"}, {"dpm_late_dec_error", "mas/yr"}, {"dpm_late_corr", ""},
      {"chi2_late", ""},             {"sig_late", ""},      {"dpm_early_ra", "mas/yr"},
      {"dpm_early_dec", "mas/yr"},   {"dpm_early_ra_error", "mas/yr"}, {"dpm_early_dec_error", "mas/yr"},
      {"dpm_early_corr", ""},        {"chi2_early", ""},         {"chi2_joint", ""},
      {"sig_joint", ""},        {"reflex_vel_late_m_s", "m/s"}, {"reflex_vel_late_error_m_s", "m/s"},
      {"notes", ""}};
  return cols;
}

const std::vector<std::string>& screen_columns() {
  static const std::vector<std::string> names = column_names(screen_column_units());
  return names;
}

std::string screen_header() { return header_line(screen_column_units()); }

namespace {
// The numeric columns between status and notes, in order.
constexpr std::size_t kScreenNumbers = 22;
std::array<double, kScreenNumbers> screen_numbers(const AnomalyResult& r) {
  const auto& c = r.dpm_cov;
  const double el = std::sqrt(c(0, 0)), dl = std::sqrt(c(1, 1));
  const double ee = std::sqrt(c(2, 2)), de = std::sqrt(c(3, 3));
  return {r.dt_yr,
          r.pml_late_mas_yr.x(), r.pml_late_mas_yr.y(),
          std::sqrt(r.pml_cov(0, 0)), std::sqrt(r.pml_cov(1, 1)),
          r.dpm_late_mas_yr.x(), r.dpm_late_mas_yr.y(), el, dl, c(0, 1) / (el * dl),
          r.chi2_late, r.sig_late,
          r.dpm_early_mas_yr.x(), r.dpm_early_mas_yr.y(), ee, de, c(2, 3) / (ee * de),
          r.chi2_early, r.chi2_joint, r.sig_joint,
          r.reflex_vel_late_m_s, r.reflex_vel_late_error_m_s};
}
}  // namespace

void append_screen_row(std::string& out, const ScreenRow& row) {
  append_csv_field(out, row.id);
  out += ',';
  append_csv_field(out, row.status.text());
  if (row.ok()) {  // written in one piece: appended number by number they took 3 % of `heft screen -j 1`
    char line[kScreenNumbers * (1 + kDoubleCharsMax)];
    char* p = line;
    for (double v : screen_numbers(row.result)) {
      *p++ = ',';
      p = write_double(p, v);
    }
    out.append(line, p);
  } else {
    out.append(kScreenNumbers, ',');
  }
  out += ',';
  append_csv_field(out, join_notes(row.notes));
  out += '\n';
}

nlohmann::ordered_json screen_row_json(const ScreenRow& row) {
  nlohmann::ordered_json j;
  const auto& cols = screen_columns();
  j["id"] = row.id;
  j["status"] = row.status.text();
  const auto nums = row.ok() ? screen_numbers(row.result) : std::array<double, kScreenNumbers>{};
  for (std::size_t k = 2; k + 1 < cols.size(); ++k) {
    const double v = row.ok() ? nums[k - 2] : kAbsent;
    j[cols[k]] = std::isfinite(v) ? nlohmann::ordered_json(v) : nlohmann::ordered_json(nullptr);
  }
  j["notes"] = row.notes;
  return j;
}

}  // namespace heft
