#include "heft/catalog.hpp"

#include <algorithm>
#include <exception>
#include <utility>

#include "heft/error.hpp"
#include "heft/rng.hpp"
#include "heft/stats.hpp"

namespace heft {
namespace {

// The canonical columns after `id`, in the order heft writes them: calls
// f(prefix, name, required, slot) for each, slot a double of `s`. One list
// for the names and every reader and writer; inlined, a row's numbers are
// parsed without a call per column (an accessor function per column cost
// 3 % of `heft screen -j 1`).
template <class A, class F>
void visit_epoch(std::string_view prefix, A& a, F& f) {
  f(prefix, "epoch", true, a.epoch_yr);
  f(prefix, "ra", true, a.ra_deg);
  f(prefix, "dec", true, a.dec_deg);
  f(prefix, "parallax", true, a.parallax_mas);
  f(prefix, "pmra", true, a.pmra_mas_yr);
  f(prefix, "pmdec", true, a.pmdec_mas_yr);
  f(prefix, "ra_error", true, a.ra_error_mas);
  f(prefix, "dec_error", true, a.dec_error_mas);
  f(prefix, "parallax_error", true, a.parallax_error_mas);
  f(prefix, "pmra_error", true, a.pmra_error_mas_yr);
  f(prefix, "pmdec_error", true, a.pmdec_error_mas_yr);
  for (int k = 0; k < 10; ++k) f(prefix, kCorrNames[k], false, a.corr[k]);
  f(prefix, "window_start", false, a.window_start_yr);
  f(prefix, "window_end", false, a.window_end_yr);
}

template <class S, class F>  // S: StarRecord or const StarRecord
void visit_columns(S& s, F&& f) {
  visit_epoch("early_", s.early, f);
  visit_epoch("late_", s.late, f);
  f("", "mass", false, s.mass_msun);
  f("", "mass_error", false, s.mass_error_msun);
  f("", "rv", false, s.rv_km_s);
  f("", "rv_error", false, s.rv_error_km_s);
  f("", "mag", false, s.mag);
  f("", "age_myr", false, s.age_myr);
}

struct Column {
  std::string name;
  bool required;
};

const std::vector<Column>& columns() {
  static const std::vector<Column> cols = [] {
    std::vector<Column> c;
    const StarRecord probe;
    visit_columns(probe, [&](std::string_view prefix, std::string_view name, bool required, const double&) {
      c.push_back({std::string(prefix) + std::string(name), required});
    });
    return c;
  }();
  return cols;
}

std::string validate_astrometry(const Astrometry& a) {
  const double vals[] = {a.epoch_yr, a.ra_deg, a.dec_deg, a.parallax_mas, a.pmra_mas_yr,
                         a.pmdec_mas_yr, a.ra_error_mas, a.dec_error_mas, a.parallax_error_mas,
                         a.pmra_error_mas_yr, a.pmdec_error_mas_yr, a.window_start_yr,
                         a.window_end_yr};
  for (double v : vals)
    if (!std::isfinite(v)) return "non_finite";
  for (double c : a.corr)
    if (!std::isfinite(c)) return "non_finite";
  if (!(a.ra_error_mas > 0 && a.dec_error_mas > 0 && a.parallax_error_mas > 0 &&
        a.pmra_error_mas_yr > 0 && a.pmdec_error_mas_yr > 0))
    return "nonpositive_error";
  if (std::abs(a.dec_deg) > 90.0) return "dec_out_of_range";
  if (a.ra_deg < 0.0 || a.ra_deg > 360.0) return "ra_out_of_range";
  for (double c : a.corr)
    if (c < -1.0 || c > 1.0) return "corr_out_of_range";
  if (!(a.window_start_yr < a.window_end_yr) || a.epoch_yr < a.window_start_yr ||
      a.epoch_yr > a.window_end_yr)
    return "window_excludes_epoch";
  if (Eigen::Matrix<double, 5, 5> c = a.covariance(); !ldlt_in_place(c)) return "covariance_not_positive_definite";
  return "";
}

}  // namespace

Eigen::Matrix<double, 5, 5> Astrometry::covariance() const {
  const double s[5] = {ra_error_mas, dec_error_mas, parallax_error_mas, pmra_error_mas_yr,
                       pmdec_error_mas_yr};
  Eigen::Matrix<double, 5, 5> c;
  int k = 0;
  for (int i = 0; i < 5; ++i) {
    c(i, i) = s[i] * s[i];
    for (int j = i + 1; j < 5; ++j, ++k) c(i, j) = c(j, i) = corr[k] * s[i] * s[j];
  }
  return c;
}

void Astrometry::set_covariance(const Eigen::Matrix<double, 5, 5>& c) {
  double s[5];
  for (int i = 0; i < 5; ++i) s[i] = std::sqrt(c(i, i));
  ra_error_mas = s[0];
  dec_error_mas = s[1];
  parallax_error_mas = s[2];
  pmra_error_mas_yr = s[3];
  pmdec_error_mas_yr = s[4];
  int k = 0;
  for (int i = 0; i < 5; ++i)
    for (int j = i + 1; j < 5; ++j, ++k) corr[k] = c(i, j) / (s[i] * s[j]);
}

std::string validate_star(const StarRecord& s) {
  if (s.id.empty()) return "missing_id";
  if (auto r = validate_astrometry(s.early); !r.empty()) return r;
  if (auto r = validate_astrometry(s.late); !r.empty()) return r;
  if (!(s.early.epoch_yr < s.late.epoch_yr)) return "epoch_order";
  if (!(s.late.parallax_mas > 0)) return "nonpositive_parallax";
  const double opt[] = {s.mass_msun, s.mass_error_msun, s.rv_km_s, s.rv_error_km_s, s.mag,
                        s.age_myr};
  for (double v : opt)
    if (present(v) && !std::isfinite(v)) return "non_finite";
  if (present(s.mass_msun) && !(s.mass_msun > 0)) return "nonpositive_mass";
  if ((present(s.mass_error_msun) && !(s.mass_error_msun > 0)) ||
      (present(s.rv_error_km_s) && !(s.rv_error_km_s > 0)))
    return "nonpositive_error";
  return "";
}

double* star_field(StarRecord& star, std::string_view name, bool* required) {
  double* found = nullptr;
  std::size_t k = 0;
  visit_columns(star, [&](std::string_view, std::string_view, bool req, double& slot) {
    if (!found && columns()[k].name == name) {
      found = &slot;
      if (required) *required = req;
    }
    ++k;
  });
  return found;
}

bool is_carried_column(std::string_view name) {
  for (std::string_view prefix : {"early_", "late_"})
    if (name.substr(0, prefix.size()) == prefix)
      for (std::string_view f : kCarriedFields)
        if (name.substr(prefix.size()) == f) return true;
  return false;
}

const std::vector<ColumnUnit>& star_column_units() {
  static const std::vector<ColumnUnit> cols = [] {
    std::vector<ColumnUnit> c = {{"id", ""}};
    auto ends = [](const std::string& s, std::string_view t) { return s.ends_with(t); };
    for (const auto& n : star_field_names()) {
      const char* u = "";
      if (ends(n, "_epoch") || ends(n, "_window_start") || ends(n, "_window_end")) u = "yr";
      else if (ends(n, "_corr")) u = "";
      else if (ends(n, "_pmra") || ends(n, "_pmdec") || ends(n, "_pmra_error") || ends(n, "_pmdec_error")) u = "mas/yr";
      else if (ends(n, "_ra") || ends(n, "_dec")) u = "deg";
      else if (ends(n, "_parallax") || ends(n, "_error")) u = n == "mass_error" ? "Msun" : n == "rv_error" ? "km/s" : "mas";
      else if (n == "mass") u = "Msun";
      else if (n == "rv") u = "km/s";
      else if (n == "mag") u = "mag";
      else if (n == "age_myr") u = "Myr";
      c.push_back({n, u});
    }
    return c;
  }();
  return cols;
}

std::vector<std::string> star_field_names() {
  std::vector<std::string> names;
  for (const auto& c : columns()) names.push_back(c.name);
  return names;
}

StarTableReader::StarTableReader(std::istream& in, std::string name, WindowDefaults windows)
    : csv_(in, std::move(name)), windows_(windows) {
  if (!csv_.next()) throw InputError(csv_.name(), 0, 0, "empty file: no header row");
  const auto& header = csv_.fields();
  n_fields_ = header.size();
  csv_.guard_commented_rows(n_fields_);
  const auto& cols = columns();
  field_of_column_.assign(cols.size() + 1, -1);  // slot 0 = id
  for (std::size_t f = 0; f < header.size(); ++f) {
    const std::string h(header[f]);
    int slot = -2;
    if (h == "id") slot = 0;
    for (std::size_t k = 0; k < cols.size() && slot == -2; ++k)
      if (cols[k].name == h) slot = static_cast<int>(k) + 1;
    if (slot == -2) {
      if (!is_carried_column(h)) unknown_columns_.push_back(h);
      continue;
    }
    if (field_of_column_[slot] != -1)
      throw InputError(csv_.name(), csv_.line(), csv_.column(f), "duplicated column '" + clip_for_message(h) + "'");
    field_of_column_[slot] = static_cast<int>(f);
  }
  if (field_of_column_[0] == -1)
    throw InputError(csv_.name(), csv_.line(), 0, "missing required column 'id'");
  for (std::size_t k = 0; k < cols.size(); ++k)
    if (cols[k].required && field_of_column_[k + 1] == -1)
      throw InputError(csv_.name(), csv_.line(), 0,
                       "missing required column '" + cols[k].name + "'");
}

namespace {
// Fibonacci hashing (Knuth, TAOCP vol. 3, Sect. 6.4): the product's top bits.
std::size_t first_slot(std::uint64_t h, int bits) { return (h * 0x9E3779B97F4A7C15ULL) >> (64 - bits); }
}  // namespace

bool StarTableReader::SeenHashes::insert(std::uint64_t h) {
  if (h == 0) return !std::exchange(zero_, true);
  if (2 * (used_ + 1) > slot_.size()) {  // grow to keep the table at most half full
    std::vector<std::uint64_t> old(std::size_t{1} << (bits_ = std::max(10, bits_ + 1)), 0);
    old.swap(slot_);
    used_ = 0;
    for (std::uint64_t k : old)
      if (k != 0) insert(k);
  }
  const std::size_t mask = slot_.size() - 1;
  for (std::size_t i = first_slot(h, bits_);; i = (i + 1) & mask) {
    if (slot_[i] == h) return false;
    if (slot_[i] == 0) {
      slot_[i] = h;
      ++used_;
      return true;
    }
  }
}

void StarTableReader::SeenHashes::prefetch(std::uint64_t h) const {
  if (!slot_.empty()) __builtin_prefetch(&slot_[first_slot(h, bits_)]);
}

void StarTableReader::check_ids(std::span<RawStarRow> rows) {
  // The table outgrows the caches (8 MiB at 300,000 ids), so each insert
  // waits for memory unless its line was asked for some rows before.
  constexpr std::size_t kAhead = 8;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    if (i + kAhead < rows.size() && rows[i + kAhead].has_id) seen_ids_.prefetch(rows[i + kAhead].id_hash);
    rows[i].duplicate_id = rows[i].has_id && !seen_ids_.insert(rows[i].id_hash);
  }
}

