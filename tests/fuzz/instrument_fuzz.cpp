// libFuzzer target: a contrast curve, then (after a line "----") a
// mass-magnitude relation, each evaluated across its range.
#include "fuzz.hpp"
#include "heft/rank.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const auto [contrast, mass_mag] = heft::fuzz::split_two(heft::fuzz::bytes(data, size));
  heft::fuzz::guarded(contrast, [](std::istream& in) {
    const heft::ContrastCurve c = heft::ContrastCurve::read(in, "contrast.csv");
    for (double sep : {0.0, 50.0, 100.0, 1e3, 1e5}) (void)c.limit_mag(sep);
  });
  heft::fuzz::guarded(mass_mag, [](std::istream& in) {
    const heft::MassMagnitude m = heft::MassMagnitude::read(in, "mass_mag.csv");
    for (double mass : {0.1, 1.0, 13.0, 80.0, 1e4}) (void)m.abs_mag(mass);
  });
  return 0;
}
