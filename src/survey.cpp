#include "heft/survey.hpp"

#include <algorithm>
#include <cerrno>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <charconv>
#include <map>

#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/version.hpp"

namespace heft {
namespace {

double seconds_since(std::chrono::steady_clock::time_point t0) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
}

RankRunInfo metadata(const SurveyOptions& o, const std::string& input_name, long rows) {
  const RankOptions& r = o.rank;
  const CurveOptions& c = r.curve;
  RankRunInfo info;
  auto& f = info.fields;
  f["heft_version"] = kVersion;
  f["input"] = metadata_word(input_name);
  f["rows"] = std::to_string(rows);
  f["date_yr"] = format_double(r.date_yr);
  f["iwa_mas"] = format_double(r.iwa_mas);
  f["owa_mas"] = std::isfinite(r.owa_mas) ? format_double(r.owa_mas) : "none";
  f["target_mass_mjup"] = format_double(r.target_min_mjup) + "," + format_double(r.target_max_mjup);
  f["detect_sigma"] = format_double(c.prior.detect_sigma);
  f["draws"] = std::to_string(c.draws);
  f["a_grid_au"] = format_double(o.a_min_au) + "," + format_double(o.a_max_au) + "," + std::to_string(o.n_a);
  f["mass_prior_mjup"] = format_double(c.prior.m_min_mjup) + "," + format_double(c.prior.m_max_mjup);
  f["ecc_prior"] = metadata_word(c.prior.ecc.str());
  f["seed"] = std::to_string(c.seed);
  f["max_curves"] = std::to_string(o.max_curves);
  f["host_mass_default_msun"] = (present(r.host_mass_msun) ? format_double(r.host_mass_msun) : "none") + "," +
                                (present(r.host_mass_error_msun) ? format_double(r.host_mass_error_msun) : "none");
  f["occurrence"] = format_double(r.occurrence);
  // The date grid as first,last,count.
  f["dates_yr"] = r.dates_yr.empty() ? "none"
                                     : format_double(r.dates_yr.front()) + "," + format_double(r.dates_yr.back()) +
                                           "," + std::to_string(r.dates_yr.size());
  f["rank_by"] = rank_by_name(rank_by(r));
  f["contrast"] = metadata_word(o.contrast_name);
  f["mass_mag"] = metadata_word(o.mass_mag_name);
  f["screen_options"] = o.screen_fingerprint;
  f["shard"] = std::to_string(o.shard_k) + "/" + std::to_string(o.shard_n);
  return info;
}

// Appends finished stars to the checkpoint from any thread; the first
// failure stops further writes and is reported once the loop is over.
class CheckpointWriter {
 public:
  CheckpointWriter(const std::string& path, const std::string& head) : path_(path) {
    if (path_.empty()) return;
    write_file_atomic(path_, head);  // rewritten whole: torn and damaged lines are gone
    file_ = std::fopen(path_.c_str(), "ab");
    if (!file_) throw InputError(path_, 0, 0, std::string("cannot append to checkpoint: ") + std::strerror(errno));
  }
  ~CheckpointWriter() {
    if (file_) std::fclose(file_);
  }
  bool failed() const {
    bool f;
#pragma omp atomic read
    f = failed_;
    return f;
  }
  void append(const RankRecord& r) {  // called inside a critical section
    if (!file_ || failed_) return;
    const std::string line = checkpoint_line(r);
    if (std::fwrite(line.data(), 1, line.size(), file_) != line.size() || std::fflush(file_) != 0) {
      errno_ = errno;
#pragma omp atomic write
      failed_ = true;
    }
  }
  void close() {
    if (file_ && std::fclose(file_) != 0 && !failed_) {
      errno_ = errno;
      failed_ = true;
    }
    file_ = nullptr;
    if (failed_) throw InputError(path_, 0, 0, std::string("writing the checkpoint failed: ") + std::strerror(errno_));
  }

 private:
  std::string path_;
  std::FILE* file_ = nullptr;
  bool failed_ = false;
  int errno_ = 0;
};

}  // namespace

