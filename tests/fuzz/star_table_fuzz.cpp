// libFuzzer target: the canonical star table reader, each valid row screened;
// and the CSV reader's next_first (the rows of ids not asked for) against
// next(), which it must match field for field, error for error.
#include <sstream>

#include "fuzz.hpp"
#include "heft/catalog.hpp"
#include "heft/io.hpp"
#include "heft/screen.hpp"

namespace {
void check_next_first(const std::string& text, std::size_t n) {
  std::istringstream a(text), b(text);
  heft::CsvReader full(a, "fuzz.csv"), first(b, "fuzz.csv");
  for (;;) {
    std::string error_full, error_first;
    bool got_full = false, got_first = false;
    try {
      got_full = full.next();
    } catch (const heft::Error& e) {
      error_full = e.what();
    }
    try {
      got_first = first.next_first(n);
    } catch (const heft::Error& e) {
      error_first = e.what();
    }
    if (error_full != error_first || got_full != got_first) __builtin_trap();
    if (!error_full.empty() || !got_full) return;
    if (first.field_count() != full.field_count() || first.line() != full.line()) __builtin_trap();
    first.complete();
    if (first.fields() != full.fields()) __builtin_trap();
    for (std::size_t i = 0; i < full.field_count(); ++i)
      if (first.column(i) != full.column(i)) __builtin_trap();
  }
}
}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  for (std::size_t n : {1, 3}) check_next_first(heft::fuzz::bytes(data, size), n);
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
