#include <catch2/catch.hpp>
#include <algorithm>
#include <random>
#include <vector>

#include "heft/kepler.hpp"

using namespace heft;

namespace {
double deg(double rad) { return units::rad_to_deg(rad); }
double rad(double deg) { return units::deg_to_rad(deg); }

// Bisection reference solve of E - e sin E = M on [M - 1, M + 1] to 1e-14.
double bisect(double M, double e) {
  double lo = M - 1.0, hi = M + 1.0;
  while (hi - lo > 1e-14) {
    const double mid = 0.5 * (lo + hi);
    (mid - e * std::sin(mid) - M > 0 ? hi : lo) = mid;
  }
  return 0.5 * (lo + hi);
}
}  // namespace

TEST_CASE("Kepler's equation: handbook worked examples", "[kepler]") {
  // Source: Meeus, Astronomical Algorithms (2nd ed.), ch. 30, Examples 30.a
  // and 30.b (values from memory): e = 0.100, M = 5 deg -> E = 5.554589 deg;
  // e = 0.99, M = 2 deg -> E = 32.361007 deg.
  CHECK(deg(solve_kepler(rad(5.0), 0.1)) == Approx(5.554589).margin(1e-6));
  CHECK(deg(solve_kepler(rad(2.0), 0.99)) == Approx(32.361007).margin(1e-6));
}

TEST_CASE("Kepler's equation against bisection on 1e5 random (M, e)", "[kepler]") {
  // Reference: bisection to 1e-14 (common practice, no source).
  std::mt19937_64 g(5);
  std::uniform_real_distribution<double> u(0, 1);
  double worst = 0;
  for (int i = 0; i < 100000; ++i) {
    const double e = i % 10 == 0 ? 0.99 : (i % 10 == 1 ? 0.0 : 0.995 * u(g));
    double M = units::kTwoPi * u(g) * 3.0 - units::kTwoPi;  // several turns, both signs
    if (i % 7 == 0) M = (u(g) < 0.5 ? 1e-9 : units::kTwoPi - 1e-9) * (1 + u(g));
    worst = std::max(worst, std::abs(solve_kepler(M, e) - bisect(M, e)));
  }
  INFO("worst |E - E_ref| = " << worst);
  CHECK(worst < 1e-12);
}

TEST_CASE("Kepler's equation: the starter's solution on a dense (M, e) grid", "[kepler]") {
  // Reference: bisection in long double to 1e-19 on [0, pi] (common
  // practice, no source), on 401 x 201 nodes of (M, e) with e up to 0.999,
  // M from 1e-9 to pi and the mirror images next to 2 pi.
  auto ref = [](long double m, long double e) {
    long double lo = 0, hi = units::kPi;
    for (int it = 0; it < 100; ++it) {
      const long double mid = 0.5L * (lo + hi);
      (mid - e * std::sin(mid) - m > 0 ? hi : lo) = mid;
    }
    return 0.5L * (lo + hi);
  };
  double worst_E = 0, worst_sc = 0, worst_at_m = 0, worst_at_e = 0;
  for (int ie = 0; ie <= 200; ++ie) {
    const double e = ie == 200 ? 0.999 : 0.995 * ie / 199.0;
    for (int im = 0; im <= 400; ++im) {
      const double m = im == 0 ? 1e-9 : (im == 1 ? 1e-6 : units::kPi * im / 400.0);
      for (double sign : {1.0, -1.0}) {  // M and 2 pi - M
        const double M = sign > 0 ? m : units::kTwoPi - m;
        // The mirror's reduced anomaly from the double M actually passed.
        const long double two_pi = 6.283185307179586476925286766559L;
        const long double r = ref(sign > 0 ? m : two_pi - M, e);
        const long double E_ref = sign > 0 ? r : two_pi - r;
        const KeplerSolution k = kepler_solution(M, e);
        const double err = static_cast<double>(std::abs(k.E - E_ref));
        if (err > worst_E) {
          worst_E = err;
          worst_at_m = M;
          worst_at_e = e;
        }
        worst_sc = std::max(worst_sc, static_cast<double>(std::abs(k.sin_E - std::sin(E_ref))));
        worst_sc = std::max(worst_sc, static_cast<double>(std::abs(k.cos_E - std::cos(E_ref))));
      }
    }
  }
  INFO("worst |E - E_ref| = " << worst_E << " at M = " << worst_at_m << ", e = " << worst_at_e
                              << "; worst sin/cos error " << worst_sc);
  // E near 2 pi carries 2 pi's rounding: a few ulp of 6.28.
  CHECK(worst_E < 2e-15);
  CHECK(worst_sc < 2e-15);
  // Exact at the apsides.
  CHECK(kepler_solution(0.0, 0.9).E == 0.0);
  CHECK(kepler_solution(units::kPi, 0.9).E == units::kPi);
}

