// heft rank and heft merge: ranking quality, determinism across threads and
// shards, resume after a kill, bad instrument files.

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>
#include <chrono>
#include <cmath>
#include <csignal>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <map>
#include <sstream>
#include <thread>

#include "heft/kepler.hpp"
#include "heft/simulate.hpp"
#include "heft/rank.hpp"
#include "test_util.hpp"

using namespace heft;

namespace {

const char* kSurveyArgs =
    "simulate -q --stars 200 --seed 606 --companion-fraction 0.3 --companion-mass loguniform:5,80 "
    "--a loguniform:3,60 --distance uniform:20,60 --rv-fraction 0.5";
const char* kRankArgs = " --date 2027.5 --iwa 100 --owa 1500 --target-mass 5,80 --n-a 12 -q";
const char* kFast = " --draws 128";

std::string survey(const std::string& tag, std::string* truth = nullptr) {
  const std::string stars = test::tmp_path(tag + "_stars.csv"), t = test::tmp_path(tag + "_truth.csv");
  REQUIRE(test::run_heft(std::string(kSurveyArgs) + " -o " + stars + " --truth " + t) == 0);
  if (truth) *truth = t;
  return stars;
}

long lines_of(const std::string& path) {
  std::ifstream f(path);
  long n = 0;
  std::string l;
  while (std::getline(f, l)) ++n;
  return n;
}

}  // namespace

namespace {

// A ranked simulated survey against its truth: each star's ranking score
// and p_real, and whether it truly hosts a companion inside the working
// angles (true separation at the date) with a mass in the target window.
struct Judged {
  std::string id;
  long rank;
  double score, p_real;
  bool companion, wanted;
};

std::vector<Judged> judge(const std::string& stars, const std::string& truth, const std::string& ranked, double date,
                          double iwa, double owa, double m_lo, double m_hi) {
  const test::Table r = test::read_table(ranked), t = test::read_table(truth), s = test::read_table(stars);
  std::map<std::string, std::size_t> truth_row;
  for (std::size_t k = 0; k < t.rows.size(); ++k) truth_row[t.str(k, "id")] = k;
  std::map<std::string, double> late_epoch;
  for (std::size_t k = 0; k < s.rows.size(); ++k) late_epoch[s.str(k, "id")] = s.num(k, "late_epoch");
  std::vector<Judged> out;
  for (std::size_t i = 0; i < r.rows.size(); ++i) {
    Judged j{r.str(i, "id"), static_cast<long>(r.num(i, "rank")), 0.0, 0.0, false, false};
    j.score = r.str(i, "score").empty() ? 0.0 : r.num(i, "score");
    j.p_real = r.str(i, "p_real").empty() ? 0.0 : r.num(i, "p_real");
    const std::size_t k = truth_row.at(j.id);
    j.companion = t.num(k, "companion") != 0;
    if (j.companion) {
      SimTruth st{};
      st.period_yr = t.num(k, "period_yr");
      st.ecc = t.num(k, "ecc");
      st.inc_deg = t.num(k, "inc_deg");
      st.arg_peri_deg = t.num(k, "arg_peri_deg");
      st.node_deg = t.num(k, "node_deg");
      st.mean_anom_late_deg = t.num(k, "mean_anom_late_deg");
      const OrbitPoint<double> p = orbit_point(truth_orbit(st, late_epoch[j.id]), date);
      const double sep = t.num(k, "a_au") * t.num(k, "parallax") * std::hypot(p.x, p.y);
      const double m = t.num(k, "mass_mjup");
      j.wanted = sep >= iwa && sep <= owa && m >= m_lo && m <= m_hi;
    }
    out.push_back(j);
  }
  return out;
}

// Area under the ROC curve by the Mann-Whitney statistic, ties counted half
// (Hanley & McNeil 1982, Radiology 143, 29).
double roc_auc(const std::vector<double>& pos, const std::vector<double>& neg) {
  double u = 0.0;
  for (double a : pos)
    for (double b : neg) u += a > b ? 1.0 : (a == b ? 0.5 : 0.0);
  return u / (static_cast<double>(pos.size()) * neg.size());
}

}  // namespace

