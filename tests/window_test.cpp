#include <catch2/catch.hpp>
#include <array>
#include <random>

#include "heft/window.hpp"

using namespace heft;

namespace {
// Brute force: fit a line to X(t), Y(t) sampled on n uniform points (midpoint
// rule) over the window (common practice, no source).
WindowBasis<double> brute_force(const Orbit<double>& o, const Window& w, int n) {
  double s0 = 0, s1 = 0, s2 = 0, sx = 0, sxt = 0, sy = 0, syt = 0;
  for (int i = 0; i < n; ++i) {
    const double t = w.start_yr + (i + 0.5) * (w.end_yr - w.start_yr) / n;
    const double tau = t - w.ref_epoch_yr;
    const double E = solve_kepler(mean_anomaly(o, t), o.ecc);
    const double X = std::cos(E) - o.ecc, Y = std::sqrt(1 - o.ecc * o.ecc) * std::sin(E);
    s0 += 1; s1 += tau; s2 += tau * tau; sx += X; sxt += X * tau; sy += Y; syt += Y * tau;
  }
  const double det = s0 * s2 - s1 * s1;
  const double xs = (s0 * sxt - s1 * sx) / det, ys = (s0 * syt - s1 * sy) / det;
  return {(sx - xs * s1) / s0, xs, (sy - ys * s1) / s0, ys};
}
// Two catalogues' windows (decimal years), and the tests' random orbits:
// P log-uniform over 0.05-1e5 yr, e uniform below 0.98 and 0.99 for every
// fifth, M0 uniform; the angles given.
const Window kPairEarly{1989.85, 1993.21, 1991.25, {}, {}}, kPairLate{2014.57, 2017.41, 2016.0, {}, {}};
Orbit<double> random_orbit(std::mt19937_64& g, int n, double inc, double arg_peri, double node) {
  std::uniform_real_distribution<double> u(0, 1);
  const double e = n % 5 == 0 ? 0.99 : 0.98 * u(g);
  const double P = std::exp(std::log(0.05) + u(g) * std::log(1e5));
  return {P, e, inc, arg_peri, node, units::kTwoPi * u(g), 2016.0};
}
// a equals b to `tol` (positions) and tol * 2 pi / P (slopes).
void check_same(const WindowBasis<double>& a, const WindowBasis<double>& b, double tol, double P) {
  const double vscale = units::kTwoPi / P;
  CHECK(a.x0 == Approx(b.x0).margin(tol));
  CHECK(a.y0 == Approx(b.y0).margin(tol));
  CHECK(a.xs == Approx(b.xs).margin(tol * vscale));
  CHECK(a.ys == Approx(b.ys).margin(tol * vscale));
}
}  // namespace

TEST_CASE("window fit of a circular face-on orbit equals g(x)", "[window]") {
  // Oracle: g(x) = 3 (sin x - x cos x) / x^3, x = pi W / P, derived in
  // docs/method.md (uniform sampling, window centred on the epoch).
  for (double r : {0.001, 0.01, 0.05, 0.1, 0.3, 0.5, 0.9, 1.0, 1.43, 2.0, 2.5, 3.0}) {
    const double W = 3.0, P = W / r;
    for (double m0 : {0.0, 1.0, 4.0}) {
      const Orbit<double> o{P, 0.0, 0.0, 0.0, 0.0, m0, 2016.0};
      const Window w{2016.0 - W / 2, 2016.0 + W / 2, 2016.0, {}, {}};
      const WindowBasis<double> b = window_basis(o, w);
      const OrbitPoint<double> v = orbit_point(o, 2016.0);  // vx = dX/dt, vy = dY/dt here
      const double g = circular_window_efficiency(r);
      INFO("W/P = " << r << ", M0 = " << m0);
      CHECK(b.xs == Approx(g * v.vx).margin(1e-9 * units::kTwoPi / P));
      CHECK(b.ys == Approx(g * v.vy).margin(1e-9 * units::kTwoPi / P));
    }
  }
  // The series branch joins the closed form smoothly.
  CHECK(circular_window_efficiency(0.99999e-2 / units::kPi) ==
        Approx(circular_window_efficiency(1.00001e-2 / units::kPi)).epsilon(1e-9));
}