TEST_CASE("Kepler's equation: the four-lane batch equals the scalar solver", "[kepler]") {
  // Internal consistency, no outside source (the scalar solver is checked
  // against bisection above). The same dense (M, e) grid, four pairs per
  // batch with different e in each lane; the AVX2 clone may contract to
  // FMA, so agreement is to round-off. A lane's result must not depend on
  // the other lanes: rotating the lanes gives bit-identical results.
  std::vector<double> ms, es;
  for (int ie = 0; ie <= 200; ++ie)
    for (int im = 0; im <= 400; ++im) {
      const double m = im == 0 ? 1e-9 : (im == 1 ? 1e-6 : units::kPi * im / 400.0);
      for (double M : {m, units::kTwoPi - m, -m, m + 40.0 * units::kTwoPi}) {
        ms.push_back(M);
        es.push_back(ie == 200 ? 0.999 : 0.995 * ie / 199.0);
      }
    }
  std::mt19937_64 gen(7);
  std::shuffle(es.begin(), es.end(), gen);  // mix eccentricities across lanes
  double worst = 0.0;
  bool lanes_independent = true;
  for (std::size_t i = 0; i + 4 <= ms.size(); i += 4) {
    KeplerSolution b[4], r[4];
    kepler_solutions4(&ms[i], &es[i], b);
    const double mr[4] = {ms[i + 1], ms[i + 2], ms[i + 3], ms[i]}, er[4] = {es[i + 1], es[i + 2], es[i + 3], es[i]};
    kepler_solutions4(mr, er, r);
    for (int k = 0; k < 4; ++k) {
      const KeplerSolution s = kepler_solution(ms[i + k], es[i + k]);
      // E to a few ulp of its own size (M here reaches 40 turns).
      worst = std::max({worst, std::abs(b[k].E - s.E) / std::max(1.0, std::abs(s.E)), std::abs(b[k].sin_E - s.sin_E),
                        std::abs(b[k].cos_E - s.cos_E)});
      const KeplerSolution& rk = r[(k + 3) % 4];
      lanes_independent = lanes_independent && rk.E == b[k].E && rk.sin_E == b[k].sin_E && rk.cos_E == b[k].cos_E;
    }
  }
  INFO("worst batch - scalar difference " << worst << " (relative for E) over " << ms.size() << " solves");
  CHECK(worst < 2e-15);
  CHECK(lanes_independent);
}

TEST_CASE("kepler_solutions: any batch size gives kepler_solutions4's results bit for bit", "[kepler]") {
  // Internal consistency (no outside source): the window model solves
  // groups of up to 32 anomalies at once and must give what four at a
  // time give. Sizes that end inside a vector, inside the 32-solve chunk
  // and past it; mixed M and e as above.
  std::vector<double> ms, es;
  std::mt19937_64 gen(11);
  std::uniform_real_distribution<double> um(-3.0 * units::kTwoPi, 3.0 * units::kTwoPi), ue(0.0, 0.999);
  for (int i = 0; i < 4 * 101; ++i) {
    ms.push_back(i % 17 == 0 ? 0.0 : um(gen));
    es.push_back(i % 13 == 0 ? 0.999 : ue(gen));
  }
  std::vector<KeplerSolution> four(ms.size());
  for (std::size_t i = 0; i < ms.size(); i += 4) kepler_solutions4(&ms[i], &es[i], &four[i]);
  for (std::size_t n : {std::size_t{1}, std::size_t{3}, std::size_t{4}, std::size_t{7}, std::size_t{31},
                        std::size_t{32}, std::size_t{33}, std::size_t{97}, ms.size()}) {
    std::vector<KeplerSolution> batch(n);
    kepler_solutions(ms.data(), es.data(), batch.data(), n);
    int differ = 0;
    for (std::size_t i = 0; i < n; ++i)
      differ += batch[i].E != four[i].E || batch[i].sin_E != four[i].sin_E || batch[i].cos_E != four[i].cos_E;
    INFO("batch of " << n);
    CHECK(differ == 0);
  }
}

