#include "heft/propagate.hpp"

namespace heft {

double angular_separation_rad(double ra1_rad, double dec1_rad, double ra2_rad, double dec2_rad) {
  double p[3], q[3], u[3], v[3];
  normal_triad(ra1_rad, dec1_rad, p, q, u);
  normal_triad(ra2_rad, dec2_rad, p, q, v);
  const double cx = u[1] * v[2] - u[2] * v[1];
  const double cy = u[2] * v[0] - u[0] * v[2];
  const double cz = u[0] * v[1] - u[1] * v[0];
  return std::atan2(std::sqrt(cx * cx + cy * cy + cz * cz), u[0] * v[0] + u[1] * v[1] + u[2] * v[2]);
}

void tangent_offset_mas(double ra1_rad, double dec1_rad, double ra2_rad, double dec2_rad,
                        double& dra_star_mas, double& ddec_mas) {
  double p[3], q[3], r[3], p2[3], q2[3], v[3];
  normal_triad(ra1_rad, dec1_rad, p, q, r);
  normal_triad(ra2_rad, dec2_rad, p2, q2, v);
  const double w = r[0] * v[0] + r[1] * v[1] + r[2] * v[2];
  dra_star_mas = units::rad_to_mas((p[0] * v[0] + p[1] * v[1] + p[2] * v[2]) / w);
  ddec_mas = units::rad_to_mas((q[0] * v[0] + q[1] * v[1] + q[2] * v[2]) / w);
}

}  // namespace heft
