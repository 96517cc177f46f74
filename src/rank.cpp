#include "heft/rank.hpp"

#include <algorithm>
#include <charconv>
#include <chrono>
#include <cmath>
#include <nlohmann/json.hpp>
#include <cstdio>
#include <set>
#include <sstream>

#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/predict.hpp"
#include "heft/rng.hpp"

namespace heft {
namespace {

constexpr double kNegInf = -std::numeric_limits<double>::infinity();

// Reads two numeric columns, the first strictly increasing.
void read_pairs(std::istream& in, const std::string& name, const std::string& xc, const std::string& yc,
                std::vector<double>& xs, std::vector<double>& ys, bool x_positive, bool y_nonnegative) {
  ColumnTable t(in, name, {xc, yc});
  const int ix = t.index(xc), iy = t.index(yc);
  while (t.next()) {
    const double x = t.number(ix), y = t.number(iy);
    if (x_positive && !(x > 0)) t.fail(ix, "must be > 0");
    if (!xs.empty() && !(x > xs.back())) t.fail(ix, "must increase strictly from row to row");
    if (y_nonnegative && !(y >= 0)) t.fail(iy, "must be >= 0");
    xs.push_back(x);
    ys.push_back(y);
  }
  if (xs.size() < 2) throw InputError(name, t.line(), 0, "needs at least two rows");
}

double interpolate(const std::vector<double>& xs, const std::vector<double>& ys, double x) {
  const auto it = std::upper_bound(xs.begin(), xs.end(), x);
  const std::size_t k = std::clamp<std::size_t>(it - xs.begin(), 1, xs.size() - 1);
  const double f = (x - xs[k - 1]) / (xs[k] - xs[k - 1]);
  return ys[k - 1] + f * (ys[k] - ys[k - 1]);
}


}  // namespace

ContrastCurve ContrastCurve::read(std::istream& in, const std::string& name) {
  ContrastCurve c;
  read_pairs(in, name, "sep_mas", "delta_mag", c.sep_, c.dmag_, true, true);
  return c;
}

double ContrastCurve::limit_mag(double sep_mas) const {
  if (!(sep_mas >= sep_.front() && sep_mas <= sep_.back())) return kNegInf;
  return interpolate(sep_, dmag_, sep_mas);
}

MassMagnitude MassMagnitude::read(std::istream& in, const std::string& name) {
  MassMagnitude m;
  std::vector<double> mass;
  read_pairs(in, name, "mass_mjup", "abs_mag", mass, m.mag_, true, false);
  for (double x : mass) m.log_mass_.push_back(std::log(x));
  return m;
}

double MassMagnitude::abs_mag(double mass_mjup) const {
  const double lm = std::log(mass_mjup);
  if (!(lm >= log_mass_.front())) return std::numeric_limits<double>::infinity();
  if (lm >= log_mass_.back()) return mag_.back();
  return interpolate(log_mass_, mag_, lm);
}

RankRecord screened_record(const ScreenRow& row) {
  RankRecord r;
  r.id = row.id;
  r.status = row.status;
  r.notes = row.notes;
  if (row.ok()) {
    r.sig_joint = row.result.sig_joint;
    r.score = 0.0;
  }
  return r;
}

RankRecord rank_star(const StarRecord& star, const ScreenRow& row, const RankOptions& opt, RankDetail* detail) {
  RankRecord r = screened_record(row);
  if (!row.ok() || !(row.result.sig_joint >= opt.curve.prior.detect_sigma)) return r;
  bool have_mass = false;
  const AnomalyData d = anomaly_data(star, row.result, opt.host_mass_msun, opt.host_mass_error_msun, have_mass);
  if (!have_mass) {
    r.status = RowStatus::bad_input("no_host_mass");
    r.score = kAbsent;
    return r;
  }
  CurveOptions co = opt.curve;
  co.keep_draws = true;
  co.quantile_errors = false;  // the ranked table has no use for them
  Curve c;
  const auto t0 = std::chrono::steady_clock::now();
  try {
    c = montecarlo_curve(d, co, star.id);
  } catch (const Error& e) {
    r.status = RowStatus::failed("curve");
    r.score = kAbsent;
    return r;
  }
  if (c.draws.empty() || c.points.empty()) {
    r.status = RowStatus::failed("no_posterior_draws");
    r.score = kAbsent;
    return r;
  }
  const auto t1 = std::chrono::steady_clock::now();
  r.curve_s = std::chrono::duration<double>(t1 - t0).count();
  const CurvePoint* best = &c.points.front();
  for (const auto& p : c.points)
    if (p.weight > best->weight) best = &p;
  r.a_best_au = best->a_au;
  r.mass_lo68 = best->mass_lo68;
  r.mass_med = best->mass_med;
  r.mass_hi68 = best->mass_hi68;
  // The draws carry the curve's per-separation weights: sums over them are
  // the marginalisation over separation. Given the companion, at one date:
  // P(in the working angles with a target mass), P(also detectable).
  const bool detect = opt.contrast && opt.mass_mag && present(star.mag);
  // What does not change with the date, once per draw: the draws with a
  // target mass (the others never count), and the contrast each one needs
  // (its absolute magnitude, the distance modulus from its own parallax,
  // against the host's magnitude in the same band).
  double sw = 0.0, stellar = 0.0;
  std::vector<std::size_t> target;
  std::vector<double> needed_dmag;
  for (std::size_t k = 0; k < c.draws.size(); ++k) {
    const OrbitDraw& dr = c.draws[k];
    sw += dr.weight;
    if (dr.mass_mjup > kStellarMassMjup) stellar += dr.weight;
    if (!(dr.weight > 0 && dr.mass_mjup >= opt.target_min_mjup && dr.mass_mjup <= opt.target_max_mjup)) continue;
    target.push_back(k);
    needed_dmag.push_back(detect ? opt.mass_mag->abs_mag(dr.mass_mjup) + 5.0 * std::log10(100.0 / dr.parallax_mas) -
                                       star.mag
                                 : 0.0);
  }
  std::vector<OrbitDraw> target_draws;
  for (std::size_t k : target) target_draws.push_back(c.draws[k]);
  // Given the companion, at one date (separations of the target draws):
  // P(in the working angles with a target mass), P(also detectable).
  auto chances_at = [&](const std::vector<double>& sep_mas, double& in_window, double& detected) {
    in_window = detected = 0.0;
    for (std::size_t j = 0; j < sep_mas.size(); ++j) {
      if (!(sep_mas[j] >= opt.iwa_mas && sep_mas[j] <= opt.owa_mas)) continue;
      const double w = target_draws[j].weight;
      in_window += w;
      if (detect && needed_dmag[j] <= opt.contrast->limit_mag(sep_mas[j])) detected += w;
    }
    in_window = sw > 0 ? in_window / sw : 0.0;
    detected = sw > 0 ? detected / sw : 0.0;
  };
  // Scores are probabilities that the companion exists and is where (and
  // what) the plan needs.
  r.log10_bayes = c.log10_bayes;
  r.p_real = probability_real(c.log10_bayes, opt.occurrence);
  r.p_stellar = sw > 0 ? stellar / sw : 0.0;
  if (r.p_stellar > 0.5) add_note(r.notes, "stellar_mass_likely");
  const std::vector<SkyOffset> off = sky_offsets(c.draws, opt.date_yr);
  std::vector<double> target_sep;
  for (std::size_t k : target) target_sep.push_back(off[k].sep_mas);
  double in_window, detected;
  chances_at(target_sep, in_window, detected);
  r.score = r.p_real * in_window;
  if (detect) r.p_detect = r.p_real * detected;
  // The date grid: the ranking quantity (p_detect with a detection model,
  // else score) at each date.
  if (!opt.dates_yr.empty()) {
    const BestDate b = best_date(target_draws, opt.dates_yr, [&](const std::vector<double>& sep_mas) {
      chances_at(sep_mas, in_window, detected);
      return r.p_real * (detect ? detected : in_window);
    });
    r.best_date_yr = b.date_yr;
    r.best_date_score = b.value;
    r.first_date_score = b.first_value;
  }
  if (opt.contrast && opt.mass_mag && !present(star.mag)) add_note(r.notes, "no_mag");
  if (c.upper_limit) add_note(r.notes, "upper_limit");
  PredictOptions po;
  po.iwa_mas = opt.iwa_mas;
  po.owa_mas = opt.owa_mas;
  po.grid_n = 4;
  const SkyPrediction p = summarize_sky(off, opt.date_yr, po);
  r.sep_lo68 = p.sep_q[1];
  r.sep_med = p.sep_q[2];
  r.sep_hi68 = p.sep_q[3];
  if (!p.pa_modes_deg.empty()) r.pa_mode_deg = p.pa_modes_deg.front();
  if (!p.pa_constrained) add_note(r.notes, "pa_unconstrained");
  r.pa_arc68_start_deg = p.pa_arc68_start_deg;
  r.pa_arc68_width_deg = p.pa_arc68_width_deg;
  if (detail) {
    po.grid_n = 0;  // sized from the draws
    const SkyPrediction map = summarize_sky(off, opt.date_yr, po);
    detail->curve = c.points;
    detail->sky = SkyGrid{star.id, opt.date_yr, map.grid_half_mas, map.grid_n, map.density};
  }
  r.predict_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t1).count();
  return r;
}

