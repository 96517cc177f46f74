// heft predict: sky positions from orbit draws, circular statistics, CLI.

#include <catch2/catch.hpp>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <sstream>

#include "heft/draws.hpp"
#include "heft/error.hpp"
#include "heft/predict.hpp"
#include "heft/rng.hpp"
#include "heft/stats.hpp"
#include "heft/svg.hpp"
#include "test_util.hpp"

using namespace heft;

namespace {

double uniform_360(double x) { return x / 360.0; }

}  // namespace

TEST_CASE("predict: a circular face-on orbit gives a ring and a uniform position angle", "[predict]") {
  // Geometry of a face-on circular orbit (common practice, no source):
  // separation a x parallax at every phase; for i = 0 the position angle is
  // Omega + omega + M, so uniform phases give a uniform position angle.
  const auto draws = test::face_on_ring(20000, 5);
  const SkyPrediction p = predict_sky(draws, 2027.5, {150.0, 250.0, 51, 0.0});
  for (double q : p.sep_q) CHECK(q == Approx(200.0).epsilon(1e-9));
  CHECK(p.p_in_wa == Approx(1.0));
  CHECK(p.pa_resultant < 0.03);
  CHECK(p.pa_arc68_width_deg == Approx(0.68 * 360.0).margin(5.0));
  std::vector<double> pa;
  for (const auto& o : sky_offsets(draws, 2027.5)) pa.push_back(o.pa_deg);
  double pv = 0.0;
  ks_test(pa, uniform_360, pv);
  CHECK(pv > 0.01);
  // The density map integrates to one and lies on the ring.
  const double cell = 2.0 * p.grid_half_mas / p.grid_n;
  double total = 0.0, off_ring = 0.0;
  for (int j = 0; j < p.grid_n; ++j)
    for (int i = 0; i < p.grid_n; ++i) {
      const double m = p.density[j * p.grid_n + i] * cell * cell;
      const double r = std::hypot(-p.grid_half_mas + (i + 0.5) * cell, -p.grid_half_mas + (j + 0.5) * cell);
      total += m;
      if (std::abs(r - 200.0) > 1.5 * cell) off_ring += m;
    }
  CHECK(total == Approx(1.0).epsilon(1e-9));
  CHECK(off_ring < 1e-9);
  // One phase: PA = Omega + omega + M for i = 0 (docs/orbits.md).
  std::vector<OrbitDraw> one = {{10.0, 5.0, 0.0, 0.0, 40.0, 20.0, 30.0, 2027.5, 30.0, 20.0, 1.0, 1.0}};
  const auto o = sky_offsets(one, 2027.5).front();
  CHECK(o.pa_deg == Approx(90.0).margin(1e-9));
  CHECK(o.east_mas == Approx(200.0).epsilon(1e-12));
}

TEST_CASE("predict: shortest arc and modes of a bimodal position angle", "[predict]") {
  // Circular statistics (Mardia & Jupp 2000, ch. 2; common practice): a
  // normal cluster at 350 deg has its shortest 68 % arc at +-0.994 sigma; a
  // second cluster at 5 deg makes the arc straddle 0; a 1:2 mixture at 170
  // and 350 deg has two modes, the heavier first.
  Rng rng(3);
  std::vector<std::pair<double, double>> a;
  for (int k = 0; k < 4000; ++k) a.emplace_back(350.0 + 2.0 * rng.normal(), 1.0);
  double start, width;
  shortest_arc(a, 0.68, start, width);
  CHECK(width == Approx(2.0 * 0.994 * 2.0).margin(0.3));  // +-0.994 sigma holds 68 %
  CHECK(std::fmod(start + width / 2 + 360.0, 360.0) == Approx(350.0).margin(0.3));
  for (int k = 0; k < 4000; ++k) a.emplace_back(5.0 + 2.0 * rng.normal(), 1.0);  // straddles 0
  shortest_arc(a, 0.68, start, width);
  CHECK(width < 25.0);
  CHECK((start > 340.0 && start < 352.0));
  std::vector<OrbitDraw> draws;
  for (int k = 0; k < 2000; ++k) {
    const double node = (k % 3 == 0 ? 170.0 : 350.0) + 3.0 * rng.normal();
    draws.push_back({10.0, 5.0, 0.0, 0.0, 0.0, node, 0.0, 2027.5, 30.0, 20.0, 1.0, 1.0});
  }
  const SkyPrediction p = predict_sky(draws, 2027.5, {});
  REQUIRE(p.pa_modes_deg.size() == 2);
  CHECK(std::fmod(p.pa_modes_deg[0], 360.0) == Approx(350.0).margin(2.0));
  CHECK(p.pa_modes_deg[1] == Approx(170.0).margin(2.0));
}