bool StarTableReader::next_raw(RawStarRow& row) {
  // Rows of ids not asked for are passed over before their numbers are parsed.
  // Of those, only the fields up to the id are split.
  const auto id_field = static_cast<std::size_t>(field_of_column_[0]);
  do {
    if (!(keep_ ? csv_.next_first(id_field + 1) : csv_.next())) return false;
    ++rows_;
    if (csv_.field_count() != n_fields_)
      throw InputError(csv_.name(), csv_.line(), 0,
                       "row has " + std::to_string(csv_.field_count()) + " fields, header has " +
                           std::to_string(n_fields_));
  } while (keep_ && !keep_(csv_.field(id_field)));
  const std::string_view id = csv_.field(id_field);
  row.has_id = !id.empty();
  row.id_hash = fnv1a64(id);
  row.duplicate_id = false;
  row.line = csv_.line();
  csv_.take_record(row.text, row.spans, row.columns);
  return true;
}

void StarTableReader::parse(const RawStarRow& row, StarRecord& star, std::string& bad_reason) const {
  auto field = [&](int i) {
    const auto [begin, end] = row.spans[i];
    return std::string_view(row.text).substr(begin, end - begin);
  };
  star = StarRecord{};
  star.id = field(field_of_column_[0]);
  // Ids travel into every table and JSON heft writes, one line per star.
  for (char c : star.id)
    if (static_cast<unsigned char>(c) < 0x20 || c == 0x7F)
      throw InputError(csv_.name(), row.line, row.column(field_of_column_[0]),
                       "column 'id': contains a control character (line break, tab, ...)");
  bad_reason.clear();
  const auto& cols = columns();
  std::size_t k = 0;  // absent columns keep StarRecord's values: kAbsent, correlations 0
  visit_columns(star, [&](std::string_view, std::string_view, bool required, double& slot) {
    const int fi = field_of_column_[++k];
    const std::string_view f = fi < 0 ? std::string_view() : field(fi);
    if (f.empty()) {
      if (required && bad_reason.empty()) bad_reason = "missing_" + cols[k - 1].name;
    } else if (!parse_double(f, slot)) {
      throw InputError(csv_.name(), row.line, row.column(fi),
                       "column '" + cols[k - 1].name + "': not a number: '" + clip_for_message(f) + "'");
    }
  });
  if (!present(star.early.window_start_yr)) star.early.window_start_yr = windows_.early_start_yr;
  if (!present(star.early.window_end_yr)) star.early.window_end_yr = windows_.early_end_yr;
  if (!present(star.late.window_start_yr)) star.late.window_start_yr = windows_.late_start_yr;
  if (!present(star.late.window_end_yr)) star.late.window_end_yr = windows_.late_end_yr;
  if (bad_reason.empty()) bad_reason = validate_star(star);
  if (bad_reason.empty() && row.duplicate_id) bad_reason = "duplicate_id";
}

