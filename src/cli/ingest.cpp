// heft ingest: join two raw catalogue extracts into the canonical star table.

#include <fstream>
#include <memory>

#include "cli/commands.hpp"
#include "heft/error.hpp"
#include "heft/ingest.hpp"
#include "heft/io.hpp"

namespace heft::cli {
namespace {

struct IngestCliOptions {
  std::string early, late, map, output = "-", key_early, key_late, xmatch, unmatched, format;
  std::string early_preset, late_preset;
  double match_radius_arcsec = 0.0;
  bool quiet = false;
};

nlohmann::json read_json_file(const std::string& path) {
  InputFile f(path);
  return read_json(f.stream(), f.name());
}

int run_ingest(const IngestCliOptions& o) {
  require_distinct_outputs({{"-o", o.output}, {"--unmatched", o.unmatched}});
  if (o.map.empty() && (o.early_preset.empty() || o.late_preset.empty()))
    throw CLI::ValidationError("give --map, or --early-preset and --late-preset (a --map then overrides them)");
  const bool by_position = o.match_radius_arcsec > 0;
  const bool by_key = !by_position && o.xmatch.empty() && (!o.key_early.empty() || !o.key_late.empty());
  const int modes = by_key + !o.xmatch.empty() + by_position;
  if (modes != 1 || (by_key && (o.key_early.empty() || o.key_late.empty())))
    throw CLI::ValidationError(
        "choose one matching: --key-early and --key-late, --xmatch (with both keys), or "
        "--match-radius (with --key-late for the ids)");
  if (!o.xmatch.empty() && (o.key_early.empty() || o.key_late.empty()))
    throw CLI::ValidationError("--xmatch needs --key-early and --key-late to identify rows");
  // The map: each epoch's preset with the --map file's entries laid over it.
  nlohmann::json j = o.map.empty() ? nlohmann::json::object() : read_json_file(o.map);
  const std::string map_name = o.map.empty() ? "<presets>" : o.map;
  if (j.is_object()) {
    if (!o.early_preset.empty())
      j["early"] = overlay_epoch_map(ingest_preset(o.early_preset, "--early-preset"),
                                     j.contains("early") ? j["early"] : nlohmann::json::object());
    if (!o.late_preset.empty())
      j["late"] = overlay_epoch_map(ingest_preset(o.late_preset, "--late-preset"),
                                    j.contains("late") ? j["late"] : nlohmann::json::object());
  }
  const IngestMap map = parse_ingest_map(j, map_name);
  // Matched by position, a star's id comes from a mapped 'id' column or the
  // late (else early) key column: without any, every row would lack an id.
  if (by_position && o.key_late.empty() && o.key_early.empty() && !map.late.star_fields.count("id") &&
      !map.early.star_fields.count("id"))
    throw InputError::at_json(o.map, "/late/star/id",
                              "matching by position needs the stars' ids: map an 'id' column or give --key-late COLUMN");
  TableInput fe(o.early, map_column_units(map.early)), fl(o.late, map_column_units(map.late));
  const auto early = read_raw_catalogue(fe.stream(), fe.name(), map.early, o.key_early);
  const auto late = read_raw_catalogue(fl.stream(), fl.name(), map.late, o.key_late);
  MatchResult m;
  if (!o.xmatch.empty()) {
    TableInput fx(o.xmatch);
    m = match_by_pairs(early, late, read_pairs(fx.stream(), fx.name()));
  } else if (by_key) {
    m = match_by_key(early, late);
  } else {
    m = match_by_position(early, late, o.match_radius_arcsec);
  }
  // Canonical columns, then the carried quality indicators of either catalogue.
  std::vector<ColumnUnit> units = star_column_units();
  std::vector<std::pair<const EpochMap*, std::string>> carried;
  for (const auto& [em, prefix] : {std::pair{&map.early, std::string("early_")}, std::pair{&map.late, std::string("late_")}})
    for (std::size_t k = 0; k < std::size(kCarriedFields); ++k)
      if (em->carry.count(std::string(kCarriedFields[k]))) {
        carried.emplace_back(em, std::string(kCarriedFields[k]));
        units.push_back({prefix + std::string(kCarriedFields[k]), std::string(kCarriedUnits[k])});
      }
  std::string out = star_table_header();
  if (!carried.empty()) {
    out.pop_back();
    for (std::size_t k = std::size(star_column_units()); k < units.size(); ++k) out += "," + units[k].name;
    out += '\n';
  }
  for (auto [e, l] : m.pairs) {
    append_star_row(out, join_entries(early[e], late[l]));
    if (carried.empty()) continue;
    out.pop_back();
    for (const auto& [em, field] : carried) {
      const RawEntry& r = em == &map.early ? early[e] : late[l];
      out += ',';
      append_double(out, r.carried.at(field));
    }
    out += '\n';
  }
  std::unique_ptr<TableOutput> um;
  if (!o.unmatched.empty()) {
    std::string list = "catalogue,line,key,reason\n";
    for (const auto& left : m.leftovers) {
      const RawEntry& r = left.early ? early[left.index] : late[left.index];
      list += left.early ? "early," : "late,";
      list += std::to_string(r.line) + ",";
      append_csv_field(list, r.key);
      list += "," + left.reason + "\n";
    }
    um = std::make_unique<TableOutput>(o.unmatched, format_for(o.unmatched), std::vector<ColumnUnit>{});
    um->write(list);
  }
  TableOutput sink(o.output, format_for(o.output, o.format), units);
  sink.write(out);
  sink.commit();
  if (um) um->commit();
  long n_early = 0, n_late = 0, n_amb = 0;
  for (const auto& left : m.leftovers) {
    if (left.reason == "ambiguous") ++n_amb;
    else if (left.early) ++n_early;
    else ++n_late;
  }
  if (!o.quiet || n_early + n_late + n_amb > 0)
    message("ingest", std::to_string(m.pairs.size()) + " stars matched; " +
                          std::to_string(n_early) + " early-only and " + std::to_string(n_late) +
                          " late-only rows; " + std::to_string(n_amb) + " ambiguous rows");
  return kOk;
}

}  // namespace

void setup_ingest(CLI::App& app, Runner& run) {
  auto o = std::make_shared<IngestCliOptions>();
  CLI::App* sub = app.add_subcommand(
      "ingest",
      "Join two raw catalogue extracts (arbitrary column names and units, described by a JSON "
      "map) into the canonical star table.");
  sub->add_option("--early", o->early, "raw extract of the early catalogue (CSV, ECSV or FITS; file.fits[N] for an extension)")->required();
  sub->add_option("--late", o->late, "raw extract of the late catalogue (CSV, ECSV or FITS)")->required();
  sub->add_option("--map", o->map,
                  "column map (JSON, docs/formats.md); with presets, its entries override theirs");
  sub->add_option("--early-preset", o->early_preset,
                  "column map of a public schema for the early extract: hip2007-main (docs/formats.md, Presets)")
      ->check(CLI::IsMember({"hip2007-main", "dr3-source"}));
  sub->add_option("--late-preset", o->late_preset,
                  "column map of a public schema for the late extract: dr3-source (docs/formats.md, Presets)")
      ->check(CLI::IsMember({"hip2007-main", "dr3-source"}));
  sub->add_option("-o,--output", o->output, "canonical star table (CSV, ECSV or FITS); default stdout");
  add_format_option(sub, o->format);
  sub->add_option("--key-early", o->key_early, "key column of the early extract");
  sub->add_option("--key-late", o->key_late, "key column of the late extract (with --match-radius: the id of each matched star when the map has no id)");
  sub->add_option("--xmatch", o->xmatch,
                  "cross-match table (CSV: early key, late key) instead of equal keys");
  sub->add_option("--match-radius", o->match_radius_arcsec,
                  "match by position within this radius (arcsec), late positions carried back "
                  "to the early epoch with their PMs")
      ->check(CLI::PositiveNumber);
  sub->add_option("--unmatched", o->unmatched,
                  "write the rows found in only one input (and ambiguous ones) here (CSV)");
  sub->add_flag("-q,--quiet", o->quiet, "no informational messages");
  sub->callback([o, &run] { run = [o] { return run_ingest(*o); }; });
}

}  // namespace heft::cli
