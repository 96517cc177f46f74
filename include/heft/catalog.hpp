#pragma once
/// \file catalog.hpp
/// The canonical star record and the canonical star table (CSV): reading
/// with validation, and writing.
///
/// Units in the table: ra, dec in deg; positions errors, parallax in mas;
/// proper motions in mas/yr (pmra is mu_alpha* = mu_alpha cos dec); epochs
/// and windows in decimal Julian years; rv in km/s at the late epoch; mass
/// in solar masses. `ra_error` is the error of alpha* = alpha cos dec.

#include <Eigen/Core>
#include <array>
#include <cmath>
#include <cstdint>
#include <iosfwd>
#include <functional>
#include <limits>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "heft/io.hpp"

namespace heft {

inline constexpr double kAbsent = std::numeric_limits<double>::quiet_NaN();
inline bool present(double x) { return !std::isnan(x); }

/// The ten correlation names of a 5-parameter solution, in Gaia order.
inline constexpr std::array<const char*, 10> kCorrNames = {
    "ra_dec_corr",       "ra_parallax_corr",    "ra_pmra_corr",        "ra_pmdec_corr",
    "dec_parallax_corr", "dec_pmra_corr",       "dec_pmdec_corr",      "parallax_pmra_corr",
    "parallax_pmdec_corr", "pmra_pmdec_corr"};

/// One catalogue's 5-parameter astrometric solution of a star.
struct Astrometry {
  double epoch_yr = kAbsent;
  double ra_deg = kAbsent, dec_deg = kAbsent;
  double parallax_mas = kAbsent;
  double pmra_mas_yr = kAbsent, pmdec_mas_yr = kAbsent;
  double ra_error_mas = kAbsent, dec_error_mas = kAbsent, parallax_error_mas = kAbsent;
  double pmra_error_mas_yr = kAbsent, pmdec_error_mas_yr = kAbsent;
  /// Correlations in kCorrNames order (0 when absent).
  std::array<double, 10> corr{};
  /// Observing window (decimal years).
  double window_start_yr = kAbsent, window_end_yr = kAbsent;

  /// 5x5 covariance of (alpha* [mas], delta [mas], parallax [mas],
  /// pmra [mas/yr], pmdec [mas/yr]).
  Eigen::Matrix<double, 5, 5> covariance() const;
  /// Replaces errors and correlations by those of covariance `c`.
  void set_covariance(const Eigen::Matrix<double, 5, 5>& c);
};

/// The canonical star record: both catalogue solutions and star properties.
struct StarRecord {
  std::string id;
  Astrometry early, late;
  double mass_msun = kAbsent, mass_error_msun = kAbsent;
  double rv_km_s = kAbsent, rv_error_km_s = kAbsent;  ///< at the late epoch
  double mag = kAbsent;
  double age_myr = kAbsent;
};

/// Per-catalogue window defaults for rows without window columns.
struct WindowDefaults {
  double early_start_yr = 1989.85, early_end_yr = 1993.21;
  double late_start_yr = 2014.57, late_end_yr = 2017.41;
};

/// One data row of the star table as read, before its numbers are parsed:
/// field i is text[spans[i].first, spans[i].second) (CsvReader::take_record), with the
/// line and the column where each starts, for messages.
struct RawStarRow {
  long line = 0;
  std::string text;
  std::vector<std::pair<std::size_t, std::size_t>> spans;
  std::vector<long> columns;  // empty for a line without quotes: column()
  /// 1-based character column where field i starts.
  long column(std::size_t i) const { return CsvReader::column_of(spans, columns, i); }
  bool has_id = false;        // the id field is not empty
  std::uint64_t id_hash = 0;  // fnv1a64 of the id
  bool duplicate_id = false;  // an earlier row has the same id (StarTableReader::check_ids)
};

/// Reads the canonical star table row by row.
///
/// Notes:
/// 1. Structural problems are fatal InputErrors naming file, line, column
///    and the rule: missing required column, duplicated column,
///    a field count that differs from the header, an unparsable number.
/// 2. Columns that are not canonical are ignored (unknown_columns()).
/// 3. Physically invalid rows are returned with a non-empty `bad_reason`
///    (e.g. "nonpositive_error"), so a batch can flag them and go on.
class StarTableReader {
 public:
  StarTableReader(std::istream& in, std::string name, WindowDefaults windows = {});

