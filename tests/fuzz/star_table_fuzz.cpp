// libFuzzer target: the canonical star table reader, each valid row screened.
#include "fuzz.hpp"
#include "heft/catalog.hpp"
#include "heft/screen.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  heft::fuzz::guarded(heft::fuzz::bytes(data, size), [](std::istream& in) {
    heft::StarTableReader reader(in, "fuzz.csv");
    heft::StarRecord star;
    std::string bad;
    const heft::ScreenOptions opt;
    while (reader.next(star, bad)) {
      const heft::ScreenRow row = heft::screen_star(star, bad, opt);
      std::string out;
      heft::append_screen_row(out, row);
      (void)heft::screen_row_json(row).dump();  // throws on invalid UTF-8: must not happen
    }
  });
  return 0;
}
