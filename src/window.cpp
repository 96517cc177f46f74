#include "heft/window.hpp"

namespace heft {
double circular_window_efficiency(double r) {
  const double x = units::kPi * r;
  if (x < 1e-2) {
    const double x2 = x * x;
    return 1.0 - x2 / 10.0 + x2 * x2 / 280.0 - x2 * x2 * x2 / 15120.0;
  }
  return 3.0 * (std::sin(x) - x * std::cos(x)) / (x * x * x);
}

}  // namespace heft
