#include <catch2/catch.hpp>

#include <cmath>

#include "heft/expseries.hpp"

using namespace heft;

// The reference is the C library's exp (glibc's, correctly rounded in all
// but rare cases; common practice, no source for the bound below).
TEST_CASE("exp_nonpositive: within 5e-16 of std::exp over [-708, 0]", "[expseries]") {
  double worst = 0.0, worst_t = 0.0;
  const int n = 2'000'000;
  for (int i = 0; i <= n; ++i) {
    const double t = -708.0 * i / n;
    const double ref = std::exp(t);
    const double rel = std::abs(exp_nonpositive(t) - ref) / ref;
    if (rel > worst) {
      worst = rel;
      worst_t = t;
    }
  }
  INFO("worst relative error " << worst << " at t = " << worst_t);
  CHECK(worst < 5e-16);  // about two units in the last place
  // Near 0, where the reduction leaves r = t, and at the halfway points of
  // the reduction (r = +-ln 2 / 2), the worst places for the series.
  for (double t : {0.0, -1e-300, -1e-17, -1e-8, -0.5 * std::log(2.0), -1.5 * std::log(2.0), -40.0, -707.9}) {
    INFO("t = " << t);
    CHECK(std::abs(exp_nonpositive(t) - std::exp(t)) <= 1e-15 * std::exp(t));
  }
  CHECK(exp_nonpositive(0.0) == 1.0);
}