TEST_CASE("rank: imageable injected companions rank above single stars (ROC AUC >= 0.9)", "[rank]") {
  // Positives: injected companions detected (sig_joint >= 3) whose true
  // separation at the date is inside the working angles and whose mass is
  // in the target window; negatives: stars without a companion.
  std::string truth;
  const std::string stars = survey("roc", &truth), ranked = test::tmp_path("roc_ranked.csv");
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + kFast + " -o " + ranked) == 0);
  const test::Table r = test::read_table(ranked);
  std::map<std::string, double> sig;
  for (std::size_t k = 0; k < r.rows.size(); ++k) sig[r.str(k, "id")] = r.str(k, "sig_joint").empty() ? 0.0 : r.num(k, "sig_joint");
  std::vector<double> pos, neg;
  for (const Judged& j : judge(stars, truth, ranked, 2027.5, 100, 1500, 5, 80)) {
    if (!j.companion) neg.push_back(j.score);
    else if (j.wanted && sig[j.id] >= 3.0) pos.push_back(j.score);
  }
  REQUIRE(pos.size() >= 8);
  const double auc = roc_auc(pos, neg);
  INFO(pos.size() << " positives, " << neg.size() << " single stars, AUC " << auc);
  CHECK(auc >= 0.9);
}

TEST_CASE("rank: on a 2000-star survey the wanted companions lead as far as the data allow", "[rank]") {
  // Positives: every star that truly hosts a companion inside the working
  // angles at the date with a mass in the target window, detected or not;
  // negatives: every other star (single, or a companion outside the working
  // angles). The companions follow the prior of an imaging survey of young
  // nearby stars (5-80 MJup, 3-60 AU, 20-60 pc).
  //
  // A companion whose anomaly stays below --detect-sigma cannot be told from
  // a single star by any ranking, so the AUC is bounded by that of an oracle
  // that puts every detected wanted companion first and knows nothing of the
  // undetected ones (they tie with the undetected negatives). On this survey
  // the bound is 0.877 (the 0.95 once targeted is out of reach of any
  // method); a ranking that orders the detected stars at random reaches
  // 0.861. Among the detected stars alone the score must beat chance.
  const std::string stars = test::tmp_path("roc2k_stars.csv"), truth = test::tmp_path("roc2k_truth.csv"),
                    ranked = test::tmp_path("roc2k_ranked.csv");
  REQUIRE(test::run_heft("simulate -q --stars 2000 --seed 2027 --companion-fraction 0.2 --companion-mass "
                         "loguniform:5,80 --a loguniform:3,60 --distance uniform:20,60 --rv-fraction 0.5 -o " +
                         stars + " --truth " + truth) == 0);
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + kFast + " -o " + ranked) == 0);
  const std::vector<Judged> all = judge(stars, truth, ranked, 2027.5, 100, 1500, 5, 80);
  const test::Table r = test::read_table(ranked);
  std::map<std::string, bool> detected;
  for (std::size_t k = 0; k < r.rows.size(); ++k)
    detected[r.str(k, "id")] = !r.str(k, "sig_joint").empty() && r.num(k, "sig_joint") >= 3.0;
  std::vector<double> pos, neg, pos_det, neg_det, oracle_pos, oracle_neg;
  const Judged* first = nullptr;
  for (const Judged& j : all) {
    const bool d = detected[j.id];
    (j.wanted ? pos : neg).push_back(j.score);
    if (d) (j.wanted ? pos_det : neg_det).push_back(j.score);
    (j.wanted ? oracle_pos : oracle_neg).push_back(j.wanted && d ? 2.0 : (d ? 1.0 : 0.0));
    if (j.wanted && (!first || j.rank < first->rank)) first = &j;
  }
  REQUIRE(pos.size() >= 200);
  REQUIRE(neg_det.size() >= 30);
  const double auc = roc_auc(pos, neg), bound = roc_auc(oracle_pos, oracle_neg), auc_det = roc_auc(pos_det, neg_det);
  INFO(pos.size() << " wanted, " << neg.size() << " others; AUC " << auc << ", oracle bound " << bound
                  << "; among the detected: " << pos_det.size() << " against " << neg_det.size() << ", AUC " << auc_det);
  CHECK(auc >= bound - 0.02);
  // Hanley & McNeil's standard error of an AUC near 0.64 with these counts
  // is ~0.04: 0.55 is two of them below the measured 0.637.
  CHECK(auc_det >= 0.55);
  // No star outranks the first wanted companion on a weaker p_real.
  REQUIRE(first);
  for (const Judged& j : all)
    if (j.rank < first->rank) {
      INFO(j.id << " rank " << j.rank << " p_real " << j.p_real << " above " << first->id << " p_real " << first->p_real);
      CHECK(j.p_real >= first->p_real);
    }
}