  /// Reads the next row; false at end of input. On return `bad_reason` is
  /// empty for a valid row.
  bool next(StarRecord& star, std::string& bad_reason);
  /// next() in two steps, so that a batch can parse rows in parallel
  /// while reading stays in file order: next_raw reads a row (false at end
  /// of input; the field-count check), check_ids then marks the rows whose
  /// id an earlier row had, and parse fills `star` from a row (thread-safe,
  /// also while next_raw reads on; InputError on a number that does not
  /// parse or a control character in the id).
  bool next_raw(RawStarRow& row);
  /// Checks the ids of `rows` against those before them and among
  /// themselves (RawStarRow::duplicate_id). Call it once for every row
  /// next_raw returned, in file order; given a chunk at once, it loads the
  /// table's lines for later rows while it checks earlier ones.
  void check_ids(std::span<RawStarRow> rows);
  void parse(const RawStarRow& row, StarRecord& star, std::string& bad_reason) const;
  long line() const { return csv_.line(); }
  /// Data rows read so far.
  long rows() const { return rows_; }
  /// Only rows whose id `keep` accepts are returned; the others are passed
  /// over before their numbers are parsed (nor validated).
  void keep_ids(std::function<bool(std::string_view)> keep) { keep_ = std::move(keep); }
  /// Header columns that are not canonical (ignored; the CLI warns).
  const std::vector<std::string>& unknown_columns() const { return unknown_columns_; }

 private:
  CsvReader csv_;
  WindowDefaults windows_;
  std::vector<int> field_of_column_;  // canonical column index -> field index or -1
  std::size_t n_fields_ = 0;
  long rows_ = 0;
  // The 64-bit hashes of the ids read so far (fnv1a64), in one
  // open-addressing table with linear probing, at most half full: a row
  // touches one cache line of it, where std::unordered_set touched a
  // bucket and then a node (the check was 6.5 % of `heft screen -j 1`,
  // 4-5 % now; docs/performance.md).
  class SeenHashes {
   public:
    /// Adds h; false when it was there already.
    bool insert(std::uint64_t h);
    /// Starts loading the line where insert(h) looks first.
    void prefetch(std::uint64_t h) const;

   private:
    std::vector<std::uint64_t> slot_;  // 0 = empty; the hash 0 is zero_
    std::size_t used_ = 0;
    int bits_ = 0;
    bool zero_ = false;
  };
  SeenHashes seen_ids_;
  std::vector<std::string> unknown_columns_;
  std::function<bool(std::string_view)> keep_;
  RawStarRow raw_;  // next()'s row
};

/// A data row of the star table, parsed.
struct ParsedStarRow {
  long line = 0;   ///< 1-based line where the row starts
  long index = 0;  ///< 0-based number of the row among those returned
  StarRecord star;
  std::string bad_reason;  ///< empty for a valid row (StarTableReader::next)
};

/// Rows per chunk for read_star_rows: two chunks of a canonical table's
/// text (about 900 bytes a row) fit a 1 MiB L2 cache. With 2,048 the
/// current chunk's text left the cache while the next one was read, and
/// `heft screen -j 1` took 8 % longer (docs/performance.md).
inline constexpr std::size_t kStarRowsChunk = 512;

/// Reads `reader` to the end `chunk` rows at a time for batch work. While
/// the next chunk is read (reading is serial), the current one's rows are
/// parsed and handed to `work` in parallel (OpenMP tasks; `slot` in
/// [0, chunk) is the row's place in the chunk, for the caller's per-row
/// results); then `consume` takes them in file order. An InputError of a
/// row (a number that does not parse, a row that does not read) or an
/// exception from `work` is thrown in file order too, after `consume` has
/// taken the rows before it: what the caller sees does not depend on the
/// thread count. Memory stays flat (two chunks of rows).
void read_star_rows(StarTableReader& reader, std::size_t chunk,
                    const std::function<void(std::size_t slot, const ParsedStarRow& row)>& work,
                    const std::function<void(std::size_t slot, const ParsedStarRow& row)>& consume);

/// A canonical numeric column of `star` by its table name (e.g. "late_pmra"),
/// or nullptr when `name` is not one; `required` tells whether the table
/// requires it. For readers of other formats (the fit's JSON star file).
double* star_field(StarRecord& star, std::string_view name, bool* required = nullptr);
/// The canonical numeric column names, in table order.
std::vector<std::string> star_field_names();
/// Catalogue quality indicators that heft ingest carries through for later
/// use: `early_` or `late_` and one of kCarriedFields. The star table reader
/// accepts them (they are not unknown columns) and leaves them unused.
inline constexpr std::string_view kCarriedFields[] = {"ruwe", "excess_noise_mas"};
/// Their units, in kCarriedFields order.
inline constexpr std::string_view kCarriedUnits[] = {"", "mas"};
bool is_carried_column(std::string_view name);

/// The canonical star table's columns (id first) with heft's units: what a
/// FITS or ECSV star table is converted into (tablefile.hpp).
const std::vector<ColumnUnit>& star_column_units();

/// Validates a record; returns "" when valid, else the reason.
std::string validate_star(const StarRecord& star);

/// Header line (with newline) of the canonical star table as heft writes it.
std::string star_table_header();
/// Appends one star as a canonical-table CSV line (with newline).
void append_star_row(std::string& out, const StarRecord& star);

}  // namespace heft
