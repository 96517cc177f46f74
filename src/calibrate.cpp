#include "heft/calibrate.hpp"

#include <cmath>

#include "heft/angles.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/units.hpp"

namespace heft {

Eigen::Vector2d rotation_pattern(const Eigen::Vector3d& w, double ra_rad, double dec_rad) {
  const double sa = std::sin(ra_rad), ca = std::cos(ra_rad);
  const double sd = std::sin(dec_rad), cd = std::cos(dec_rad);
  return {-w.x() * sd * ca - w.y() * sd * sa + w.z() * cd, w.x() * sa - w.y() * ca};
}

void apply_calibration(const EpochCalibration& cal, double mag, Astrometry& a, bool& in_table) {
  in_table = true;
  const double ra = units::deg_to_rad(a.ra_deg), dec = units::deg_to_rad(a.dec_deg);
  Eigen::Vector3d spin = cal.spin_uas_yr;
  if (!cal.spin_table.empty()) {
    in_table = false;
    if (present(mag)) {
      for (const auto& bin : cal.spin_table)
        if (mag >= bin.mag_lo && mag < bin.mag_hi) {
          spin += bin.spin_uas_yr;
          in_table = true;
          break;
        }
    }
  }
  if (!cal.orient_mas.isZero(0)) {
    const Eigen::Vector2d d = rotation_pattern(cal.orient_mas, ra, dec);
    a.dec_deg -= units::rad_to_deg(units::mas_to_rad(d.y()));
    a.ra_deg -= units::rad_to_deg(units::mas_to_rad(d.x()) / std::cos(dec));
    a.ra_deg = wrap_360(a.ra_deg);
  }
  if (!spin.isZero(0)) {
    const Eigen::Vector2d d = rotation_pattern(spin / units::kUasPerMas, ra, dec);
    a.pmra_mas_yr -= d.x();
    a.pmdec_mas_yr -= d.y();
  }
  if (cal.inflate != 1.0 || cal.floor_mas_yr != 0.0) {
    Eigen::Matrix<double, 5, 5> c = a.covariance() * (cal.inflate * cal.inflate);
    const double f2 = cal.floor_mas_yr * cal.floor_mas_yr;
    c(3, 3) += f2;
    c(4, 4) += f2;
    a.set_covariance(c);
  }
}

std::vector<SpinBin> read_spin_table(const std::string& path) {
  InputFile file(path);
  CsvReader csv(file.stream(), file.name());
  if (!csv.next()) throw InputError(file.name(), 0, 0, "empty spin table");
  const char* names[5] = {"mag_min", "mag_max", "wx", "wy", "wz"};
  int idx[5];
  for (int k = 0; k < 5; ++k) {
    idx[k] = -1;
    for (std::size_t f = 0; f < csv.fields().size(); ++f)
      if (csv.fields()[f] == names[k]) idx[k] = static_cast<int>(f);
    if (idx[k] < 0)
      throw InputError(file.name(), csv.line(), 0,
                       std::string("missing required column '") + names[k] + "'");
  }
  const std::size_t n = csv.fields().size();
  std::vector<SpinBin> bins;
  while (csv.next()) {
    if (csv.fields().size() != n)
      throw InputError(file.name(), csv.line(), 0, "field count differs from the header");
    double v[5];
    for (int k = 0; k < 5; ++k)
      if (!parse_double(csv.fields()[idx[k]], v[k]) || !std::isfinite(v[k]))
        throw InputError(file.name(), csv.line(), csv.column(idx[k]),
                         std::string("column '") + names[k] + "': not a finite number");
    if (!(v[0] < v[1]))
      throw InputError(file.name(), csv.line(), csv.column(idx[1]), "mag_max must exceed mag_min");
    bins.push_back({v[0], v[1], Eigen::Vector3d(v[2], v[3], v[4])});
  }
  if (bins.empty()) throw InputError(file.name(), 0, 0, "spin table has no rows");
  return bins;
}

}  // namespace heft
