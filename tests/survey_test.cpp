// The survey job through the library, without the binary: a small simulated
// survey ranked whole, in shards, and resumed from its checkpoint.
#include <catch2/catch.hpp>
#include <cstdio>
#include <map>
#include <sstream>

#include "heft/simulate.hpp"
#include "heft/survey.hpp"
#include "test_util.hpp"

using namespace heft;

namespace {
std::string survey_table(int n) {
  SurveyModel m;
  m.seed = 31;
  m.companion_fraction = 0.5;
  m.companion_mass_mjup = {Distribution::Kind::kLogUniform, 20.0, 80.0};
  m.a_au = {Distribution::Kind::kLogUniform, 3.0, 30.0};
  m.distance_pc = {Distribution::Kind::kUniform, 20.0, 40.0};
  std::string t = star_table_header();
  for (long i = 0; i < n; ++i) {
    StarRecord s;
    SimTruth truth;
    simulate_star(m, i, s, truth);
    append_star_row(t, s);
  }
  return t;
}

SurveyOptions fast_options() {
  SurveyOptions o;
  o.rank.date_yr = 2027.5;
  o.rank.iwa_mas = 100.0;
  o.rank.owa_mas = 1500.0;
  o.rank.curve.draws = 128;
  o.n_a = 8;
  return o;
}

std::map<std::string, RankRecord> by_id(const std::vector<RankRecord>& recs) {
  std::map<std::string, RankRecord> m;
  for (const auto& r : recs) m[r.id] = r;
  return m;
}
}  // namespace

TEST_CASE("survey: shards join into the single run, and a resumed run equals a fresh one", "[survey]") {
  const std::string table = survey_table(30);
  const SurveyOptions opt = fast_options();
  std::istringstream in(table);
  const SurveyRun whole = run_survey(in, "s.csv", opt);
  REQUIRE(whole.records.size() == 30);
  CHECK(whole.rows == 30);
  CHECK(whole.curves > 3);
  for (std::size_t k = 0; k < whole.records.size(); ++k) CHECK(whole.records[k].rank == static_cast<long>(k + 1));
  CHECK(whole.info.fields.at("shard") == "1/1");

  // Three shards hold every star once, with the same records.
  const auto ref = by_id(whole.records);
  std::size_t seen = 0;
  for (long k = 1; k <= 3; ++k) {
    SurveyOptions o = opt;
    o.shard_k = k;
    o.shard_n = 3;
    std::istringstream part_in(table);
    const SurveyRun part = run_survey(part_in, "s.csv", o);
    CHECK(part.info.fields.at("shard") == std::to_string(k) + "/3");
    for (const auto& r : part.records) {
      REQUIRE(ref.count(r.id));
      RankRecord a = r, b = ref.at(r.id);
      a.rank = b.rank = 0;  // ranks are per table; every other field must agree to the bit
      std::string ta, tb;
      append_rank_row(ta, a);
      append_rank_row(tb, b);
      CHECK(ta == tb);
    }
    seen += part.records.size();
  }
  CHECK(seen == 30);

  // With a checkpoint: the stars it holds are not computed again.
  SurveyOptions o = opt;
  o.checkpoint = test::tmp_path("survey_test.checkpoint");
  std::remove(o.checkpoint.c_str());
  std::istringstream first_in(table);
  run_survey(first_in, "s.csv", o);
  o.resume = true;
  std::istringstream again_in(table);
  const SurveyRun again = run_survey(again_in, "s.csv", o);
  CHECK(again.checkpoint_found);
  CHECK(again.checkpoint_dropped == 0);
  CHECK(ranked_table(again.info, again.records) == ranked_table(whole.info, whole.records));
  // A checkpoint of other options is refused.
  o.rank.curve.seed = 2;
  std::istringstream other_in(table);
  CHECK_THROWS_WITH(run_survey(other_in, "s.csv", o), Catch::Contains("checkpoint of a run with other options"));
  std::remove(o.checkpoint.c_str());
}

TEST_CASE("survey: a ranked run's JSON reads back, its metadata give back its options, and its stars recompute to the bit",
          "[survey][report]") {
  const std::string table = survey_table(30);
  SurveyOptions opt = fast_options();
  opt.rank.occurrence = 0.03;
  opt.rank.curve.seed = 18446744073709551615ULL;  // all 64 bits survive the metadata
  opt.screen_fingerprint = "f00d";
  std::istringstream in(table);
  const SurveyRun run = run_survey(in, "s.csv", opt);

  // The JSON reads back into the same records and metadata as the table.
  std::istringstream json(ranked_json(run.info, run.records));
  RankRunInfo info;
  const std::vector<RankRecord> back = read_ranked_json(json, "r.json", info);
  CHECK(info.fields == run.info.fields);
  CHECK(ranked_table(info, back) == ranked_table(run.info, run.records));

  // The options back from the metadata (screening: the fingerprint must match).
  SurveyOptions base;
  base.screen_fingerprint = "f00d";
  const SurveyOptions o = survey_options_from(info, "r.json", base);
  CHECK(o.rank.curve.seed == opt.rank.curve.seed);
  CHECK(o.rank.occurrence == 0.03);
  CHECK(o.rank.owa_mas == 1500.0);
  CHECK(o.n_a == 8);
  CHECK(o.rank.curve.draws == 128);
  base.screen_fingerprint = "beef";
  CHECK_THROWS_WITH(survey_options_from(info, "r.json", base), Catch::Contains("other screening options"));

  // The stars with curves, computed again: the same records, with figures' data.
  std::vector<std::string> ids;
  std::vector<RankRecord> expected;
  for (const auto& r : run.records)
    if (present(r.p_real)) ids.push_back(r.id), expected.push_back(r);
  REQUIRE(ids.size() >= 3);
  std::istringstream again(table);
  const std::vector<StarDetail> d = rank_details(again, "s.csv", o, ids);
  REQUIRE(d.size() == ids.size());
  for (std::size_t k = 0; k < d.size(); ++k) {
    RankRecord a = d[k].record;
    a.rank = expected[k].rank;
    std::string ta, tb;
    append_rank_row(ta, a);
    append_rank_row(tb, expected[k]);
    CHECK(ta == tb);
    CHECK(d[k].detail.curve.size() >= 8);
    CHECK(d[k].detail.sky.n >= 101);
    CHECK(d[k].detail.sky.density.size() == static_cast<std::size_t>(d[k].detail.sky.n * d[k].detail.sky.n));
  }
  std::istringstream missing(table);
  CHECK_THROWS_WITH(rank_details(missing, "s.csv", o, {"no-such-star"}), Catch::Contains("no row for star 'no-such-star'"));

  // Not a rank JSON: the error names the file and the JSON path.
  std::istringstream other("{\"run\": {\"command\": \"fit\"}, \"stars\": []}");
  CHECK_THROWS_WITH(read_ranked_json(other, "x.json", info), Catch::Contains("x.json") && Catch::Contains("/run/command"));
}