TEST_CASE("window fit of eccentric orbits matches a dense brute-force fit", "[window]") {
  std::mt19937_64 g(21);
  std::uniform_real_distribution<double> u(0, 1);
  for (int n = 0; n < 40; ++n) {
    const double e = n < 10 ? 0.99 : 0.98 * u(g);
    const double P = std::exp(std::log(0.05) + u(g) * std::log(2000.0));
    const Orbit<double> o{P, e, 0.0, 0.0, 0.0, units::kTwoPi * u(g), 2016.0};
    // An off-centre window.
    const Window w{2014.57, 2017.41, 2016.0, {}, {}};
    INFO("P = " << P << " e = " << e);
    // Midpoint rule with 4e5 points: error ~ (W/n)^2 |X''| ~ 1e-9 relative at e = 0.99.
    check_same(window_basis(o, w), brute_force(o, w, 400000), 2e-8, P);
  }
}

TEST_CASE("window fit converges with the panel rule (1e-9)", "[window]") {
  // Discrete sampling with very many equal weights approaches the
  // continuous fit; and for P >> W the fit slope tends to the velocity.
  const Orbit<double> o{0.05, 0.9, 0.0, 0.0, 0.0, 0.3, 2016.0};
  Window w{2014.57, 2017.41, 2016.0, {}, {}};
  const WindowBasis<double> c = window_basis(o, w);
  Window d = w;
  const int n = 200000;
  for (int i = 0; i < n; ++i) d.times_yr.push_back(w.start_yr + (i + 0.5) * (w.end_yr - w.start_yr) / n);
  const WindowBasis<double> s = window_basis(o, d);
  CHECK(s.x0 == Approx(c.x0).margin(1e-7));
  CHECK(s.xs == Approx(c.xs).margin(1e-7 * units::kTwoPi / 0.05));
  const Orbit<double> slow{5000.0, 0.5, 0.0, 0.0, 0.0, 1.0, 2016.0};
  const WindowBasis<double> f = window_basis(slow, w);
  const OrbitPoint<double> v = orbit_point(slow, 2016.0);
  CHECK(f.xs == Approx(v.vx).epsilon(1e-5));
}