TEST_CASE("predict: position-angle modes only where the angle is constrained", "[predict]") {
  // Mean resultant lengths (Mardia & Jupp 2000, Directional Statistics,
  // Sects. 2.3 and 9.1): uniform angles give R ~ 1/sqrt(n), one cluster
  // R ~ 1, two opposite clusters R ~ 0 but R of the doubled angles ~ 1.
  Rng rng(8);
  auto draws_at = [&](auto node_of) {
    std::vector<OrbitDraw> d;
    for (int k = 0; k < 3000; ++k)
      d.push_back({10.0, 5.0, 0.0, 0.0, 0.0, node_of(k), 0.0, 2027.5, 30.0, 20.0, 1.0, 1.0});
    return d;
  };
  const SkyPrediction uniform = predict_sky(draws_at([&](int) { return 360.0 * rng.uniform(); }), 2027.5, {});
  CHECK(uniform.pa_resultant < 0.1);
  CHECK_FALSE(uniform.pa_constrained);
  CHECK(uniform.pa_modes_deg.empty());
  const SkyPrediction one = predict_sky(draws_at([&](int) { return 40.0 + 20.0 * rng.normal(); }), 2027.5, {});
  CHECK(one.pa_constrained);
  REQUIRE_FALSE(one.pa_modes_deg.empty());
  CHECK(one.pa_modes_deg.front() == Approx(40.0).margin(3.0));
  const SkyPrediction two =
      predict_sky(draws_at([&](int k) { return (k % 2 ? 100.0 : 280.0) + 10.0 * rng.normal(); }), 2027.5, {});
  CHECK(two.pa_resultant < 0.1);
  CHECK(two.pa_resultant_axial > 0.9);
  CHECK(two.pa_constrained);
  CHECK(two.pa_modes_deg.size() == 2);
  std::string row;
  append_prediction_row(row, "u", 3000, uniform);
  CHECK(row.substr(row.size() - 17) == "pa_unconstrained\n");
}

TEST_CASE("predict: the density map is sized from the draws, not the working angles", "[predict]") {
  // Face-on circular orbits at 10 AU and 8 mas parallax: every draw at
  // 80 mas (common practice, no source), position angles spread by the node.
  Rng rng(9);
  auto cluster = [&](double spread_deg) {
    std::vector<OrbitDraw> d;
    for (int k = 0; k < 4000; ++k)
      d.push_back({10.0, 5.0, 0.0, 0.0, 0.0, 30.0 + spread_deg * rng.normal(), 0.0, 2027.5, 30.0, 8.0, 1.0, 1.0});
    return d;
  };
  const auto wide = cluster(20.0);
  const SkyPrediction a = predict_sky(wide, 2027.5, {0.0, 2000.0, 0, 0.0});
  const SkyPrediction b = predict_sky(wide, 2027.5, {0.0, 100.0, 0, 0.0});
  CHECK(a.grid_half_mas == Approx(1.2 * 80.0).epsilon(1e-9));
  CHECK(b.grid_half_mas == a.grid_half_mas);
  CHECK(b.grid_n == a.grid_n);
  const double extent = 80.0 * units::deg_to_rad(a.pa_arc68_width_deg);
  CHECK(a.grid_n == static_cast<int>(std::ceil(64.0 * 2.0 * a.grid_half_mas / extent)));
  CHECK(2.0 * a.grid_half_mas / a.grid_n * 64.0 <= extent + 1e-9);  // >= 64 cells across
  // A tight cluster gets the finest map allowed; an explicit size wins.
  CHECK(predict_sky(cluster(0.5), 2027.5, {}).grid_n == kGridMaxCells);
  CHECK(predict_sky(wide, 2027.5, {0.0, 2000.0, 40, 0.0}).grid_n == 40);
}