const char* rank_by_name(RankBy by) { return by == RankBy::kDetect ? "p_detect" : "score"; }

bool parse_rank_by(const std::string& word, RankBy& by) {
  if (word != "p_detect" && word != "score") return false;
  by = word == "p_detect" ? RankBy::kDetect : RankBy::kScore;
  return true;
}

void assign_ranks(std::vector<RankRecord>& records, RankBy by) {
  auto or_below = [](double v) { return present(v) ? v : -1.0; };
  auto key = [&](const RankRecord& r) {
    // Ranking by p_detect: stars without one (no magnitude) follow, by score.
    if (by == RankBy::kDetect) return present(r.p_detect) ? 2.0 + r.p_detect : or_below(r.score);
    return or_below(r.score);
  };
  std::sort(records.begin(), records.end(), [&](const RankRecord& a, const RankRecord& b) {
    if (key(a) != key(b)) return key(a) > key(b);
    if (or_below(a.sig_joint) != or_below(b.sig_joint)) return or_below(a.sig_joint) > or_below(b.sig_joint);
    return a.id < b.id;
  });
  for (std::size_t k = 0; k < records.size(); ++k) records[k].rank = static_cast<long>(k + 1);
}

const std::vector<ColumnUnit>& rank_column_units() {
  static const std::vector<ColumnUnit> c = {
      {"id", ""},           {"rank", ""},           {"score", ""},           {"p_detect", ""},
      {"p_real", ""},       {"log10_bayes", ""},    {"p_stellar", ""},
      {"best_date_yr", "yr"}, {"best_date_score", ""}, {"first_date_score", ""},
      {"sig_joint", ""}, {"a_best_au", "AU"},  {"mass_lo68", "Mjup"},   {"mass_med", "Mjup"},
      {"mass_hi68", "Mjup"}, {"sep_lo68", "mas"},   {"sep_med", "mas"},      {"sep_hi68", "mas"},
      {"pa_mode_deg", "deg"}, {"pa_arc68_start_deg", "deg"}, {"pa_arc68_width_deg", "deg"},
      {"status", ""},       {"notes", ""}};
  return c;
}

