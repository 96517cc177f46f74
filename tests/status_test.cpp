// The typed row status and notes: the text written in tables and JSON, read
// back exactly (docs/formats.md: "ok", "bad_input:<reason>", "failed:<reason>",
// notes joined with '|').
#include <catch2/catch.hpp>
#include <sstream>

#include "heft/error.hpp"
#include "heft/rank.hpp"
#include "heft/status.hpp"

using namespace heft;

TEST_CASE("status: text and parse are inverse, anything else is refused", "[status]") {
  for (const RowStatus& s : {RowStatus{}, RowStatus::bad_input("missing_value"), RowStatus::failed("curve")}) {
    RowStatus back = RowStatus::failed("x");
    REQUIRE(RowStatus::parse(s.text(), back));
    CHECK(back == s);
  }
  CHECK(RowStatus::bad_input("no_host_mass").text() == "bad_input:no_host_mass");
  CHECK(RowStatus::failed("singular_anomaly_covariance").text() == "failed:singular_anomaly_covariance");
  RowStatus s;
  CHECK_FALSE(RowStatus::parse("OK", s));
  CHECK_FALSE(RowStatus::parse("bad_input:", s));
  CHECK_FALSE(RowStatus::parse("failed", s));
  CHECK_FALSE(RowStatus::parse("", s));
}

TEST_CASE("status: notes join and split, without duplicates", "[status]") {
  Notes n;
  add_note(n, "no_rv");
  add_note(n, "below_detect_sigma");
  add_note(n, "no_rv");
  CHECK(n == Notes{"no_rv", "below_detect_sigma"});
  CHECK(join_notes(n) == "no_rv|below_detect_sigma");
  CHECK(split_notes(join_notes(n)) == n);
  CHECK(split_notes("").empty());
  CHECK(has_note(n, "no_rv"));
  CHECK_FALSE(has_note(n, "no"));
}

TEST_CASE("status: a ranked table with an unknown status is refused at its field", "[status]") {
  RankRunInfo info;
  info.fields = {{"shard", "1/1"}};
  RankRecord r;
  r.id = "S1";
  r.rank = 1;
  r.status = RowStatus::bad_input("missing_value");
  r.notes = {"no_rv", "below_detect_sigma"};
  const std::string table = ranked_table(info, {r});
  std::istringstream in(table);
  RankRunInfo back_info;
  const auto back = read_ranked(in, "r.csv", back_info);
  REQUIRE(back.size() == 1);
  CHECK(back[0].status == r.status);
  CHECK(back[0].notes == r.notes);
  std::string broken = table;
  broken.replace(broken.find("bad_input:missing_value"), 23, "maybe");
  std::istringstream bad(broken);
  CHECK_THROWS_WITH(read_ranked(bad, "r.csv", back_info), Catch::Contains("r.csv:3:") && Catch::Contains("not a row status"));
}