TEST_CASE("rank: -j 1 equals -j 2, and shards merged equal a single run", "[rank][cli]") {
  const std::string stars = survey("shard"), one = test::tmp_path("shard_j1.csv"), two = test::tmp_path("shard_j2.csv"),
                    j1 = test::tmp_path("shard_j1.json"), merged = test::tmp_path("shard_merged.csv"),
                    mj = test::tmp_path("shard_merged.json");
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + kFast + " -j 1 -o " + one + " --json " + j1) == 0);
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + kFast + " -j 2 -o " + two) == 0);
  CHECK(test::read_text(one) == test::read_text(two));
  std::string parts;
  for (int k = 1; k <= 3; ++k) {
    const std::string p = test::tmp_path("shard_part" + std::to_string(k) + ".csv");
    REQUIRE(test::run_heft("rank " + stars + kRankArgs + kFast + " --shard " + std::to_string(k) + "/3 -o " + p) == 0);
    CHECK(test::read_text(p).find("shard=" + std::to_string(k) + "/3") != std::string::npos);
    parts += " " + p;
  }
  REQUIRE(test::run_heft("merge -q" + parts + " -o " + merged + " --json " + mj) == 0);
  CHECK(test::read_text(merged) == test::read_text(one));
  CHECK(test::read_text(mj) == test::read_text(j1));
  // docs/formats.md, JSON outputs: q-keyed quantiles, numbers as numbers,
  // the 64-bit seed exact, units.
  const auto j = nlohmann::json::parse(test::read_text(j1));
  const test::Table ranked = test::read_table(one);
  REQUIRE(j["stars"].size() == ranked.rows.size());
  CHECK(j["stars"][0]["mass_mjup"]["q50"].get<double>() == ranked.num(0, "mass_med"));
  CHECK(j["stars"][0]["sep_mas"].contains("q16"));
  CHECK(j["run"]["rows"].get<long>() == 200);
  CHECK(j["run"]["date_yr"].get<double>() == 2027.5);
  CHECK(j["run"]["target_mass_mjup"] == nlohmann::json::array({5.0, 80.0}));
  CHECK(j["run"]["units"]["sep_med"] == "mas");
  const std::string big_seed = test::tmp_path("shard_seed.json");
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + kFast +
                         " --max-curves 1 --seed 18446744073709551615 -o " + test::tmp_path("rank_discard.csv") + " --json " + big_seed) == 0);
  CHECK(nlohmann::json::parse(test::read_text(big_seed))["run"]["seed"].get<std::uint64_t>() ==
        18446744073709551615ULL);
  // A missing shard and a duplicated one are errors naming the problem.
  std::string err;
  const std::string p1 = test::tmp_path("shard_part1.csv"), p2 = test::tmp_path("shard_part2.csv");
  CHECK(test::run_heft("merge -q " + p1 + " " + p2 + " -o " + merged, &err) == 2);
  CHECK_THAT(err, Catch::Contains("missing shard(s): 3/3"));
  CHECK(test::run_heft("merge -q " + p1 + " " + p1 + " -o " + merged, &err) == 2);
  CHECK_THAT(err, Catch::Contains("given twice"));
}