TEST_CASE("best date: flat for a face-on circular orbit, at greatest elongation for an edge-on one", "[predict]") {
  // Geometry (common practice, no source): a face-on circular orbit keeps
  // its separation a x parallax at every date; an edge-on circular orbit
  // with omega = Omega = 0 projects to a x parallax x |cos M| along north,
  // largest at M = 0 and pi. Draws at 10 AU, 20 mas parallax (200 mas),
  // P = 20 yr, phases spread by 5 deg around M = 0 at 2027.5.
  Rng rng(10);
  auto draws_with = [&](double inc_deg) {
    std::vector<OrbitDraw> d;
    for (int k = 0; k < 2000; ++k)
      d.push_back({10.0, 5.0, 0.0, inc_deg, 0.0, 0.0, 5.0 * rng.normal(), 2027.5, 20.0, 20.0, 1.0, 1.0});
    return d;
  };
  std::vector<double> dates;
  for (double t = 2030.0; t <= 2040.0 + 1e-9; t += 0.25) dates.push_back(t);
  // Equal weights: the fraction of draws inside.
  auto p_in = [](double iwa, double owa) {
    return [iwa, owa](const std::vector<double>& sep) {
      double in = 0;
      for (double s : sep) in += s >= iwa && s <= owa;
      return in / static_cast<double>(sep.size());
    };
  };
  const BestDate flat = best_date(draws_with(0.0), dates, p_in(150.0, 1000.0));
  CHECK(flat.value == 1.0);
  CHECK(flat.first_value == 1.0);
  CHECK(flat.date_yr == 2030.0);  // all equal: the first date
  // Edge-on: inside 190-1000 mas only within ~18 deg of elongation; the
  // phase spread makes the chance peak at the elongation itself, 2037.5.
  const BestDate edge = best_date(draws_with(90.0), dates, p_in(190.0, 1000.0));
  CHECK(edge.date_yr == Approx(2037.5).margin(0.25));
  CHECK(edge.value > 0.9);
  CHECK(edge.first_value < 0.01);  // 2030: 45 deg past elongation, 141 mas
}

TEST_CASE("sky tracks: separations at many dates match sky_offsets draw by draw", "[predict]") {
  // Two paths of heft itself, no outside source: the date grid's prepared
  // tracks (Kepler four draws at a time) against the per-draw orbit_point
  // path, for 1,001 draws (a last batch of one) with e up to 0.95, over
  // dates decades from the draws' epoch.
  Rng rng(11);
  std::vector<OrbitDraw> draws;
  for (int k = 0; k < 1001; ++k) {
    const double a = 0.5 * std::pow(1000.0, rng.uniform());
    draws.push_back({a, 10.0, 0.95 * rng.uniform(), units::rad_to_deg(std::acos(rng.uniform(-1.0, 1.0))),
                     360.0 * rng.uniform(), 360.0 * rng.uniform(), 360.0 * rng.uniform(), 2016.0,
                     period_from_a(a, 1.0), 5.0 + 20.0 * rng.uniform(), 1.0, 1.0});
  }
  const SkyTracks tracks(draws);
  std::vector<double> sep;
  double worst = 0.0;
  for (double date : {1991.25, 2016.0, 2027.5, 2061.0}) {
    tracks.separations(date, sep);
    const std::vector<SkyOffset> off = sky_offsets(draws, date);
    REQUIRE(sep.size() == draws.size());
    for (std::size_t k = 0; k < sep.size(); ++k) worst = std::max(worst, std::abs(sep[k] / off[k].sep_mas - 1.0));
  }
  CHECK(worst < 1e-12);
}

TEST_CASE("plot sky: the 68 % credible contour of a circular Gaussian", "[predict][plot]") {
  // A circular 2-D Gaussian of width s holds 68 % within r = s sqrt(-2 ln 0.32)
  // = 1.51 s (the Rayleigh distribution; common practice, no source). The
  // map is the exact density on 201 x 201 cells; the contour's mean radius
  // must match to 3 % (the smoothing adds ~ one cell in quadrature).
  const int n = 201;
  const double half = 100.0, s = 15.0, cell = 2 * half / n;
  std::vector<double> d(static_cast<std::size_t>(n) * n);
  for (int j = 0; j < n; ++j)
    for (int i = 0; i < n; ++i) {
      const double x = -half + (i + 0.5) * cell, y = -half + (j + 0.5) * cell;
      d[static_cast<std::size_t>(j) * n + i] = std::exp(-0.5 * (x * x + y * y) / (s * s));
    }
  SkyMap map(half, "gaussian");
  map.image(d, n);
  map.credible_contours(d, n);
  const std::string svg = map.str();
  // The first contour path (68 %): its points in pixels, centred on the star's pixel.
  const auto stroke = svg.find("stroke=\"#cb181d\" stroke-width=\"1.6\"");
  REQUIRE(stroke != std::string::npos);
  const auto start = svg.rfind("<path d=\"M", stroke), end = svg.find('"', start + 9);
  REQUIRE(start != std::string::npos);
  std::istringstream pts(svg.substr(start + 9, end - start - 9));
  double sum = 0;
  int count = 0;
  for (std::string tok; pts >> tok;) {
    double x = std::stod(tok.substr(1)), y = 0;
    pts >> y;
    // The map is 560 px for 2 half; the star at the centre pixel.
    const double px_per_mas = 560.0 / (2 * half), cx = 80 + 280, cy = 60 + 280;
    sum += std::hypot(x - cx, y - cy) / px_per_mas;
    ++count;
  }
  REQUIRE(count > 20);
  CHECK(sum / count == Approx(s * std::sqrt(-2.0 * std::log(0.32))).epsilon(0.03));
}
