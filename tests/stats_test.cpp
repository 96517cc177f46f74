#include <catch2/catch.hpp>
#include <algorithm>
#include <random>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include <Eigen/Cholesky>
#include <Eigen/LU>

#include "heft/stats.hpp"

using namespace heft;

TEST_CASE("chi2 survival for even dof", "[stats]") {
  // Source: closed forms Q(2) = exp(-x/2), Q(4) = exp(-x/2)(1 + x/2)
  // (Abramowitz & Stegun 26.4.21).
  CHECK(chi2_log_survival(3.0, 2) == Approx(-1.5).epsilon(1e-15));
  CHECK(chi2_log_survival(5.0, 4) == Approx(std::log(std::exp(-2.5) * 3.5)).epsilon(1e-14));
  CHECK(chi2_log_survival(1e4, 4) == Approx(-5000.0 + std::log(5001.0)).epsilon(1e-15));
  CHECK(chi2_log_survival(0.0, 2) == 0.0);
}

TEST_CASE("two-sided Gaussian significance", "[stats]") {
  // Source: 2 Phi(-z) = erfc(z / sqrt 2) (definition); for z = 1, 2, 3, 5 the
  // significance of the matching chi2(2) value must come back.
  for (double z : {0.5, 1.0, 2.0, 3.0, 5.0, 7.5}) {
    const double p = std::erfc(z / std::sqrt(2.0));
    const double chi2 = -2.0 * std::log(p);
    CHECK(chi2_to_sigma(chi2, 2) == Approx(z).epsilon(1e-12));
  }
  // Known value: 2 Phi(-3) = 0.0026997960632601866 (common practice, from memory).
  CHECK(sigma_from_log_p(std::log(0.0026997960632601866)) == Approx(3.0).epsilon(1e-12));
  CHECK(chi2_to_sigma(0.0, 4) == 0.0);
}

TEST_CASE("normal tail stays accurate far out (chi2 up to 1e4)", "[stats]") {
  // The continued fraction branch joins erfc at z = 8 (internal consistency).
  CHECK(log_normal_upper_tail(7.999999999) == Approx(log_normal_upper_tail(8.0)).epsilon(1e-9));
  // Source: asymptotic series Phi(-z) ~ phi(z)/z (1 - 1/z^2 + 3/z^4 - 15/z^6 + 105/z^8)
  // (Abramowitz & Stegun 26.2.12), accurate to ~1e-13 at z = 50.
  const double z = 50.0;
  const double series = 1 - 1 / (z * z) + 3 / std::pow(z, 4) - 15 / std::pow(z, 6) + 105 / std::pow(z, 8);
  const double ref = -0.5 * z * z - std::log(z * std::sqrt(2 * M_PI)) + std::log(series);
  CHECK(log_normal_upper_tail(z) == Approx(ref).epsilon(1e-14));
  // chi2 = 1e4 with 2 and 4 dof: finite, and the round trip holds.
  for (int dof : {2, 4}) {
    const double s = chi2_to_sigma(1e4, dof);
    REQUIRE(std::isfinite(s));
    CHECK(s > 95.0);
    CHECK(s < 101.0);
    CHECK(std::log(2.0) + log_normal_upper_tail(s) ==
          Approx(chi2_log_survival(1e4, dof)).epsilon(1e-12));
  }
}

TEST_CASE("normal distribution function", "[stats]") {
  // Source: mpmath.ncdf at 30 digits (Debian python3-mpmath, run once by
  // hand through /usr/bin/python3).
  CHECK(normal_cdf(0.0) == 0.5);
  CHECK(normal_cdf(-1.0) == Approx(0.158655253931457051).epsilon(1e-15));
  CHECK(normal_cdf(3.0) == Approx(0.998650101968369905).epsilon(1e-15));
  CHECK(normal_cdf(-8.0) == Approx(6.22096057427178412e-16).epsilon(1e-13));  // the far tail, relative
  CHECK(normal_cdf(normal_quantile(0.025)) == Approx(0.025).epsilon(1e-14));
}

TEST_CASE("normal quantile", "[stats]") {
  // Source: Phi(1.959963984540054) = 0.975 (common practice, from memory).
  CHECK(normal_quantile(0.975) == Approx(1.959963984540054).epsilon(1e-13));
  CHECK(normal_quantile(0.5) == Approx(0.0).margin(1e-15));
  CHECK(normal_quantile(1e-10) == Approx(-6.361340902404056).epsilon(1e-10));
}

