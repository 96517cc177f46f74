// kepler_bench: Kepler solves per second and window-model evaluations per
// second on one core, against a plain baseline (Newton from E0 = M with libm
// sin and cos) in the same run.

#include <chrono>
#include <cmath>
#include <cstdio>
#include <vector>

#include "heft/kepler.hpp"
#include "heft/rng.hpp"
#include "heft/window.hpp"

using namespace heft;
using Clock = std::chrono::steady_clock;

namespace {
double plain_newton(double M, double e) {
  double E = M;
  for (int i = 0; i < 100; ++i) {
    const double d = (E - e * std::sin(E) - M) / (1 - e * std::cos(E));
    E -= d;
    if (std::abs(d) < 1e-13) break;
  }
  return E;
}

template <typename F>
double rate(long n, F&& f) {
  const auto t0 = Clock::now();
  f();
  return n / std::chrono::duration<double>(Clock::now() - t0).count();
}
}  // namespace

int main() {
  const long n = 4000000;
  Rng rng(1);
  std::vector<double> M(n), E(n);
  for (auto& m : M) m = units::kTwoPi * rng.uniform();
  double sink = 0;
  std::printf("Kepler solves per second, one core, %ld mean anomalies per eccentricity\n", n);
  std::printf("%6s %14s %14s %10s %14s %10s %14s %10s\n", "e", "baseline", "heft", "heft/base", "heft batch4",
              "batch/base", "heft batch32", "b32/base");
  for (double e : {0.1, 0.5, 0.9, 0.99}) {
    const double rb = rate(n, [&] { for (long i = 0; i < n; ++i) E[i] = plain_newton(M[i], e); });
    sink += E[7];
    const double rs = rate(n, [&] {
      for (long i = 0; i < n; ++i) {
        const KeplerSolution k = kepler_solution(M[i], e);
        E[i] = k.E + k.sin_E;  // both used, as the window model does
      }
    });
    sink += E[7];
    const double es[4] = {e, e, e, e};
    const double r4 = rate(n, [&] {
      KeplerSolution k[4];
      for (long i = 0; i + 4 <= n; i += 4) {
        kepler_solutions4(&M[i], es, k);
        for (int j = 0; j < 4; ++j) E[i + j] = k[j].E + k[j].sin_E;
      }
    });
    sink += E[7];
    // 32 at a time, as the window model solves a group of eight orbits
    const std::vector<double> e32(32, e);
    const double r32 = rate(n, [&] {
      KeplerSolution k[32];
      for (long i = 0; i + 32 <= n; i += 32) {
        kepler_solutions(&M[i], e32.data(), k, 32);
        for (int j = 0; j < 32; ++j) E[i + j] = k[j].E + k[j].sin_E;
      }
    });
    sink += E[7];
    std::printf("%6.2f %14.3e %14.3e %10.2f %14.3e %10.2f %14.3e %10.2f\n", e, rb, rs, rs / rb, r4, r4 / rb, r32,
                r32 / rb);
  }
  const long nw = 200000;
  for (double P : {0.5, 5.0, 50.0}) {
    const Window w{2014.57, 2017.41, 2016.0, {}, {}};
    const double rw = rate(nw, [&] {
      for (long i = 0; i < nw; ++i) {
        const Orbit<double> o{P, 0.5, 0, 0, 0, M[i], 2016.0};
        sink += window_basis(o, w).xs;
      }
    });
    const double rp = rate(nw, [&] {
      for (long i = 0; i < nw; ++i) {
        const Orbit<double> o{P, 0.5, 0, 0, 0, M[i], 2016.0};
        WindowBasis<double> a, b;
        window_basis_pair(o, w, w, a, b);
        sink += a.xs + b.xs;
      }
    });
    std::printf("window model (continuous, P = %4.1f yr, e = 0.5): %.3e evaluations/s; both catalogues "
                "as one batch: %.3e pairs/s\n", P, rw, rp);
  }
  std::printf("(checksum %g)\n", sink);
  return 0;
}
