#include "heft/simulate.hpp"

#include <Eigen/Cholesky>

#include "heft/angles.hpp"
#include "heft/units.hpp"

namespace heft {

CatalogueModel default_early_model() {
  return {1991.25, 1989.85, 1993.21, 0.5, 1.0, 0.5, 1.0, 0.3};
}

CatalogueModel default_late_model() {
  return {2016.0, 2014.57, 2017.41, 0.02, 0.05, 0.02, 0.05, 0.3};
}

Eigen::Matrix<double, 5, 5> random_covariance(const CatalogueModel& m, Rng& rng) {
  Eigen::Matrix<double, 5, 5> a = Eigen::Matrix<double, 5, 5>::Identity();
  for (int i = 0; i < 5; ++i)
    for (int j = 0; j < 5; ++j) a(i, j) += m.corr_scale * rng.normal();
  Eigen::Matrix<double, 5, 5> s = a * a.transpose();
  Eigen::Matrix<double, 5, 1> sig;
  for (int i = 0; i < 3; ++i) sig(i) = rng.log_uniform(m.pos_error_lo_mas, m.pos_error_hi_mas);
  for (int i = 3; i < 5; ++i) sig(i) = rng.log_uniform(m.pm_error_lo_mas_yr, m.pm_error_hi_mas_yr);
  Eigen::Matrix<double, 5, 5> c;
  for (int i = 0; i < 5; ++i)
    for (int j = 0; j < 5; ++j) c(i, j) = s(i, j) / std::sqrt(s(i, i) * s(j, j)) * sig(i) * sig(j);
  return c;
}

void add_noise(Astrometry& a, Rng& rng) {
  Eigen::LLT<Eigen::Matrix<double, 5, 5>> llt(a.covariance());
  Eigen::Matrix<double, 5, 1> z;
  for (int i = 0; i < 5; ++i) z(i) = rng.normal();
  const Eigen::Matrix<double, 5, 1> d = llt.matrixL() * z;
  const double cosd = std::cos(units::deg_to_rad(a.dec_deg));
  a.ra_deg += units::rad_to_deg(units::mas_to_rad(d(0)) / cosd);
  a.ra_deg = wrap_360(a.ra_deg);
  a.dec_deg += units::rad_to_deg(units::mas_to_rad(d(1)));
  a.parallax_mas += d(2);
  a.pmra_mas_yr += d(3);
  a.pmdec_mas_yr += d(4);
}

Astrometry make_astrometry(const SkyState<double>& truth, const CatalogueModel& m, Rng& rng,
                           bool noise) {
  Astrometry a;
  a.epoch_yr = m.epoch_yr;
  a.window_start_yr = m.window_start_yr;
  a.window_end_yr = m.window_end_yr;
  a.ra_deg = units::rad_to_deg(truth.ra_rad);
  a.dec_deg = units::rad_to_deg(truth.dec_rad);
  a.parallax_mas = truth.parallax_mas;
  a.pmra_mas_yr = truth.pmra_mas_yr;
  a.pmdec_mas_yr = truth.pmdec_mas_yr;
  a.set_covariance(random_covariance(m, rng));
  if (noise) add_noise(a, rng);
  return a;
}

}  // namespace heft

#include <cstdio>
#include <limits>

#include "heft/anomaly.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/window.hpp"

namespace heft {


std::string simulated_id(const SurveyModel& m, long index) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%05ld", index + 1);
  return m.id_prefix + buf;
}

namespace {
// Direction uniform in a cap of radius r around (ra0, dec0).
void draw_direction(const SurveyModel& m, Rng& rng, double& ra, double& dec) {
  const double r = units::deg_to_rad(std::min(m.sky_radius_deg, 180.0));
  const double cz = 1.0 - rng.uniform() * (1.0 - std::cos(r));
  const double sz = std::sqrt(std::max(0.0, 1.0 - cz * cz)), phi = units::kTwoPi * rng.uniform();
  double p[3], q[3], c[3];
  normal_triad(units::deg_to_rad(m.sky_ra_deg), units::deg_to_rad(m.sky_dec_deg), p, q, c);
  double u[3];
  for (int k = 0; k < 3; ++k) u[k] = cz * c[k] + sz * (std::cos(phi) * q[k] + std::sin(phi) * p[k]);
  direction_to_radec(u, ra, dec);
}

// Catalogue entry of the host: barycentre at the catalogue epoch plus the
// window fit of the reflex, with the entry's random covariance.
Astrometry catalogue_entry(const SkyState<double>& bary_late, const CatalogueModel& cm,
                           double late_epoch, const Orbit<double>* orbit, double a_au, double q,
                           Rng& rng) {
  const SkyState<double> bary = propagate(bary_late, cm.epoch_yr - late_epoch);
  SkyState<double> seen = bary;
  if (orbit) {
    const Window w{cm.window_start_yr, cm.window_end_yr, cm.epoch_yr, {}, {}};
    const WindowFit<double> f = fit_reflex(*orbit, a_au, q, bary.parallax_mas, w);
    seen.dec_rad += units::mas_to_rad(f.ddec_mas);
    seen.ra_rad += units::mas_to_rad(f.dra_mas) / std::cos(bary.dec_rad);
    seen.pmra_mas_yr += f.pmra_mas_yr;
    seen.pmdec_mas_yr += f.pmdec_mas_yr;
  }
  return make_astrometry(seen, cm, rng, false);
}
}  // namespace