const std::vector<std::string>& rank_columns() {
  static const std::vector<std::string> c = column_names(rank_column_units());
  return c;
}

std::string rank_header() { return header_line(rank_column_units()); }

void append_rank_row(std::string& out, const RankRecord& r) {
  append_csv_field(out, r.id);
  out += ',' + std::to_string(r.rank);
  for (double v : {r.score, r.p_detect, r.p_real, r.log10_bayes, r.p_stellar, r.best_date_yr, r.best_date_score,
                   r.first_date_score, r.sig_joint, r.a_best_au, r.mass_lo68, r.mass_med, r.mass_hi68, r.sep_lo68,
                   r.sep_med, r.sep_hi68, r.pa_mode_deg, r.pa_arc68_start_deg, r.pa_arc68_width_deg}) {
    out += ',';
    append_double(out, v);
  }
  out += ',';
  append_csv_field(out, r.status.text());
  out += ',';
  append_csv_field(out, join_notes(r.notes));
  out += '\n';
}

RankRecord parse_rank_row(const ColumnTable& t) {
  RankRecord r;
  const auto& cols = rank_columns();
  r.id = std::string(t.text(t.index(cols[0])));
  const int ir = t.index("rank");
  const double rank = t.number(ir);
  if (!(rank >= 0 && rank <= 1e15 && rank == std::floor(rank))) t.fail(ir, "must be a whole number from 0 to 1e15");
  r.rank = static_cast<long>(rank);
  double* slots[] = {&r.score,    &r.p_detect, &r.p_real, &r.log10_bayes, &r.p_stellar, &r.best_date_yr,
                     &r.best_date_score, &r.first_date_score, &r.sig_joint, &r.a_best_au, &r.mass_lo68,
                     &r.mass_med, &r.mass_hi68, &r.sep_lo68, &r.sep_med,   &r.sep_hi68,
                     &r.pa_mode_deg, &r.pa_arc68_start_deg, &r.pa_arc68_width_deg};
  for (std::size_t k = 0; k < std::size(slots); ++k) {
    const int c = t.index(cols[k + 2]);
    *slots[k] = t.text(c).empty() ? kAbsent : t.number(c);
  }
  const int is = t.index("status");
  if (!RowStatus::parse(t.text(is), r.status)) t.fail(is, "not a row status (ok, bad_input:REASON, failed:REASON)");
  r.notes = split_notes(t.text(t.index("notes")));
  return r;
}