namespace {
// Independent reference: the moments integrated numerically in E with one
// 12-node Gauss-Legendre panel per half orbit (nodes by Newton iteration on
// P_12; Abramowitz & Stegun 25.4.29), then the same line fit.
WindowBasis<double> panel_rule(const Orbit<double>& o, const Window& w) {
  static const auto rule = [] {
    std::array<double, 12> x{}, wt{};
    for (int i = 0; i < 12; ++i) {
      double z = std::cos(units::kPi * (i + 0.75) / 12.5), pp = 0;
      for (int it = 0; it < 100; ++it) {
        double p1 = 1, p2 = 0;
        for (int j = 1; j <= 12; ++j) {
          const double p3 = p2;
          p2 = p1;
          p1 = ((2.0 * j - 1.0) * z * p2 - (j - 1.0) * p3) / j;
        }
        pp = 12 * (z * p1 - p2) / (z * z - 1.0);
        z -= p1 / pp;
      }
      x[i] = z;
      wt[i] = 2.0 / ((1.0 - z * z) * pp * pp);
    }
    return std::make_pair(x, wt);
  }();
  const double e = o.ecc, b = std::sqrt(1 - e * e), k = o.period_yr / units::kTwoPi;
  const double ts = w.start_yr - w.ref_epoch_yr, te = w.end_yr - w.ref_epoch_yr;
  const double s0 = te - ts, s1 = (te * te - ts * ts) / 2, s2 = (te * te * te - ts * ts * ts) / 3;
  const double Ms = mean_anomaly(o, w.start_yr), Me = mean_anomaly(o, w.end_yr);
  const double Es = solve_kepler(Ms, e), Ee = solve_kepler(Me, e);
  double sx = 0, sxt = 0, sy = 0, syt = 0;
  for (long kpi = static_cast<long>(std::floor(Es / units::kPi)) + 1;; ++kpi) {
    const double a_edge = std::max(Es, (kpi - 1) * units::kPi), b_edge = std::min(Ee, kpi * units::kPi);
    const double mid = 0.5 * (a_edge + b_edge), half = 0.5 * (b_edge - a_edge);
    for (int j = 0; j < 12; ++j) {
      const double E = mid + half * rule.first[j];
      const double dt = k * (1 - e * std::cos(E)) * half * rule.second[j];
      const double tau = ts + k * (E - e * std::sin(E) - Ms);
      const double X = std::cos(E) - e, Y = b * std::sin(E);
      sx += X * dt; sxt += X * tau * dt; sy += Y * dt; syt += Y * tau * dt;
    }
    if (kpi * units::kPi >= Ee) break;
  }
  const double det = s0 * s2 - s1 * s1;
  const double xs = (s0 * sxt - s1 * sx) / det, ys = (s0 * syt - s1 * sy) / det;
  return {(sx - xs * s1) / s0, xs, (sy - ys * s1) / s0, ys};
}
}  // namespace

TEST_CASE("closed-form window moments equal the Gauss-Legendre panel rule", "[window]") {
  std::mt19937_64 g(33);
  for (int n = 0; n < 300; ++n) {
    const Orbit<double> o = random_orbit(g, n, 0.0, 0.0, 0.0);
    INFO("P = " << o.period_yr << " e = " << o.ecc);
    check_same(window_basis(o, kPairEarly), panel_rule(o, kPairEarly), 1e-9, o.period_yr);
  }
}

TEST_CASE("window fits of both catalogues at once equal two single fits", "[window]") {
  // Internal consistency, no outside source: window_basis_pair solves the
  // four window ends as one batch (kepler_solutions4, whose AVX2 lanes may
  // round differently from the scalar solver by an ulp). The closed-form
  // moments difference antiderivatives over a window that spans a small
  // arc at long periods, so an ulp in E grows by (P / W)^2 in the offsets
  // and (P / W)^3 in the slopes (round-off analysis of the moments; 3,000
  // orbits gave at most 0.9e-15 times those factors). The pair must equal
  // the single fits within 4e-15 times them; Jet derivatives alike; a
  // discrete window takes the single path itself.
  std::mt19937_64 g(41);
  const Window &early = kPairEarly, &late = kPairLate;
  const Window discrete{2014.57, 2017.41, 2016.0, {2014.8, 2015.5, 2016.6, 2017.2}, {}};
  using J = ceres::Jet<double, 1>;
  double worst = 0.0;
  for (int n = 0; n < 600; ++n) {
    const Orbit<double> o = random_orbit(g, n, 0.0, 0.0, 0.0);
    const double P = o.period_yr, e = o.ecc;
    INFO("P = " << P << " e = " << e);
    WindowBasis<double> a, b;
    window_basis_pair(o, early, late, a, b);
    const WindowBasis<double> a1 = window_basis(o, early), b1 = window_basis(o, late);
    const double r = std::max(1.0, P / 3.36), off = r * r, slope = units::kTwoPi / P * r * r * r;
    for (const auto& [x, y, s] : {std::tuple{a.x0, a1.x0, off}, {a.xs, a1.xs, slope}, {a.y0, a1.y0, off},
                                  {a.ys, a1.ys, slope}, {b.x0, b1.x0, off}, {b.xs, b1.xs, slope},
                                  {b.y0, b1.y0, off}, {b.ys, b1.ys, slope}})
      worst = std::max(worst, std::abs(x - y) / s);
    const Orbit<J> oj{J(P, 0), J(e), J(0.0), J(0.0), J(0.0), J(o.mean_anom_ref_rad), 2016.0};
    WindowBasis<J> aj, bj;
    window_basis_pair(oj, early, discrete, aj, bj);
    const WindowBasis<J> aj1 = window_basis(oj, early), bj1 = window_basis(oj, discrete);
    CHECK(std::abs(aj.x0.v[0] - aj1.x0.v[0]) <= 4e-15 * off * r / P);  // d/dP: one more P / W, over P
    CHECK(bj.xs.a == bj1.xs.a);
    CHECK(bj.ys.v[0] == bj1.ys.v[0]);
  }
  INFO("worst difference over its round-off scale: " << worst);
  CHECK(worst <= 4e-15);
}