TEST_CASE("chi2 to sigma against mpmath at 50 digits, up to 270 sigma", "[stats][reference]") {
  // Source: mpmath (Debian python3-mpmath, arbitrary precision) through
  // Debian's /usr/bin/python3: ln Q(k/2, x/2) by the regularised upper
  // incomplete gamma function and the z with erfc(z / sqrt 2) = p by root
  // finding on ln erfc, both at 50 significant digits.
  std::vector<std::pair<double, int>> cases;
  for (int dof : {2, 4})
    for (double chi2 : {0.1, 1.0, 4.0, 11.8, 30.0, 100.0, 1e3, 1e4, 3e4, 7.5e4})
      cases.emplace_back(chi2, dof);
  std::string args;
  for (auto [x, k] : cases) args += " " + std::to_string(x) + ":" + std::to_string(k);
  const std::string script =
      "import sys, mpmath as m\n"
      "m.mp.dps = 50\n"
      "for a in sys.argv[1:]:\n"
      "    x, k = a.split(':'); x = m.mpf(x); k = int(k)\n"
      "    lp = m.log(m.gammainc(m.mpf(k) / 2, x / 2, m.inf, regularized=True))\n"
      "    z = m.findroot(lambda z: m.log(m.erfc(z / m.sqrt(2))) - lp, m.sqrt(max(-2 * lp, m.mpf('1e-6'))))\n"
      "    print(m.nstr(lp, 20), m.nstr(z, 20))\n";
  const std::string py = std::string(HEFT_TEST_TMP) + "/mpmath_chi2.py", out = py + ".out";
  {
    std::FILE* f = std::fopen(py.c_str(), "w");
    REQUIRE(f);
    std::fputs(script.c_str(), f);
    std::fclose(f);
  }
  if (std::system("/usr/bin/python3 -c 'import mpmath' 2>/dev/null") != 0) {
    WARN("Debian's python3-mpmath is missing: reference check skipped (tests/run.sh installs it)");
    return;
  }
  REQUIRE(std::system(("/usr/bin/python3 " + py + args + " > " + out).c_str()) == 0);
  std::FILE* f = std::fopen(out.c_str(), "r");
  REQUIRE(f);
  double max_sigma = 0.0;
  for (auto [x, k] : cases) {
    double lp_ref = 0, z_ref = 0;
    REQUIRE(std::fscanf(f, "%lf %lf", &lp_ref, &z_ref) == 2);
    INFO("chi2 " << x << ", dof " << k);
    CHECK(chi2_log_survival(x, k) == Approx(lp_ref).epsilon(1e-13));
    CHECK(chi2_to_sigma(x, k) == Approx(z_ref).epsilon(1e-12));
    max_sigma = std::max(max_sigma, z_ref);
  }
  std::fclose(f);
  CHECK(max_sigma > 270.0);
}

TEST_CASE("weighted quantiles by selection equal those of the sorted values", "[stats]") {
  // Oracle: weighted_quantile on the fully sorted pairs (its definition).
  // Weights are multiples of 1/8 so every cumulative sum is exact and the
  // two must agree exactly; values include ties.
  const std::vector<double> ps = {0.0, 0.025, 0.16, 0.5, 0.84, 0.975, 1.0};
  // Above 2,048 pairs the buckets are used: sets with negative values, one
  // distinct value, and a far outlier beside a narrow cluster (one bucket
  // holds nearly every pair) are among them.
  for (const std::size_t n : {std::size_t{0}, std::size_t{1}, std::size_t{7}, std::size_t{65},
                              std::size_t{1000}, std::size_t{2049}, std::size_t{32768}, std::size_t{32769},
                              std::size_t{32770}, std::size_t{32771}}) {
    std::mt19937_64 gen(n + 1);
    std::vector<std::pair<double, double>> pairs;
    double total = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
      double v = static_cast<double>(gen() % (n / 3 + 1)) + 0.25 * static_cast<double>(gen() % 4);
      if (n == 32769) v -= static_cast<double>(n / 6);  // about half negative
      if (n == 32770) v = 3.5;
      if (n == 32771) v = i == 0 ? 1e6 : 1.0 + 1e-9 * static_cast<double>(gen() % 1000);
      const double w = static_cast<double>(gen() % 17) / 8.0;
      pairs.emplace_back(v, w);
      total += w;
    }
    std::vector<std::pair<double, double>> sorted = pairs;
    std::sort(sorted.begin(), sorted.end());
    const std::vector<double> got = weighted_quantiles(pairs, total, ps);
    REQUIRE(got.size() == ps.size());
    for (std::size_t k = 0; k < ps.size(); ++k) {
      INFO("n " << n << " p " << ps[k]);
      const double want = weighted_quantile(sorted, total, ps[k]);
      if (std::isnan(want)) CHECK(std::isnan(got[k]));
      else CHECK(got[k] == want);
    }
  }
}