TEST_CASE("rank: a killed run leaves no output and --resume completes it", "[rank][cli]") {
  const std::string stars = survey("resume"), full = test::tmp_path("resume_full.csv"),
                    out = test::tmp_path("resume_out.csv"), cp = out + ".checkpoint";
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + kFast + " -j 1 -o " + full) == 0);
  std::remove(out.c_str());
  std::remove(cp.c_str());
  const std::string pid_file = test::tmp_path("resume_pid");
  REQUIRE(std::system((std::string(HEFT_BINARY) + " rank " + stars + kRankArgs + " --draws 512 -j 1 -o " + out +
                       " & echo $! > " + pid_file)
                          .c_str()) == 0);
  long pid = 0;
  std::istringstream(test::read_text(pid_file)) >> pid;
  REQUIRE(pid > 0);
  // Kill once at least three stars are in the checkpoint (header lines: 2).
  const auto t0 = std::chrono::steady_clock::now();
  while (lines_of(cp) < 5 && std::chrono::steady_clock::now() - t0 < std::chrono::seconds(120))
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  REQUIRE(::kill(static_cast<pid_t>(pid), SIGKILL) == 0);
  std::this_thread::sleep_for(std::chrono::milliseconds(200));
  CHECK_FALSE(test::file_exists(out));
  const long kept = lines_of(cp) - 2;
  CHECK(kept >= 3);
  std::string err;
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + " --draws 512 -j 2 --resume -o " + out, &err) == 0);
  CHECK_FALSE(test::file_exists(cp));
  // The resumed table equals an uninterrupted run with the same options.
  const std::string fresh = test::tmp_path("resume_fresh.csv");
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + " --draws 512 -j 2 -o " + fresh) == 0);
  CHECK(test::read_text(out) == test::read_text(fresh));
  // A checkpoint of other options is refused.
  heft::RankRunInfo other;
  other.fields = {{"draws", "1"}, {"rows", "1"}, {"shard", "1/1"}};
  test::write_text(cp, heft::checkpoint_head(other));
  CHECK(test::run_heft("rank " + stars + kRankArgs + kFast + " --resume -o " + out, &err) == 2);
  CHECK_THAT(err, Catch::Contains("checkpoint of a run with other options"));
  std::remove(cp.c_str());
}

TEST_CASE("rank: detection probability, and malformed contrast and mass-magnitude files", "[rank][cli]") {
  const std::string stars = survey("contrast"), contrast = test::tmp_path("contrast.csv"),
                    massmag = test::tmp_path("massmag.csv"), out = test::tmp_path("contrast_ranked.csv");
  // Invented instrument and relation (demo-style values, no source).
  test::write_text(contrast, "sep_mas,delta_mag\n80,6\n200,10\n500,13\n2000,15\n");
  test::write_text(massmag, "mass_mjup,abs_mag\n1,22\n10,15\n80,10\n");
  std::string err;
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + kFast + " --contrast " + contrast + " --mass-mag " + massmag + " -o " + out,
                         &err) == 0);
  const test::Table t = test::read_table(out);
  int with_p = 0;
  double last = 2.0;
  for (std::size_t k = 0; k < t.rows.size(); ++k)
    if (!t.str(k, "p_detect").empty()) {
      ++with_p;
      CHECK(t.num(k, "p_detect") >= 0.0);
      // Detectable draws are a subset of those in the working angles with a
      // target mass: p_detect <= score <= p_real.
      CHECK(t.num(k, "p_detect") <= t.num(k, "score") + 1e-12);
      CHECK(t.num(k, "score") <= t.num(k, "p_real") + 1e-12);
      // With a detection model the ranks follow p_detect.
      CHECK(t.num(k, "p_detect") <= last);
      last = t.num(k, "p_detect");
    }
  CHECK(with_p > 0);
  CHECK(test::read_text(out).find("rank_by=p_detect") != std::string::npos);
  test::write_text(contrast, "sep_mas,delta_mag\n80,6\n70,10\n");
  CHECK(test::run_heft("rank " + stars + kRankArgs + kFast + " --contrast " + contrast + " --mass-mag " + massmag, &err) == 2);
  CHECK_THAT(err, Catch::Contains("contrast.csv:3:1") && Catch::Contains("increase"));
  test::write_text(contrast, "sep_mas,delta_mag\n80,6\n200,10\n");
  test::write_text(massmag, "mass_mjup,abs_mag\n1,22\n10,bright\n");
  CHECK(test::run_heft("rank " + stars + kRankArgs + kFast + " --contrast " + contrast + " --mass-mag " + massmag, &err) == 2);
  CHECK_THAT(err, Catch::Contains("massmag.csv:3:4") && Catch::Contains("abs_mag"));
  test::write_text(massmag, "mass,abs_mag\n1,22\n");
  CHECK(test::run_heft("rank " + stars + kRankArgs + kFast + " --contrast " + contrast + " --mass-mag " + massmag, &err) == 2);
  CHECK_THAT(err, Catch::Contains("missing required column 'mass_mjup'"));
}

