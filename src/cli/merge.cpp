// heft merge: joins the shard outputs of heft rank into the table a single
// run would have written, checking that the shards belong together and
// that no star is missing or duplicated.

#include <memory>
#include <set>

#include "cli/commands.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/rank.hpp"
#include "heft/survey.hpp"

namespace heft::cli {
namespace {

struct MergeCliOptions {
  std::vector<std::string> parts;
  std::string output = "-", json, format;
  bool quiet = false;
};

int run_merge(const MergeCliOptions& o) {
  require_distinct_outputs({{"-o", o.output}, {"--json", o.json}});
  std::vector<RankRecord> all;
  RankRunInfo merged;
  std::set<long> shards_seen;
  long n_shards = 0;
  std::set<std::string> ids;
  for (const auto& path : o.parts) {
    TableInput in(path, rank_column_units());
    RankRunInfo info;
    std::vector<RankRecord> recs = read_ranked(in.stream(), in.name(), info);
    const auto sh = info.fields.find("shard");
    if (sh == info.fields.end()) throw InputError(in.name(), 1, 0, "run metadata lacks 'shard'");
    long k = 0, n = 0;
    if (!parse_shard(sh->second, k, n))
      throw InputError(in.name(), 1, 0, "bad shard '" + sh->second + "' in the run metadata");
    RankRunInfo common = info;
    common.fields.erase("shard");
    if (all.empty() && shards_seen.empty()) {
      merged = common;
      n_shards = n;
    } else if (common.fields != merged.fields || n != n_shards) {
      throw InputError(in.name(), 1, 0, "run metadata differs from the first part's (other input, options or N)");
    }
    if (!shards_seen.insert(k).second)
      throw InputError(in.name(), 1, 0, "shard " + sh->second + " given twice");
    for (auto& r : recs) {
      if (!ids.insert(r.id).second) throw InputError(in.name(), 0, 0, "star '" + r.id + "' appears in more than one part");
      all.push_back(std::move(r));
    }
  }
  if (static_cast<long>(shards_seen.size()) != n_shards) {
    std::string missing;
    for (long k = 1; k <= n_shards; ++k)
      if (!shards_seen.count(k)) missing += (missing.empty() ? "" : ", ") + std::to_string(k) + "/" + std::to_string(n_shards);
    throw InputError(o.parts.front(), 0, 0, "missing shard(s): " + missing);
  }
  double rows = 0;
  if (!parse_double(merged.fields["rows"], rows) || static_cast<double>(all.size()) != rows)
    throw InputError(o.parts.front(), 1, 0,
                     "the parts hold " + std::to_string(all.size()) + " stars but the input had " + merged.fields["rows"]);
  merged.fields["shard"] = "1/1";
  RankBy by = RankBy::kScore;
  if (!parse_rank_by(merged.fields["rank_by"], by))
    throw InputError(o.parts.front(), 1, 0, "run metadata: rank_by must be p_detect or score");
  assign_ranks(all, by);
  if (!o.json.empty()) write_file_atomic(o.json, ranked_json(merged, all));
  TableOutput table(o.output, format_for(o.output, o.format), rank_column_units());
  table.write(ranked_table(merged, all));
  table.commit();
  if (!o.quiet) message("merge", std::to_string(all.size()) + " stars from " + std::to_string(o.parts.size()) + " parts");
  return kOk;
}

}  // namespace

void setup_merge(CLI::App& app, Runner& run) {
  auto o = std::make_shared<MergeCliOptions>();
  CLI::App* sub = app.add_subcommand(
      "merge",
      "Join the shard outputs of heft rank (--shard K/N) into one ranked table, byte-identical to a single "
      "run's; checks that every shard is there once, that the parts share input and options, and that no star "
      "is missing or duplicated.");
  sub->add_option("parts", o->parts, "ranked tables of the shards (CSV)")->required();
  sub->add_option("-o,--output", o->output, "merged ranked table (CSV, ECSV or FITS); default stdout");
  add_format_option(sub, o->format);
  sub->add_option("--json", o->json, "also write it as JSON");
  sub->add_flag("-q,--quiet", o->quiet, "no informational messages");
  sub->callback([o, &run] { run = [o] { return run_merge(*o); }; });
}

}  // namespace heft::cli
