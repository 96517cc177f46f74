// libFuzzer target: the deep fit's JSON star file, read and written back.
#include "fuzz.hpp"
#include "heft/starfile.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  heft::fuzz::guarded(heft::fuzz::bytes(data, size), [](std::istream& in) {
    const heft::StarFile f = heft::read_star_file(in, "star.json", heft::WindowDefaults{});
    (void)heft::star_file_json(f);
  });
  return 0;
}