bool StarTableReader::next(StarRecord& star, std::string& bad_reason) {
  if (!next_raw(raw_)) return false;
  check_ids(std::span(&raw_, 1));
  parse(raw_, star, bad_reason);
  return true;
}

void read_star_rows(StarTableReader& reader, std::size_t chunk,
                    const std::function<void(std::size_t, const ParsedStarRow&)>& work,
                    const std::function<void(std::size_t, const ParsedStarRow&)>& consume) {
  struct Chunk {
    std::vector<RawStarRow> raw;
    std::size_t n = 0;
    bool more = true;
    std::exception_ptr unreadable;  // the row after the last one read
  };
  long index = 0;
  const auto read_chunk = [&](Chunk& c) {
    c.raw.resize(chunk);
    c.n = 0;
    c.unreadable = nullptr;
    try {
      while (c.n < chunk && (c.more = reader.next_raw(c.raw[c.n]))) ++c.n;
    } catch (...) {  // not thrown out of the task: after the rows before it
      c.unreadable = std::current_exception();
      c.more = false;
    }
    reader.check_ids(std::span(c.raw.data(), c.n));
  };
  std::vector<ParsedStarRow> rows(chunk);
  std::vector<std::exception_ptr> failed(chunk);
  Chunk cur, next;
  read_chunk(cur);
  for (;;) {
    const bool ahead = cur.more;
#pragma omp parallel
#pragma omp single
    {
      if (ahead) {
#pragma omp task
        read_chunk(next);
      }
#pragma omp taskloop grainsize(64)
      for (std::size_t i = 0; i < cur.n; ++i) {
        failed[i] = nullptr;
        try {
          rows[i].line = cur.raw[i].line;
          rows[i].index = index + static_cast<long>(i);
          reader.parse(cur.raw[i], rows[i].star, rows[i].bad_reason);
          work(i, rows[i]);
        } catch (...) {
          failed[i] = std::current_exception();
        }
      }
    }
    for (std::size_t i = 0; i < cur.n; ++i) {
      if (failed[i]) std::rethrow_exception(failed[i]);
      consume(i, rows[i]);
    }
    if (cur.unreadable) std::rethrow_exception(cur.unreadable);
    if (!ahead) return;
    index += static_cast<long>(cur.n);
    std::swap(cur, next);
  }
}

std::string star_table_header() {
  std::string h = "id";
  for (const auto& c : columns()) h += "," + c.name;
  h += '\n';
  return h;
}

void append_star_row(std::string& out, const StarRecord& star) {
  append_csv_field(out, star.id);
  visit_columns(star, [&](std::string_view, std::string_view, bool, double v) {
    out += ',';
    append_double(out, v);
  });
  out += '\n';
}

}  // namespace heft
