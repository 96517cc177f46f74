// libFuzzer target: the orbit-draw table, each star predicted at one date
// (the path that once indexed a histogram with NaN).
#include "fuzz.hpp"
#include "heft/draws.hpp"
#include "heft/predict.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  heft::fuzz::guarded(heft::fuzz::bytes(data, size), [](std::istream& in) {
    heft::PredictOptions opt;
    opt.iwa_mas = 80.0;
    opt.owa_mas = 2000.0;
    opt.grid_n = 16;
    for (const auto& star : heft::read_draws(in, "draws.csv")) (void)heft::predict_sky(star.draws, 2027.25, opt);
  });
  return 0;
}