TEST_CASE("rank: progress bar only on a terminal, never under -q or in a pipe", "[rank][cli]") {
  // `script` (util-linux) runs the command on a pseudo-terminal.
  const std::string stars = test::tmp_path("bar_stars.csv"), out = test::tmp_path("bar_out.csv"),
                    log = test::tmp_path("bar_log.txt");
  REQUIRE(test::run_heft("simulate -q --stars 60 --seed 4 --companion-fraction 0.5 --companion-mass loguniform:20,80 "
                         "--a loguniform:3,30 --distance uniform:20,40 -o " + stars) == 0);
  const std::string rank = std::string(HEFT_BINARY) + " rank " + stars + " --date 2027.5 --draws 64 --n-a 8 -o " + out;
  REQUIRE(std::system(("script -qec '" + rank + "' " + log + " > /dev/null").c_str()) == 0);
  CHECK_THAT(test::read_text(log), Catch::Contains("ETA") && Catch::Contains("/s"));
  REQUIRE(std::system(("script -qec '" + rank + " -q' " + log + " > /dev/null").c_str()) == 0);
  CHECK_THAT(test::read_text(log), !Catch::Contains("ETA"));
  std::string err;
  REQUIRE(test::run_heft("rank " + stars + " --date 2027.5 --draws 64 --n-a 8 -o " + out, &err) == 0);
  CHECK_THAT(err, !Catch::Contains("ETA"));
  CHECK_THAT(err, Catch::Contains("with curves"));
}

TEST_CASE("rank: p_real follows the Bayes factor and the assumed occurrence", "[rank][cli]") {
  // p_real = F B / (F B + 1 - F) (docs/method.md, Sect. 10; Bayes' rule).
  const std::string stars = survey("occurrence"), lo = test::tmp_path("occ_lo.csv"), hi = test::tmp_path("occ_hi.csv");
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + kFast + " --occurrence 0.01 -o " + lo) == 0);
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + kFast + " --occurrence 0.5 -o " + hi) == 0);
  const test::Table a = test::read_table(lo), b = test::read_table(hi);
  std::map<std::string, std::size_t> row_b;
  for (std::size_t k = 0; k < b.rows.size(); ++k) row_b[b.str(k, "id")] = k;
  int checked = 0;
  for (std::size_t k = 0; k < a.rows.size(); ++k) {
    if (a.str(k, "log10_bayes").empty()) continue;
    const std::size_t j = row_b.at(a.str(k, "id"));
    const double lb = a.num(k, "log10_bayes");
    CHECK(b.num(j, "log10_bayes") == lb);  // B does not depend on F
    for (auto [f, p] : {std::pair{0.01, a.num(k, "p_real")}, std::pair{0.5, b.num(j, "p_real")}}) {
      const double fb = f * std::pow(10.0, std::min(lb, 300.0));
      CHECK(p == Approx(fb / (fb + 1.0 - f)).epsilon(1e-12).margin(1e-300));
    }
    CHECK(a.num(k, "p_stellar") >= 0.0);
    CHECK(a.num(k, "p_stellar") <= 1.0);
    ++checked;
  }
  CHECK(checked >= 10);
  CHECK(test::read_text(lo).find("occurrence=0.01") != std::string::npos);
  std::string err;
  CHECK(test::run_heft("rank " + stars + kRankArgs + kFast + " --occurrence 1", &err) == 1);  // usage error
  CHECK_THAT(err, Catch::Contains("--occurrence"));
  CHECK(test::run_heft("rank " + stars + kRankArgs + kFast + " --occurrence 0", &err) == 1);
}