void simulate_star(const SurveyModel& m, long index, StarRecord& star, SimTruth& t,
                   std::optional<std::uint64_t> noise_seed) {
  star = StarRecord{};
  star.id = simulated_id(m, index);
  Rng rng = Rng::for_star(m.seed, star.id);
  t = SimTruth{};
  t.id = star.id;
  // Host and its barycentric motion at the late epoch.
  t.host_mass_msun = m.host_mass_msun.draw(rng);
  t.distance_pc = m.distance_pc.draw(rng);
  t.parallax_mas = 1000.0 / t.distance_pc;
  double ra, dec;
  draw_direction(m, rng, ra, dec);
  const double ve = m.v_east_km_s + m.v_sigma_km_s * rng.normal();
  const double vn = m.v_north_km_s + m.v_sigma_km_s * rng.normal();
  t.rv_km_s = m.v_radial_km_s + m.v_sigma_km_s * rng.normal();
  const double k = t.parallax_mas / units::kKmsPerAuYr;  // mas/yr per km/s
  const SkyState<double> bary{ra, dec, t.parallax_mas, ve * k, vn * k, t.rv_km_s};
  // Companion.
  t.companion = rng.uniform() < m.companion_fraction;
  Orbit<double> orbit{};
  double q = 0.0;
  if (t.companion) {
    t.mass_mjup = m.companion_mass_mjup.draw(rng);
    t.a_au = m.a_au.draw(rng);
    t.ecc = std::clamp(m.ecc.draw(rng), 0.0, 0.99);
    const double m2 = t.mass_mjup / units::kMjupPerMsun;
    q = m2 / (t.host_mass_msun + m2);
    t.period_yr = period_from_a(t.a_au, t.host_mass_msun + m2);
    orbit = {t.period_yr,
             t.ecc,
             std::acos(rng.uniform(-1.0, 1.0)),
             units::kTwoPi * rng.uniform(),
             units::kTwoPi * rng.uniform(),
             units::kTwoPi * rng.uniform(),
             m.late.epoch_yr};
    t.inc_deg = units::rad_to_deg(orbit.inc_rad);
    t.arg_peri_deg = units::rad_to_deg(orbit.arg_peri_rad);
    t.node_deg = units::rad_to_deg(orbit.node_rad);
    t.mean_anom_late_deg = units::rad_to_deg(orbit.mean_anom_ref_rad);
  } else {
    t.mass_mjup = t.a_au = t.period_yr = t.ecc = t.inc_deg = t.arg_peri_deg = t.node_deg =
        t.mean_anom_late_deg = kAbsent;
  }
  const Orbit<double>* op = t.companion ? &orbit : nullptr;
  star.early = catalogue_entry(bary, m.early, m.late.epoch_yr, op, t.a_au, q, rng);
  star.late = catalogue_entry(bary, m.late, m.late.epoch_yr, op, t.a_au, q, rng);
  // Noiseless anomalies, exactly as the screen computes them.
  bool ok = false;
  std::string why;
  const AnomalyResult r = compute_anomaly(star.early, star.late, t.rv_km_s, 1.0, ok, why);
  t.dpm_late_ra = r.dpm_late_mas_yr.x();
  t.dpm_late_dec = r.dpm_late_mas_yr.y();
  t.dpm_early_ra = r.dpm_early_mas_yr.x();
  t.dpm_early_dec = r.dpm_early_mas_yr.y();
  std::optional<Rng> other;
  if (noise_seed) other = Rng::for_star(*noise_seed, star.id);
  Rng& noise = other ? *other : rng;
  add_noise(star.early, noise);
  add_noise(star.late, noise);
  // Star-level columns.
  star.mass_msun = t.host_mass_msun * (1.0 + m.host_mass_rel_error * noise.normal());
  star.mass_msun = std::max(star.mass_msun, 0.05 * t.host_mass_msun);
  star.mass_error_msun = m.host_mass_rel_error * t.host_mass_msun;
  if (noise.uniform() < m.rv_fraction) {
    const double reflex_rv =
        t.companion ? host_reflex(orbit, t.a_au, q, t.parallax_mas, m.late.epoch_yr).rv_km_s : 0.0;
    star.rv_km_s = t.rv_km_s + reflex_rv + m.rv_error_km_s * noise.normal();
    star.rv_error_km_s = m.rv_error_km_s;
  }
  // Crude main-sequence magnitude, M = 4.83 - 10 log10(m / Msun) (L ~ m^4):
  // for sorting and contrast estimates in the demo only.
  star.mag = 4.83 - 10.0 * std::log10(t.host_mass_msun) + 5.0 * std::log10(t.distance_pc / 10.0);
  star.age_myr = m.age_myr;
}