TEST_CASE("Jets get the implicit derivative of Kepler's equation", "[kepler]") {
  using J = ceres::Jet<double, 2>;
  const double M = 0.7, e = 0.6, h = 1e-6;
  const J E = eccentric_anomaly(J(M, 0), J(e, 1));
  CHECK(E.v[0] == Approx((solve_kepler(M + h, e) - solve_kepler(M - h, e)) / (2 * h)).epsilon(1e-7));
  CHECK(E.v[1] == Approx((solve_kepler(M, e + h) - solve_kepler(M, e - h)) / (2 * h)).epsilon(1e-7));
}

TEST_CASE("visual binary ephemeris: handbook worked example", "[kepler]") {
  // Source: Meeus, Astronomical Algorithms (2nd ed.), ch. 57, Example 57.a
  // (values from memory): eta Coronae Borealis, P = 41.623 yr,
  // T = 1934.008, e = 0.2763, a = 0.907", i = 59.025, Omega = 23.717,
  // omega = 219.907 deg; at 1980.0: theta = 318.4 deg, rho = 0.411".
  const Orbit<double> o{41.623, 0.2763, rad(59.025), rad(219.907), rad(23.717), 0.0, 1934.008};
  const OrbitPoint<double> p = orbit_point(o, 1980.0);
  double sep, pa;
  separation_pa(0.907 * p.x, 0.907 * p.y, sep, pa);
  CHECK(deg(pa) == Approx(318.4).margin(0.05));
  CHECK(sep == Approx(0.411).margin(0.0005));
}

TEST_CASE("Jupiter-Sun analogue", "[kepler]") {
  // Common practice values, no source: 1 MJup at 5.2 AU around 1 Msun has
  // P = 11.86 yr, gives the Sun a ~12.5 m/s reflex speed and a ~0.5 mas
  // astrometric signature from 10 pc.
  const double q = 1.0 / (units::kMjupPerMsun + 1.0);
  const double P = period_from_a(5.2, 1.0 + 1.0 / units::kMjupPerMsun);
  CHECK(P == Approx(11.86).epsilon(0.005));
  const Orbit<double> o{P, 0.0, 0.0, 0.0, 0.0, 0.0, 2016.0};
  const Reflex<double> r = host_reflex(o, 5.2, q, 100.0, 2016.3);
  const double speed_m_s = std::hypot(r.pmra_mas_yr, r.pmdec_mas_yr) / 100.0 *
                           units::kKmsPerAuYr * 1e3;
  CHECK(speed_m_s == Approx(12.5).epsilon(0.01));
  CHECK(std::hypot(r.dra_mas, r.ddec_mas) == Approx(0.5).epsilon(0.01));
  CHECK(a_from_period(P, 1.0 + 1.0 / units::kMjupPerMsun) == Approx(5.2).epsilon(1e-12));
}