namespace {
template <int N>
void check_ldlt_against_eigen(std::mt19937_64& gen, int& checked) {
  std::normal_distribution<double> g;
  std::uniform_real_distribution<double> u(-8.0, 8.0);
  for (int trial = 0; trial < 2000; ++trial) {
    // covariances as a catalogue has them: errors over 16 decades, any
    // correlations (a random Gram matrix), some nearly singular
    Eigen::Matrix<double, N, N> a;
    for (int i = 0; i < N; ++i)
      for (int j = 0; j < N; ++j) a(i, j) = g(gen);
    Eigen::Matrix<double, N, 1> scale, d;
    for (int i = 0; i < N; ++i) scale(i) = std::pow(10.0, u(gen));
    Eigen::Matrix<double, N, N> c = scale.asDiagonal() * (a * a.transpose()) * scale.asDiagonal();
    if (trial % 10 == 0) c += 1e-6 * c.diagonal().asDiagonal().toDenseMatrix();  // well conditioned ones too
    for (int i = 0; i < N; ++i) d(i) = scale(i) * g(gen);
    const Eigen::LLT<Eigen::Matrix<double, N, N>> llt(c);
    if (llt.info() != Eigen::Success) continue;
    const double ref = d.dot(llt.solve(d));
    // the two orders of operations agree to about eps times the condition
    // number of the correlation matrix (the scales cancel)
    const Eigen::Matrix<double, N, 1> inv_sd = c.diagonal().cwiseSqrt().cwiseInverse();
    const Eigen::Matrix<double, N, N> r = inv_sd.asDiagonal() * c * inv_sd.asDiagonal();
    const double cond = r.inverse().norm() * r.norm();
    if (!(cond < 1e8)) continue;
    Eigen::Matrix<double, N, N> l = c;
    REQUIRE(ldlt_in_place(l));
    // L D^1/2 is the Cholesky factor
    const Eigen::Matrix<double, N, N> lower =
        Eigen::Matrix<double, N, N>(l.template triangularView<Eigen::UnitLower>()) * l.diagonal().cwiseSqrt().asDiagonal();
    const Eigen::Matrix<double, N, N> eigen_l = llt.matrixL();
    CHECK((inv_sd.asDiagonal() * (lower - eigen_l)).norm() <= 1e-15 * cond + 1e-14);
    CHECK(mahalanobis_sq(d, c) == Approx(ref).epsilon(1e-15 * cond + 1e-14));
    ++checked;
  }
}
}  // namespace

TEST_CASE("L D L^T factor and Mahalanobis length of small covariances agree with Eigen's LLT", "[stats]") {
  // Reference: Eigen's LLT (a reference library), whose factor is L D^1/2.
  std::mt19937_64 gen(4242);
  int checked = 0;
  check_ldlt_against_eigen<2>(gen, checked);
  check_ldlt_against_eigen<4>(gen, checked);
  check_ldlt_against_eigen<5>(gen, checked);
  CHECK(checked > 3000);
  // chi2 of a worked case by hand: C = [[4, 2], [2, 5]], d = (2, 1):
  // C^-1 = [[5, -2], [-2, 4]] / 16, so chi2 = (20 - 8 + 4) / 16 = 1.
  Eigen::Matrix2d c2;
  c2 << 4.0, 2.0, 2.0, 5.0;
  CHECK(mahalanobis_sq(Eigen::Vector2d(2.0, 1.0), c2) == Approx(1.0).epsilon(1e-15));
  // not positive definite: an indefinite matrix, a singular one, a NaN
  Eigen::Matrix<double, 5, 5> bad = Eigen::Matrix<double, 5, 5>::Identity();
  bad(3, 4) = bad(4, 3) = 1.0;  // rows 3 and 4 equal: singular
  CHECK_FALSE(ldlt_in_place(bad));
  bad = Eigen::Matrix<double, 5, 5>::Identity();
  bad(0, 4) = bad(4, 0) = 1.5;  // correlation beyond 1
  CHECK_FALSE(ldlt_in_place(bad));
  CHECK(std::isnan(mahalanobis_sq(Eigen::Matrix<double, 5, 1>::Ones().eval(), bad)));
  Eigen::Matrix2d nan2 = c2;
  nan2(1, 1) = std::nan("");
  CHECK_FALSE(ldlt_in_place(nan2));
}