std::string RankRunInfo::line() const {
  std::string s = "# heft-rank";
  for (const auto& [k, v] : fields) s += " " + k + "=" + v;
  return s + '\n';
}

RankRunInfo RankRunInfo::parse(const std::string& line, const std::string& file) {
  if (!valid_utf8(line)) throw InputError(file, 1, 0, "run metadata line is not valid UTF-8 text");
  RankRunInfo info;
  std::istringstream in(line);
  std::string word;
  in >> word;
  if (word != "#") throw InputError(file, 1, 1, "first line is not heft rank run metadata ('# heft-rank ...')");
  in >> word;
  if (word != "heft-rank") throw InputError(file, 1, 3, "first line is not heft rank run metadata ('# heft-rank ...')");
  while (in >> word) {
    const auto eq = word.find('=');
    if (eq == std::string::npos) throw InputError(file, 1, 0, "run metadata field without '=': '" + word + "'");
    info.fields[word.substr(0, eq)] = word.substr(eq + 1);
  }
  return info;
}

std::string ranked_table(const RankRunInfo& info, const std::vector<RankRecord>& ranked) {
  std::string out = info.line() + rank_header();
  for (const auto& r : ranked) append_rank_row(out, r);
  return out;
}

namespace {

// A metadata field as JSON: numbers as numbers, comma lists as arrays of
// numbers, "none" as null; words (paths, versions, the prior text, the
// shard K/N, the options fingerprint) stay strings.
nlohmann::ordered_json metadata_json(const std::string& key, const std::string& value) {
  static const std::set<std::string> integers = {"rows", "draws", "seed", "max_curves"};
  static const std::set<std::string> numbers = {"date_yr", "iwa_mas", "owa_mas", "detect_sigma"};
  static const std::set<std::string> lists = {"target_mass_mjup", "a_grid_au", "mass_prior_mjup",
                                              "host_mass_default_msun"};
  auto number = [](const std::string& t) {
    double v = 0.0;
    return t != "none" && parse_double(t, v) ? json_number(v) : nlohmann::ordered_json(nullptr);
  };
  if (integers.count(key)) {
    std::uint64_t v = 0;  // the seed takes all 64 bits
    const auto [end, ec] = std::from_chars(value.data(), value.data() + value.size(), v);
    return ec == std::errc() && end == value.data() + value.size() ? nlohmann::ordered_json(v)
                                                                   : nlohmann::ordered_json(value);
  }
  if (numbers.count(key)) return number(value);
  if (!lists.count(key)) return value;
  nlohmann::ordered_json a = nlohmann::ordered_json::array();
  std::size_t start = 0;
  for (std::size_t comma; (comma = value.find(',', start)) != std::string::npos; start = comma + 1)
    a.push_back(number(value.substr(start, comma - start)));
  a.push_back(number(value.substr(start)));
  return a;
}

}  // namespace

std::string ranked_json(const RankRunInfo& info, const std::vector<RankRecord>& ranked) {
  using oj = nlohmann::ordered_json;
  const auto num = json_number;
  std::string out = "{\"stars\":[\n";
  std::map<std::string, long> counts;
  for (std::size_t k = 0; k < ranked.size(); ++k) {
    const RankRecord& r = ranked[k];
    ++counts[r.status.text()];
    const oj j = {{"id", r.id},
                  {"rank", r.rank},
                  {"score", num(r.score)},
                  {"p_detect", num(r.p_detect)},
                  {"p_real", num(r.p_real)},
                  {"log10_bayes", num(r.log10_bayes)},
                  {"p_stellar", num(r.p_stellar)},
                  {"best_date_yr", num(r.best_date_yr)},
                  {"best_date_score", num(r.best_date_score)},
                  {"first_date_score", num(r.first_date_score)},
                  {"sig_joint", num(r.sig_joint)},
                  {"a_best_au", num(r.a_best_au)},
                  {"mass_mjup", quantiles_json({{16, r.mass_lo68}, {50, r.mass_med}, {84, r.mass_hi68}})},
                  {"sep_mas", quantiles_json({{16, r.sep_lo68}, {50, r.sep_med}, {84, r.sep_hi68}})},
                  {"pa_deg", {{"mode", num(r.pa_mode_deg)}, {"arc68_start", num(r.pa_arc68_start_deg)},
                              {"arc68_width", num(r.pa_arc68_width_deg)}}},
                  {"status", r.status.text()},
                  {"notes", r.notes}};
    out += (k ? ",\n" : "") + j.dump();
  }
  oj run;
  run["command"] = "rank";
  for (const auto& [k, v] : info.fields) run[k] = metadata_json(k, v);
  run["rows_per_status"] = counts;
  run["units"] = units_json(rank_column_units());
  return out + "\n],\n\"run\":" + run.dump() + "}\n";
}

