// libFuzzer target: a table file in any format (FITS, ECSV, CSV) opened by
// TableInput with the star table's units and read as the star table.
#include <unistd.h>

#include <cstdio>
#include <fstream>

#include "fuzz.hpp"
#include "heft/catalog.hpp"
#include "heft/tablefile.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  // TableInput reads files (cfitsio needs one): a private file per process.
  static const std::string path = "/tmp/heft-table-fuzz-" + std::to_string(getpid());
  {
    std::ofstream out(path, std::ios::binary);
    out.write(reinterpret_cast<const char*>(data), static_cast<std::streamsize>(size));
  }
  try {
    heft::TableInput in(path, heft::star_column_units());
    heft::StarTableReader reader(in.stream(), in.name());
    heft::StarRecord star;
    std::string bad;
    while (reader.next(star, bad)) {
    }
  } catch (const heft::Error&) {
  }
  std::remove(path.c_str());
  return 0;
}