TEST_CASE("host RV is the time derivative of its line-of-sight coordinate", "[kepler]") {
  // Definition (docs/orbits.md): z away from the observer, RV > 0 receding;
  // checked by central differences on random eccentric orbits.
  std::mt19937_64 g(9);
  std::uniform_real_distribution<double> u(0, 1);
  for (int n = 0; n < 200; ++n) {
    const Orbit<double> o{0.5 + 30 * u(g), 0.95 * u(g), std::acos(2 * u(g) - 1),
                          units::kTwoPi * u(g), units::kTwoPi * u(g), units::kTwoPi * u(g), 2016.0};
    const double a_au = 1 + 10 * u(g), q = 0.1 * u(g), t = 2016.0 + 10 * u(g), h = 1e-5;
    const double z_host = [&](double tt) { return -q * a_au * orbit_point(o, tt).z; }(t + h) -
                          [&](double tt) { return -q * a_au * orbit_point(o, tt).z; }(t - h);
    const double rv_fd = z_host / (2 * h) * units::kKmsPerAuYr;
    CHECK(host_reflex(o, a_au, q, 10.0, t).rv_km_s == Approx(rv_fd).epsilon(1e-6).margin(1e-9));
  }
}

TEST_CASE("position angle increases with time for i < 90 deg", "[kepler]") {
  // Convention of docs/orbits.md (direct motion for i < 90 deg).
  const Orbit<double> o{10.0, 0.3, rad(30.0), rad(40.0), rad(70.0), 0.0, 2000.0};
  double s1, p1, s2, p2;
  const auto a = orbit_point(o, 2001.0), b = orbit_point(o, 2001.01);
  separation_pa(a.x, a.y, s1, p1);
  separation_pa(b.x, b.y, s2, p2);
  CHECK(p2 > p1);
  // At the ascending node the companion recedes (z increasing).
  Orbit<double> on = o;
  on.arg_peri_rad = 0.0;  // periastron at the node: at T the companion is at the node
  CHECK(orbit_point(on, 2000.0).vz > 0.0);
  CHECK(std::abs(orbit_point(on, 2000.0).z) < 1e-12);
}

TEST_CASE("Thiele-Innes constants invert to a, i, omega and Omega on the sky", "[kepler]") {
  // Source: the classical inversion (Heintz 1978, Double Stars; Wright &
  // Howard 2009, ApJS 182, 205, Sect. 2), checked as a round trip: the
  // elements recovered from A, B, F, G give back the same four constants,
  // a and i come back exactly, and (omega, Omega) come back up to the sky's
  // joint 180-degree ambiguity, with Omega in [0, pi).
  std::mt19937_64 gen(17);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  double worst = 0.0;
  for (int k = 0; k < 20000; ++k) {
    const double a = 0.1 + 100.0 * u(gen), inc = std::acos(u(gen) * 2.0 - 1.0);
    const double w = units::kTwoPi * u(gen), node = units::kTwoPi * u(gen);
    const ThieleInnes<double> ti = thiele_innes(a, inc, w, node);
    const SkyElements sky = sky_elements_from_thiele_innes(ti.A, ti.B, ti.F, ti.G);
    const ThieleInnes<double> back = thiele_innes(sky.a, sky.inc_rad, sky.arg_peri_rad, sky.node_rad);
    worst = std::max({worst, std::abs(back.A - ti.A) / a, std::abs(back.B - ti.B) / a, std::abs(back.F - ti.F) / a,
                      std::abs(back.G - ti.G) / a});
    REQUIRE(sky.a == Approx(a).epsilon(1e-9));
    // Near face-on and edge-on the angles alone are ill-conditioned; the
    // constants above are the test there.
    if (std::abs(std::cos(inc)) > 0.999 || std::abs(std::cos(inc)) < 1e-3) continue;
    REQUIRE(sky.inc_rad == Approx(inc).margin(1e-7));
    CHECK(sky.node_rad >= 0.0);
    CHECK(sky.node_rad < units::kPi);
    const double shift = std::remainder(sky.node_rad - node, units::kTwoPi);  // 0 or +-pi
    CHECK(std::min(std::abs(shift), units::kPi - std::abs(shift)) < 1e-7);
    CHECK(std::abs(std::remainder(sky.arg_peri_rad - w - shift, units::kTwoPi)) < 1e-7);
  }
  // Round-off: sqrt(k^2 - j^2) of a nearly face-on orbit amplifies it
  // (3.5e-12 measured over these draws).
  INFO("largest change of a constant, relative to a: " << worst);
  CHECK(worst < 1e-10);
}
