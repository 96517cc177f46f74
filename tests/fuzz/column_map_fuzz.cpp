// libFuzzer target: a JSON column map, then (after a line "----") a raw
// extract read through it, matched with itself by position.
#include "fuzz.hpp"
#include "heft/ingest.hpp"
#include "heft/io.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const auto parts = heft::fuzz::split_two(heft::fuzz::bytes(data, size));
  const std::string& map_text = parts.first;
  const std::string& raw_text = parts.second;
  heft::fuzz::guarded(map_text, [&](std::istream& in) {
    const heft::IngestMap map = heft::parse_ingest_map(heft::read_json(in, "map.json"), "map.json");
    std::istringstream raw(raw_text);
    const auto rows = heft::read_raw_catalogue(raw, "raw.csv", map.late, "");
    const heft::MatchResult m = heft::match_by_position(rows, rows, 1.0);
    std::string out = heft::star_table_header();
    for (auto [e, l] : m.pairs) heft::append_star_row(out, heft::join_entries(rows[e], rows[l]));
  });
  return 0;
}