namespace {

// The first line without its line end and a UTF-8 byte-order mark.
std::string metadata_line(std::string line) {
  if (line.compare(0, 3, "\xEF\xBB\xBF") == 0) line.erase(0, 3);
  if (!line.empty() && line.back() == '\r') line.pop_back();
  return line;
}

std::string check_of(std::string_view bytes) {
  char b[17];
  std::snprintf(b, sizeof b, "%016llx", static_cast<unsigned long long>(fnv1a64(bytes)));
  return b;
}

}  // namespace

std::string checkpoint_head(const RankRunInfo& info) {
  std::string h = rank_header();
  h.pop_back();
  return info.line() + h + ",check\n";
}

std::string checkpoint_line(const RankRecord& r) {
  std::string line;
  append_rank_row(line, r);
  line.pop_back();
  return line + "," + check_of(line) + "\n";
}

Checkpoint read_checkpoint(std::istream& in, const std::string& name) {
  std::ostringstream buf;
  buf << in.rdbuf();
  const std::string text = buf.str();
  Checkpoint cp;
  std::size_t pos = 0;
  long line_no = 0;
  // Complete (newline-terminated) lines only: a torn tail is not a line.
  auto next_line = [&](std::string_view& line) {
    const std::size_t nl = text.find('\n', pos);
    if (nl == std::string::npos) {
      if (pos < text.size()) ++cp.dropped;
      return false;
    }
    line = std::string_view(text).substr(pos, nl - pos);
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    pos = nl + 1;
    ++line_no;
    return true;
  };
  std::string_view line;
  if (!next_line(line)) throw InputError(name, 1, 0, "no run metadata line");
  cp.info = RankRunInfo::parse(metadata_line(std::string(line)), name);
  std::string header = rank_header();
  header.pop_back();
  if (!next_line(line) || line != header + ",check")
    throw InputError(name, 2, 1, "not a heft rank checkpoint header");
  while (next_line(line)) {
    const auto comma = line.rfind(',');
    if (comma == std::string_view::npos || line.substr(comma + 1) != check_of(line.substr(0, comma))) {
      ++cp.dropped;
      continue;
    }
    std::istringstream row(header + "\n" + std::string(line.substr(0, comma)) + "\n");
    ColumnTable t(row, name, rank_columns(), line_no - 1);
    if (t.next()) cp.records.push_back(parse_rank_row(t));
  }
  return cp;
}

std::vector<RankRecord> read_ranked(std::istream& in, const std::string& name, RankRunInfo& info) {
  std::string first;
  if (!std::getline(in, first)) throw InputError(name, 0, 0, "empty file: no run metadata line");
  info = RankRunInfo::parse(metadata_line(first), name);
  ColumnTable t(in, name, rank_columns(), 2);
  std::vector<RankRecord> out;
  while (t.next()) out.push_back(parse_rank_row(t));
  return out;
}

}  // namespace heft