TEST_CASE("rank and curve + predict agree for the same star and options", "[rank][cli]") {
  // One code path (common practice, no source): rank's best separation is
  // the curve's highest-weight point, and its score over p_real (with a
  // target mass window wider than the prior) is predict's p_in_wa from the
  // curve's draws, to round-off.
  const std::string stars = survey("same"), ranked = test::tmp_path("same_ranked.csv");
  const std::string opts = " --draws 128 --n-a 12 --a-min 0.5 --a-max 500 -q";
  REQUIRE(test::run_heft("rank " + stars + " --date 2027.5 --iwa 100 --owa 1500 --target-mass 0.001,1e6" + opts +
                         " -o " + ranked) == 0);
  const test::Table r = test::read_table(ranked);
  int compared = 0;
  for (std::size_t k = 0; k < r.rows.size() && compared < 3; ++k) {
    if (r.str(k, "p_real").empty() || r.num(k, "p_real") < 0.5) continue;
    const std::string id = r.str(k, "id"), curve = test::tmp_path("same_curve.csv"),
                      draws = test::tmp_path("same_draws.csv"), where = test::tmp_path("same_where.csv");
    REQUIRE(test::run_heft("curve " + stars + " --id " + id + opts + " -o " + curve + " --keep-draws " + draws) == 0);
    REQUIRE(test::run_heft("predict -q " + draws + " --date 2027.5 --iwa 100 --owa 1500 -o " + where) == 0);
    const test::Table c = test::read_table(curve), w = test::read_table(where);
    std::size_t best = 0;
    for (std::size_t j = 1; j < c.rows.size(); ++j)
      if (c.num(j, "weight") > c.num(best, "weight")) best = j;
    INFO(id);
    CHECK(r.num(k, "a_best_au") == c.num(best, "a_au"));
    CHECK(r.num(k, "score") / r.num(k, "p_real") == Approx(w.num(0, "p_in_wa")).epsilon(1e-12));
    ++compared;
  }
  CHECK(compared == 3);
}

TEST_CASE("rank and predict --dates: the best date on a grid, from the same draws", "[rank][cli]") {
  // Consistency (common practice, no source): at the grid's first date the
  // ranking quantity equals the score of a run planned at that date, the
  // best is the maximum over the grid, and predict gives one row per date.
  const std::string stars = survey("dates"), ranked = test::tmp_path("dates_ranked.csv");
  REQUIRE(test::run_heft("rank " + stars + kRankArgs + kFast + " --dates 2027.5:2030.5:0.5 -o " + ranked) == 0);
  const test::Table r = test::read_table(ranked);
  int with = 0;
  for (std::size_t k = 0; k < r.rows.size(); ++k) {
    if (r.str(k, "best_date_yr").empty()) continue;
    ++with;
    const double best = r.num(k, "best_date_yr");
    CHECK(best >= 2027.5);
    CHECK(best <= 2030.5);
    CHECK(std::fmod(best - 2027.5, 0.5) == Approx(0.0).margin(1e-9));
    CHECK(r.num(k, "best_date_score") >= r.num(k, "first_date_score"));
    CHECK(r.num(k, "first_date_score") == Approx(r.num(k, "score")).epsilon(1e-12));  // --date 2027.5 is the first
  }
  CHECK(with >= 10);
  CHECK(test::read_text(ranked).find("dates_yr=2027.5,2030.5,7") != std::string::npos);
  // predict: the working-angle probability against date.
  const std::string draws = test::tmp_path("dates_draws.csv"), where = test::tmp_path("dates_where.csv");
  const std::string id = r.str(0, "id");
  REQUIRE(test::run_heft("curve -q " + stars + " --id " + id + " --draws 128 --n-a 12 -o " +
                         test::tmp_path("dates_curve.csv") + " --keep-draws " + draws) == 0);
  REQUIRE(test::run_heft("predict -q " + draws + " --dates 2027.5:2030.5:0.5 --iwa 100 --owa 1500 -o " + where) == 0);
  const test::Table w = test::read_table(where);
  REQUIRE(w.rows.size() == 7);
  CHECK(w.num(6, "date_yr") == 2030.5);
  std::string err;
  CHECK(test::run_heft("predict -q " + draws + " --dates 61000:62000:10", &err) == 1);  // an MJD by mistake
  CHECK_THAT(err, Catch::Contains("1900-2200"));
  CHECK(test::run_heft("rank " + stars + kRankArgs + " --dates 2027:2028", &err) == 1);
  CHECK_THAT(err, Catch::Contains("START:END:STEP"));
}