bool parse_shard(std::string_view text, long& k, long& n) {
  const auto slash = text.find('/');
  double kd = 0, nd = 0;
  if (slash == std::string_view::npos || !parse_double(text.substr(0, slash), kd) ||
      !parse_double(text.substr(slash + 1), nd))
    return false;
  // Range-checked as doubles before any conversion to an integer.
  if (!(kd == std::floor(kd) && nd == std::floor(nd) && nd >= 1 && nd <= 1e6 && kd >= 1 && kd <= nd)) return false;
  k = static_cast<long>(kd);
  n = static_cast<long>(nd);
  return true;
}

std::string metadata_word(const std::string& s) {
  std::string o;
  for (char c : s) o += c == ' ' ? "%20" : (c == '%' ? "%25" : std::string(1, c));
  return o.empty() ? "-" : o;
}

SurveyRun run_survey(std::istream& in, const std::string& input_name, const SurveyOptions& opt,
                     const std::function<void(long, long)>& progress) {
  RankOptions ropt = opt.rank;
  ropt.curve.a_au = log_grid(opt.a_min_au, opt.a_max_au, opt.n_a);
  SurveyRun run;
  const auto t_start = std::chrono::steady_clock::now();

  // Pass 1: read every row, keep this shard's, screen them (in parallel,
  // kept in file order).
  StarTableReader reader(in, input_name, opt.windows);
  std::vector<StarRecord> candidates;
  std::vector<ScreenRow> cand_rows;
  {
    std::vector<ScreenRow> screened(kStarRowsChunk);
    const auto mine = [&](const ParsedStarRow& r) { return r.index % opt.shard_n == opt.shard_k - 1; };
    read_star_rows(
        reader, kStarRowsChunk,
        [&](std::size_t i, const ParsedStarRow& r) {
          if (mine(r)) screened[i] = screen_star(r.star, r.bad_reason, opt.screen);
        },
        [&](std::size_t i, const ParsedStarRow& r) {
          if (!mine(r)) return;
          ScreenRow& sr = screened[i];
          if (sr.ok() && sr.result.sig_joint >= ropt.curve.prior.detect_sigma) {
            candidates.push_back(r.star);
            cand_rows.push_back(std::move(sr));
          } else {
            RankRecord rec = screened_record(sr);
            if (sr.ok()) add_note(rec.notes, "below_detect_sigma");
            run.records.push_back(std::move(rec));
          }
        });
  }
  run.rows = reader.rows();
  run.screen_s = seconds_since(t_start);

  // The most significant first, so that max_curves keeps the best.
  std::vector<std::size_t> order(candidates.size());
  for (std::size_t k = 0; k < order.size(); ++k) order[k] = k;
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
    const double sa = cand_rows[a].result.sig_joint, sb = cand_rows[b].result.sig_joint;
    return sa != sb ? sa > sb : candidates[a].id < candidates[b].id;
  });
  std::vector<std::size_t> todo;
  for (std::size_t k = 0; k < order.size(); ++k) {
    if (opt.max_curves > 0 && static_cast<long>(k) >= opt.max_curves) {
      RankRecord r = screened_record(cand_rows[order[k]]);
      r.score = kAbsent;
      add_note(r.notes, "curve_skipped:max_curves");
      run.records.push_back(std::move(r));
    } else {
      todo.push_back(order[k]);
    }
  }
  run.curves = static_cast<long>(todo.size());
  run.info = metadata(opt, input_name, run.rows);

  // Resume: finished stars from the checkpoint of a run with the same metadata.
  std::map<std::string, RankRecord> done;
  if (opt.resume && !opt.checkpoint.empty()) {
    std::ifstream cp(opt.checkpoint, std::ios::binary);
    if (cp) {
      run.checkpoint_found = true;
      Checkpoint old = read_checkpoint(cp, opt.checkpoint);
      if (old.info.fields != run.info.fields)
        throw InputError(opt.checkpoint, 1, 0, "checkpoint of a run with other options or input; delete it or drop --resume");
      for (auto& r : old.records) done.emplace(r.id, std::move(r));
      run.checkpoint_dropped = old.dropped;
    }
  }
  std::string head = checkpoint_head(run.info);
  for (const auto& [id, r] : done) head += checkpoint_line(r);
  CheckpointWriter writer(opt.checkpoint, head);

  // Pass 2: curves, sky positions and scores, in parallel.
  std::vector<RankRecord> computed(todo.size());
  std::vector<char> have(todo.size(), 0);
  for (std::size_t k = 0; k < todo.size(); ++k)
    if (const auto it = done.find(candidates[todo[k]].id); it != done.end()) {
      computed[k] = it->second;
      have[k] = 1;
    }
  long finished = static_cast<long>(done.size());
  const long total = static_cast<long>(todo.size());
