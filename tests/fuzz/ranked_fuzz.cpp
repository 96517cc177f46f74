// libFuzzer target: a ranked table (as heft merge reads it), the same bytes
// as a rank checkpoint (as --resume reads it) and as a rank JSON with the
// options from its metadata (as heft report reads it), written back.
#include "fuzz.hpp"
#include "heft/rank.hpp"
#include "heft/survey.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text = heft::fuzz::bytes(data, size);
  heft::fuzz::guarded(text, [](std::istream& in) {
    heft::RankRunInfo info;
    auto records = heft::read_ranked(in, "ranked.csv", info);
    heft::assign_ranks(records, heft::RankBy::kScore);
    (void)heft::ranked_json(info, records);
    (void)heft::ranked_table(info, records);
  });
  heft::fuzz::guarded(text, [](std::istream& in) {
    const heft::Checkpoint cp = heft::read_checkpoint(in, "ranked.csv.checkpoint");
    (void)heft::ranked_json(cp.info, cp.records);
  });
  heft::fuzz::guarded(text, [](std::istream& in) {
    heft::RankRunInfo info;
    const auto records = heft::read_ranked_json(in, "ranked.json", info);
    (void)heft::ranked_table(info, records);
    heft::SurveyOptions base;
    base.screen_fingerprint = info.fields.count("screen_options") ? info.fields.at("screen_options") : "";
    (void)heft::survey_options_from(info, "ranked.json", base);
  });
  return 0;
}