Orbit<double> truth_orbit(const SimTruth& t, double late_epoch_yr) {
  return {t.period_yr,
          t.ecc,
          units::deg_to_rad(t.inc_deg),
          units::deg_to_rad(t.arg_peri_deg),
          units::deg_to_rad(t.node_deg),
          units::deg_to_rad(t.mean_anom_late_deg),
          late_epoch_yr};
}

RelativeEpoch observe_companion(const SimTruth& t, double late_epoch_yr, double epoch_yr,
                                double sep_error_mas, double pa_error_deg, Rng& rng) {
  const OrbitPoint<double> p = orbit_point(truth_orbit(t, late_epoch_yr), epoch_yr);
  const double s = t.a_au * t.parallax_mas;
  double sep, pa;
  separation_pa(s * p.x, s * p.y, sep, pa);
  const double pa_deg = units::rad_to_deg(pa) + pa_error_deg * rng.normal();
  return {epoch_yr, true, sep + sep_error_mas * rng.normal(), wrap_360(pa_deg),
          sep_error_mas, pa_error_deg, 0.0};
}

StarFile follow_up_star_file(const StarRecord& star, const SimTruth& t, const std::vector<double>& epochs_yr,
                             double sep_error_mas, double pa_error_deg, Rng& rng) {
  StarFile f;
  f.star = star;
  f.host_mass = {HostMassPrior::Kind::kNormal, star.mass_msun, star.mass_error_msun};
  for (double ep : epochs_yr)
    f.relative.push_back(observe_companion(t, star.late.epoch_yr, ep, sep_error_mas, pa_error_deg, rng));
  return f;
}

const std::vector<ColumnUnit>& truth_column_units() {
  static const std::vector<ColumnUnit> cols = {
      {"id", ""},           {"host_mass", "Msun"},     {"parallax", "mas"},        {"distance_pc", "pc"},
      {"rv_true", "km/s"},  {"companion", ""},         {"mass_mjup", "Mjup"},      {"a_au", "AU"},
      {"period_yr", "yr"},  {"ecc", ""},               {"inc_deg", "deg"},         {"arg_peri_deg", "deg"},
      {"node_deg", "deg"},  {"mean_anom_late_deg", "deg"}, {"dpm_late_ra", "mas/yr"}, {"dpm_late_dec", "mas/yr"},
      {"dpm_early_ra", "mas/yr"}, {"dpm_early_dec", "mas/yr"}};
  return cols;
}

std::string truth_header() { return header_line(truth_column_units()); }

void append_truth_row(std::string& out, const SimTruth& t) {
  append_csv_field(out, t.id);
  for (double v : {t.host_mass_msun, t.parallax_mas, t.distance_pc, t.rv_km_s}) {
    out += ',';
    append_double(out, v);
  }
  out += t.companion ? ",1" : ",0";
  for (double v : {t.mass_mjup, t.a_au, t.period_yr, t.ecc, t.inc_deg, t.arg_peri_deg, t.node_deg,
                   t.mean_anom_late_deg, t.dpm_late_ra, t.dpm_late_dec, t.dpm_early_ra,
                   t.dpm_early_dec}) {
    out += ',';
    append_double(out, v);
  }
  out += '\n';
}

}  // namespace heft