TEST_CASE("window fits of many orbits at once equal the fits one by one, bit for bit", "[window]") {
  // Internal consistency, no outside source: window_basis_pairs only
  // reorders independent work (all end anomalies, then all Kepler solves,
  // then the fits), so each orbit's fits must be exactly window_basis_pair's,
  // for any batch length (13 spans a group of 8 and a partial one), with an
  // orbit outside the domain (e = 1) giving NaN in place, and with a
  // discrete window taking the single path.
  std::mt19937_64 g(43);
  std::uniform_real_distribution<double> u(0, 1);
  const Window early{1989.85, 1993.21, 1991.25, {}, {}}, late{2014.57, 2017.41, 2016.0, {}, {}};
  const Window discrete{2014.57, 2017.41, 2016.0, {2014.8, 2015.5, 2016.6, 2017.2}, {}};
  std::vector<Orbit<double>> orbits;
  for (int n = 0; n < 13; ++n) {
    const double e = n == 6 ? 1.0 : 0.98 * u(g);
    const double P = std::exp(std::log(0.05) + u(g) * std::log(1e5));
    orbits.push_back({P, e, 0.0, 0.0, 0.0, units::kTwoPi * u(g), 2016.0});
  }
  for (const Window* w2 : {&late, &discrete}) {
    std::vector<WindowBasis<double>> a(orbits.size()), b(orbits.size());
    window_basis_pairs(orbits.data(), orbits.size(), early, *w2, a.data(), b.data());
    for (std::size_t i = 0; i < orbits.size(); ++i) {
      INFO("orbit " << i << (w2 == &discrete ? ", discrete window" : ""));
      WindowBasis<double> a1, b1;
      window_basis_pair(orbits[i], early, *w2, a1, b1);
      if (i == 6) {
        CHECK(std::isnan(a[i].x0));
        CHECK(std::isnan(b[i].ys));
        continue;
      }
      for (const auto& [x, y] : {std::pair{a[i].x0, a1.x0}, {a[i].xs, a1.xs}, {a[i].y0, a1.y0}, {a[i].ys, a1.ys},
                                 {b[i].x0, b1.x0}, {b[i].xs, b1.xs}, {b[i].y0, b1.y0}, {b[i].ys, b1.ys}})
        CHECK(x == y);
    }
  }
}