#pragma omp parallel for schedule(dynamic, 1)
  for (std::size_t k = 0; k < todo.size(); ++k) {
    if (have[k] || writer.failed()) continue;  // after a checkpoint failure the run fails: compute nothing more
    computed[k] = rank_star(candidates[todo[k]], cand_rows[todo[k]], ropt);
    long now = 0;
#pragma omp critical(heft_checkpoint)
    {
      writer.append(computed[k]);
      now = ++finished;
    }
    if (progress) progress(now, total);
  }
  writer.close();
  for (std::size_t k = 0; k < todo.size(); ++k)
    if (!have[k]) {
      run.curve_s += computed[k].curve_s;
      run.predict_s += computed[k].predict_s;
    }
  run.stage2_s = seconds_since(t_start) - run.screen_s;
  for (auto& r : computed) run.records.push_back(std::move(r));
  assign_ranks(run.records, rank_by(opt.rank));
  return run;
}

}  // namespace heft

namespace heft {

std::string metadata_text(const std::string& word) {
  if (word == "-") return "";
  std::string o;
  for (std::size_t k = 0; k < word.size(); ++k) {
    if (word.compare(k, 3, "%20") == 0) o += ' ', k += 2;
    else if (word.compare(k, 3, "%25") == 0) o += '%', k += 2;
    else o += word[k];
  }
  return o;
}

SurveyOptions survey_options_from(const RankRunInfo& info, const std::string& source, SurveyOptions o) {
  auto field = [&](const std::string& key) -> const std::string& {
    const auto it = info.fields.find(key);
    if (it == info.fields.end()) throw InputError(source, 1, 0, "run metadata has no field '" + key + "'");
    return it->second;
  };
  auto bad = [&](const std::string& key, const std::string& rule) {
    return InputError(source, 1, 0, "run metadata field '" + key + "=" + field(key) + "': " + rule);
  };
  // A comma list of n numbers; "none" reads as absent.
  auto numbers = [&](const std::string& key, std::size_t n) {
    std::vector<double> v;
    const std::string& text = field(key);
    std::size_t start = 0;
    for (;;) {
      const std::size_t comma = text.find(',', start);
      const std::string item = text.substr(start, comma == std::string::npos ? std::string::npos : comma - start);
      double x = kAbsent;
      if (item != "none" && !parse_double(item, x)) throw bad(key, "expected numbers");
      v.push_back(x);
      if (comma == std::string::npos) break;
      start = comma + 1;
    }
    if (v.size() != n) throw bad(key, "expected " + std::to_string(n) + " value(s)");
    return v;
  };
  auto number = [&](const std::string& key) { return numbers(key, 1)[0]; };
  auto whole = [&](const std::string& key, double lo, double hi) {
    const double x = number(key);
    if (!(x >= lo && x <= hi && x == std::floor(x)))
      throw bad(key, "expected a whole number from " + format_double(lo) + " to " + format_double(hi));
    return x;
  };
  if (field("screen_options") != o.screen_fingerprint)
    throw InputError(source, 1, 0,
                     "ranked with other screening options (fingerprint " + field("screen_options") + ", these give " +
                         o.screen_fingerprint + "): give the same screening options as to heft rank");
  RankOptions& r = o.rank;
  CurveOptions& c = r.curve;
  r.date_yr = number("date_yr");
  if (!(r.date_yr >= 1900 && r.date_yr <= 2200)) throw bad("date_yr", "expected a date from 1900 to 2200");
  r.iwa_mas = number("iwa_mas");
  if (!(r.iwa_mas >= 0)) throw bad("iwa_mas", "expected a number >= 0");
  r.owa_mas = present(number("owa_mas")) ? number("owa_mas") : std::numeric_limits<double>::infinity();
  const auto target = numbers("target_mass_mjup", 2);
  r.target_min_mjup = target[0];
  r.target_max_mjup = target[1];
  if (!(r.target_min_mjup < r.target_max_mjup)) throw bad("target_mass_mjup", "expected MIN,MAX with MIN < MAX");
  r.occurrence = number("occurrence");
  if (!(r.occurrence > 0 && r.occurrence < 1)) throw bad("occurrence", "expected a fraction between 0 and 1");
  const auto host = numbers("host_mass_default_msun", 2);
  r.host_mass_msun = host[0];
  r.host_mass_error_msun = host[1];
  if ((present(r.host_mass_msun) && !(r.host_mass_msun > 0)) ||
      (present(r.host_mass_error_msun) && !(r.host_mass_error_msun >= 0)))
    throw bad("host_mass_default_msun", "expected a mass > 0 and an error >= 0 (or none)");
  c.prior.detect_sigma = number("detect_sigma");
  const auto mass = numbers("mass_prior_mjup", 2);
  c.prior.m_min_mjup = mass[0];
  c.prior.m_max_mjup = mass[1];
  try {
    c.prior.ecc = Distribution::parse(metadata_text(field("ecc_prior")), "ecc_prior");
    c.prior.validate();
  } catch (const Error& e) {
    throw bad("ecc_prior", e.what());
  }
  c.draws = static_cast<int>(whole("draws", 16, 1e7));
  // The seed takes all 64 bits: read as an integer, not through a double.
  const std::string& seed = field("seed");
  const auto [end, ec] = std::from_chars(seed.data(), seed.data() + seed.size(), c.seed);
  if (ec != std::errc() || end != seed.data() + seed.size()) throw bad("seed", "expected a whole number");
  const auto grid = numbers("a_grid_au", 3);
  o.a_min_au = grid[0];
  o.a_max_au = grid[1];
  if (!(o.a_min_au > 0 && o.a_min_au < o.a_max_au && grid[2] >= 2 && grid[2] <= 100000 && grid[2] == std::floor(grid[2])))
    throw bad("a_grid_au", "expected MIN,MAX,N with 0 < MIN < MAX and N from 2 to 100000");
  o.n_a = static_cast<int>(grid[2]);
  o.max_curves = static_cast<long>(whole("max_curves", 0, 1e15));
  if (!parse_shard(field("shard"), o.shard_k, o.shard_n)) throw bad("shard", "expected K/N");
  return o;
}

std::vector<StarDetail> rank_details(std::istream& in, const std::string& input_name, const SurveyOptions& opt,
                                     const std::vector<std::string>& ids) {
  RankOptions ropt = opt.rank;
  ropt.curve.a_au = log_grid(opt.a_min_au, opt.a_max_au, opt.n_a);
  std::map<std::string, std::size_t, std::less<>> index;
  for (std::size_t k = 0; k < ids.size(); ++k) index.emplace(ids[k], k);
  std::vector<StarRecord> stars(ids.size());
  std::vector<ScreenRow> rows(ids.size());
  std::vector<char> found(ids.size(), 0);
  StarTableReader reader(in, input_name, opt.windows);
  reader.keep_ids([&](std::string_view id) { return index.find(id) != index.end(); });
  StarRecord star;
  std::string bad;
  while (reader.next(star, bad)) {
    const std::size_t k = index.find(star.id)->second;
    rows[k] = screen_star(star, bad, opt.screen);
    stars[k] = star;
    found[k] = 1;
  }
  for (std::size_t k = 0; k < ids.size(); ++k)
    if (!found[k]) throw InputError(input_name, 0, 0, "no row for star '" + ids[k] + "' of the ranked table");
  std::vector<StarDetail> out(ids.size());
#pragma omp parallel for schedule(dynamic, 1)
  for (std::size_t k = 0; k < ids.size(); ++k) out[k].record = rank_star(stars[k], rows[k], ropt, &out[k].detail);
  return out;
}

}  // namespace heft