namespace heft {

std::vector<RankRecord> read_ranked_json(std::istream& in, const std::string& name, RankRunInfo& info) {
  using json = nlohmann::json;
  json j;
  try {
    j = json::parse(in);
  } catch (const json::exception& e) {  // syntax, or a number beyond double
    throw InputError(name, 0, 0, std::string("not JSON: ") + e.what());
  }
  if (!j.is_object() || !j.contains("run") || !j["run"].is_object() || !j["run"].contains("command") ||
      j["run"]["command"] != "rank")
    throw InputError::at_json(name, "/run/command", "not a heft rank JSON (expected \"run\": {\"command\": \"rank\"})");
  if (!j.contains("stars") || !j["stars"].is_array())
    throw InputError::at_json(name, "/stars", "expected the array of ranked stars");
  // The metadata back to their one-word form (the inverse of metadata_json).
  info.fields.clear();
  auto word = [](const json& v) -> std::string {
    if (v.is_null()) return "none";
    if (v.is_number_unsigned() || v.is_number_integer()) return v.dump();
    if (v.is_number()) return format_double(v.get<double>());
    return v.get<std::string>();
  };
  for (const auto& [key, v] : j["run"].items()) {
    if (key == "command" || key == "rows_per_status" || key == "units") continue;
    const std::string path = "/run/" + key;
    if (v.is_array()) {
      std::string list;
      for (std::size_t k = 0; k < v.size(); ++k) {
        if (!v[k].is_null() && !v[k].is_number())
          throw InputError::at_json(name, path + "/" + std::to_string(k), "expected a number or null");
        list += (k ? "," : "") + word(v[k]);
      }
      info.fields[key] = list;
    } else if (v.is_null() || v.is_number() || v.is_string()) {
      info.fields[key] = word(v);
    } else {
      throw InputError::at_json(name, path, "expected a number, a string, an array or null");
    }
  }
  std::vector<RankRecord> out;
  const json& stars = j["stars"];
  for (std::size_t k = 0; k < stars.size(); ++k) {
    const json& s = stars[k];
    const std::string at = "/stars/" + std::to_string(k);
    if (!s.is_object()) throw InputError::at_json(name, at, "expected an object");
    RankRecord r;
    auto number = [&](const json& o, const char* key, const std::string& path) {
      if (!o.contains(key) || o[key].is_null()) return kAbsent;
      if (!o[key].is_number()) throw InputError::at_json(name, path + "/" + key, "expected a number or null");
      return o[key].get<double>();
    };
    auto object = [&](const char* key) -> const json& {
      static const json empty = json::object();
      if (!s.contains(key)) return empty;
      if (!s[key].is_object()) throw InputError::at_json(name, at + "/" + key, "expected an object");
      return s[key];
    };
    if (!s.contains("id") || !s["id"].is_string()) throw InputError::at_json(name, at + "/id", "expected the star id");
    r.id = s["id"].get<std::string>();
    if (!s.contains("rank") || !s["rank"].is_number_integer() || s["rank"].get<long>() < 1)
      throw InputError::at_json(name, at + "/rank", "expected a whole number >= 1");
    r.rank = s["rank"].get<long>();
    if (!s.contains("status") || !s["status"].is_string() || !RowStatus::parse(s["status"].get<std::string>(), r.status))
      throw InputError::at_json(name, at + "/status", "not a row status (ok, bad_input:REASON, failed:REASON)");
    r.score = number(s, "score", at);
    r.p_detect = number(s, "p_detect", at);
    r.p_real = number(s, "p_real", at);
    r.log10_bayes = number(s, "log10_bayes", at);
    r.p_stellar = number(s, "p_stellar", at);
    r.best_date_yr = number(s, "best_date_yr", at);
    r.best_date_score = number(s, "best_date_score", at);
    r.first_date_score = number(s, "first_date_score", at);
    r.sig_joint = number(s, "sig_joint", at);
    r.a_best_au = number(s, "a_best_au", at);
    const json& m = object("mass_mjup");
    r.mass_lo68 = number(m, "q16", at + "/mass_mjup");
    r.mass_med = number(m, "q50", at + "/mass_mjup");
    r.mass_hi68 = number(m, "q84", at + "/mass_mjup");
    const json& sep = object("sep_mas");
    r.sep_lo68 = number(sep, "q16", at + "/sep_mas");
    r.sep_med = number(sep, "q50", at + "/sep_mas");
    r.sep_hi68 = number(sep, "q84", at + "/sep_mas");
    const json& pa = object("pa_deg");
    r.pa_mode_deg = number(pa, "mode", at + "/pa_deg");
    r.pa_arc68_start_deg = number(pa, "arc68_start", at + "/pa_deg");
    r.pa_arc68_width_deg = number(pa, "arc68_width", at + "/pa_deg");
    if (s.contains("notes")) {
      if (!s["notes"].is_array()) throw InputError::at_json(name, at + "/notes", "expected an array of words");
      for (std::size_t n = 0; n < s["notes"].size(); ++n) {
        if (!s["notes"][n].is_string())
          throw InputError::at_json(name, at + "/notes/" + std::to_string(n), "expected a word");
        r.notes.push_back(s["notes"][n].get<std::string>());
      }
    }
    out.push_back(std::move(r));
  }
  return out;
}

}  // namespace heft