TEST_CASE("window fits' derivative in ln P by parts equals Ceres' automatic derivative", "[window]") {
  // Reference: Ceres' forward-mode automatic derivative (Jet) through
  // window_basis, a computation independent of the integration by parts.
  // Both difference nearly equal numbers: at long periods the tolerance is
  // the pair test's round-off scale times one more factor r = P / W (d/d ln P
  // of the offsets ~ r^3, of the slopes ~ 2 pi / P r^4), at short ones the
  // derivative's own size times q^2, q = 1 + 2 pi W / P (antiderivatives
  // in E ~ (2 pi W / P)^2); 600 orbits gave at most 0.7e-15 of that.
  std::mt19937_64 g(47);
  const Window discrete{2014.57, 2017.41, 2016.0, {2014.8, 2015.5, 2016.6, 2017.2}, {0.5, 1.0, 2.0, 1.0}};
  using J = ceres::Jet<double, 1>;
  double worst = 0.0;
  for (int n = 0; n < 600; ++n) {
    const Orbit<double> o = random_orbit(g, n, 0.3, 1.1, 2.0);
    const double P = o.period_yr, e = o.ecc;
    INFO("P = " << P << " e = " << e);
    WindowBasis<double> a, b, da, db;
    window_basis_pair_dlnp(o, kPairEarly, kPairLate, a, b, da, db);
    WindowBasis<double> a1, b1;
    window_basis_pair(o, kPairEarly, kPairLate, a1, b1);
    CHECK((a.x0 == a1.x0 && a.xs == a1.xs && a.y0 == a1.y0 && a.ys == a1.ys));
    CHECK((b.x0 == b1.x0 && b.xs == b1.xs && b.y0 == b1.y0 && b.ys == b1.ys));
    J period(P, 0);
    period.v[0] = P;  // dP / d ln P
    const Orbit<J> oj{period, J(e), J(0.3), J(1.1), J(2.0), J(o.mean_anom_ref_rad), 2016.0};
    WindowBasis<J> aj, bj;
    window_basis_pair(oj, kPairEarly, kPairLate, aj, bj);
    const double r = std::max(1.0, P / 3.36), off = r * r * r, slope = units::kTwoPi / P * r * r * r * r;
    const double q = 1.0 + units::kTwoPi * 3.36 / P;
    for (const auto& [x, y, s] : {std::tuple{da.x0, aj.x0.v[0], off}, {da.xs, aj.xs.v[0], slope},
                                  {da.y0, aj.y0.v[0], off}, {da.ys, aj.ys.v[0], slope},
                                  {db.x0, bj.x0.v[0], off}, {db.xs, bj.xs.v[0], slope},
                                  {db.y0, bj.y0.v[0], off}, {db.ys, bj.ys.v[0], slope}})
      worst = std::max(worst, std::abs(x - y) / (std::max(std::abs(y), s) * q * q));
    // A discrete window (weighted times) takes the automatic derivative
    // itself; against five-point differences in ln P (common practice, no
    // source), with a step that moves the phase by ~1e-3 (1 - e) rad.
    WindowBasis<double> c, dc;
    window_basis_dlnp(o, discrete, c, dc);
    CHECK(c.x0 == Approx(window_basis(o, discrete).x0).epsilon(1e-12).margin(1e-12));  // Jets divide by inverses
    CHECK(c.ys == Approx(window_basis(o, discrete).ys).epsilon(1e-12).margin(1e-12 / P));
    auto at = [&](double x) {
      Orbit<double> s = o;
      s.period_yr = P * std::exp(x);
      return window_basis(s, discrete);
    };
    const double h = 1e-3 * (1.0 - e) * P / (P + units::kTwoPi);
    const WindowBasis<double> p2 = at(2 * h), p1 = at(h), m1 = at(-h), m2 = at(-2 * h);
    auto fd = [&](double WindowBasis<double>::*f) { return (-(p2.*f) + 8 * (p1.*f) - 8 * (m1.*f) + (m2.*f)) / (12 * h); };
    CHECK(dc.x0 == Approx(fd(&WindowBasis<double>::x0)).epsilon(1e-6).margin(1e-9));
    CHECK(dc.xs == Approx(fd(&WindowBasis<double>::xs)).epsilon(1e-6).margin(1e-9 / P));
    CHECK(dc.y0 == Approx(fd(&WindowBasis<double>::y0)).epsilon(1e-6).margin(1e-9));
    CHECK(dc.ys == Approx(fd(&WindowBasis<double>::ys)).epsilon(1e-6).margin(1e-9 / P));
  }
  INFO("worst difference over its round-off scale: " << worst);
  CHECK(worst <= 4e-15);
}
