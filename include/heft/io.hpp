#pragma once
/// \file io.hpp
/// Text input and output shared by every file format of heft: a streaming
/// CSV tokenizer, exact number parsing and shortest round-trip formatting,
/// and atomic output files (temporary file + rename).

#include <cstdio>
#include <fstream>
#include <iosfwd>
#include <memory>
#include <nlohmann/json.hpp>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace heft {

/// Streaming CSV tokenizer (RFC 4180 fields).
///
/// Notes:
/// 1. A UTF-8 byte-order mark at the start is skipped; CRLF and LF line ends
///    are both accepted.
/// 2. Lines whose first character is '#' and blank lines are skipped. After
///    guard_commented_rows(n), a '#' line that splits into exactly n fields
///    is an InputError instead: it is a data row whose first field (an id)
///    starts with '#', which must be quoted ("#...") to be read, or a
///    commented-out row to delete; nothing is dropped silently.
/// 4. Every field must be valid UTF-8 (InputError at its line and column).
/// 3. Fields may be quoted with '"' ("" inside is a literal quote, and a
///    quoted field may contain commas and line breaks); surrounding
///    whitespace of unquoted fields is trimmed.
class CsvReader {
 public:
  /// `name` is the file name used in error messages; `first_line` is the
  /// line number of the stream's first line (when a caller consumed some).
  CsvReader(std::istream& in, std::string name, long first_line = 1);

  /// Reads the next record into fields(); false at end of input.
  /// Throws InputError on an unterminated quote or invalid UTF-8.
  bool next();
  /// next() for a caller that may need only the first `n` fields: of a
  /// plain line (no quotes, ASCII; nearly every row) the others are
  /// counted, not split, and field(i) is valid for i < n until complete()
  /// splits them. field_count() and the errors are next()'s. (`heft curve
  /// --id` passes over the other rows of a 100,000-star table in 43
  /// instead of 75 ms; docs/performance.md, "One star of a large table".)
  bool next_first(std::size_t n);
  /// Splits the fields that next_first left counted (nothing otherwise).
  void complete();
  /// See Note 2; for tables whose first column is an id, after the header.
  void guard_commented_rows(std::size_t n_fields) { guard_fields_ = n_fields; }

  /// Fields of the current record; valid until the next call to next().
  const std::vector<std::string_view>& fields() const;
  /// fields().size() and fields()[i], without building fields().
  std::size_t field_count() const { return count_; }
  std::string_view field(std::size_t i) const {
    return {storage_.data() + spans_[i].first, spans_[i].second - spans_[i].first};
  }
  /// 1-based line number where the current record starts.
  long line() const { return line_; }
  /// 1-based character column where field `i` of the current record starts.
  long column(std::size_t i) const { return column_of(spans_, columns_, i); }
  /// The column of field i of a record taken by take_record.
  static long column_of(const std::vector<std::pair<std::size_t, std::size_t>>& spans,
                        const std::vector<long>& columns, std::size_t i) {
    return columns.empty() ? static_cast<long>(spans.at(i).first) + 1 : columns.at(i);
  }
  /// Moves the current record out without copying: field i is
  /// text[spans[i].first, spans[i].second), starting at character column
  /// columns[i] of the line (`columns` is empty for a line without quotes,
  /// whose field i starts at column spans[i].first + 1). The buffers are
  /// swapped (their old capacity is reused by the next record); fields()
  /// and column() are empty afterwards.
  void take_record(std::string& text, std::vector<std::pair<std::size_t, std::size_t>>& spans,
                   std::vector<long>& columns);
  const std::string& name() const { return name_; }

 private:
  std::istream& in_;
  std::string name_;
  std::string buf_;
  // Appends the quoted field starting at buf_[i] to storage_, unescaped
  // (reading on over line breaks); i moves to the comma after it or the end.
  void read_quoted(std::size_t& i);
  bool next_record(std::size_t n_first);
  // Appends the spans of at most n fields of a line without quotes from
  // line[i] on; returns where the next field starts, or npos at the end.
  std::size_t split_plain(const std::string& line, std::size_t i, std::size_t n);
  std::size_t count_ = 0;                    // fields of the record, split or not
  std::size_t rest_ = std::string::npos;     // where next_first stopped splitting
  // The next physical line into `line`, without its '\n' or '\r\n'; false
  // at the end of input (std::getline's rules). The stream is read a block
  // at a time and lines are found in the block (std::getline costs about as
  // much as the rest of the reader on a large table).
  bool read_line(std::string& line);
  std::string block_;  // input read ahead; [block_pos_, block_end_) not yet consumed
  std::size_t block_pos_ = 0, block_end_ = 0;

  std::string storage_;  // the line, or the fields unescaped when it has quotes
  mutable std::vector<std::string_view> fields_;  // built by fields() when asked
  mutable bool fields_valid_ = false;
  std::vector<std::pair<std::size_t, std::size_t>> spans_;  // fields in storage_
  std::vector<long> columns_;  // lines with quotes only (column())
  long line_ = 0;
  long next_line_ = 1;
  std::size_t guard_fields_ = 0;
  bool first_ = true;
};

/// A CSV table read by column name (header row first, CsvReader rules):
/// for the small numeric tables heft reads besides the star table (orbit
/// draws, contrast and mass-magnitude curves, rank outputs).
class ColumnTable {
 public:
  /// Throws InputError when the header lacks a column of `required`,
  /// repeats a name, or the input is empty.
  ColumnTable(std::istream& in, std::string name, const std::vector<std::string>& required, long first_line = 1);
  /// Next data row; false at the end. Throws InputError when the field count
  /// differs from the header's.
  bool next();
  /// Index of column `name`, or -1.
  int index(std::string_view name) const;
  std::string_view text(int col) const { return csv_.fields()[col]; }
  /// Field `col` as a finite number; InputError naming file, line, column
  /// and the column name otherwise.
  double number(int col) const;
  long line() const { return csv_.line(); }
  const std::string& name() const { return csv_.name(); }
  const std::vector<std::string>& header() const { return header_; }
  /// InputError at field `col` of the current row with `rule`.
  [[noreturn]] void fail(int col, const std::string& rule) const;

 private:
  CsvReader csv_;
  std::vector<std::string> header_;
};

/// Parses a whole field as a double (fast_float, the std::from_chars
/// algorithm: correctly rounded, locale-free).
/// Returns false when the text is not entirely a number (leading '+' is
/// accepted; "nan"/"inf" parse and are reported as non-finite by the
/// caller). A number beyond the double range reads as +-inf (so callers that
/// require finite values refuse it), one below the smallest subnormal as +-0.
bool parse_double(std::string_view text, double& value);

/// True when `text` is valid UTF-8 (RFC 3629: no overlong forms, no
/// surrogates, nothing above U+10FFFF).
bool valid_utf8(std::string_view text);

/// `text` shortened for an error message: at most `max_bytes` bytes (cut on
/// a UTF-8 boundary) followed by "..." and the full length.
std::string clip_for_message(std::string_view text, std::size_t max_bytes = 80);

/// Parses a JSON document (nlohmann::json) from `in`. Syntax errors and
/// numbers beyond the double range become an InputError naming `name`,
/// the line and the column.
nlohmann::json read_json(std::istream& in, const std::string& name);

/// A table column and its unit ("" for dimensionless quantities and text).
/// Every table heft writes has its list in the library, in output order:
/// the CSV header is made from it, and the JSON outputs carry the units.
struct ColumnUnit {
  std::string name, unit;
};
/// The CSV header line of `cols` (with newline).
std::string header_line(const std::vector<ColumnUnit>& cols);
/// The column names of `cols`.
std::vector<std::string> column_names(const std::vector<ColumnUnit>& cols);
/// {"column": "unit", ...} for the columns of `cols` that have a unit (the
/// "units" object of the JSON run metadata).
nlohmann::ordered_json units_json(const std::vector<ColumnUnit>& cols);

/// A JSON number, or null for NaN and infinities (JSON has neither).
nlohmann::ordered_json json_number(double value);

/// Quantiles as a JSON object in heft's one spelling of the keys: "q" and
/// the percentage, e.g. {2.5, x} -> "q2.5", {50, y} -> "q50" (every
/// command's JSON: q2.5, q16, q50, q84, q97.5; q68, q95 for upper limits).
/// Non-finite values become null.
nlohmann::ordered_json quantiles_json(std::initializer_list<std::pair<double, double>> percent_value);

/// Shortest decimal text that reads back to exactly `value`
/// (std::to_chars). NaN and infinities give an empty string.
std::string format_double(double value);
/// Appends format_double(value) to `out`.
void append_double(std::string& out, double value);
/// The most characters format_double writes (sign, 17 digits, point,
/// exponent of three digits with its sign: 24), rounded up.
inline constexpr int kDoubleCharsMax = 32;
/// Writes format_double(value) at `first`, at most kDoubleCharsMax
/// characters, and returns their end (`first` for NaN and infinities).
char* write_double(char* first, double value);

/// Appends `field` to `out`, quoted as CSV requires.
void append_csv_field(std::string& out, std::string_view field);

/// Where an output path leads, after following symlinks.
struct OutputTarget {
  enum class Kind {
    kStdout,  ///< "-" or empty: standard output
    kDirect,  ///< an existing character or block device, FIFO or socket: written in place
    kFile,    ///< a regular file (existing or not): temporary file + rename
  };
  Kind kind = Kind::kStdout;
  /// The path written (kDirect) or renamed onto (kFile): symlinks resolved,
  /// so that a link to a file is kept and its target replaced.
  std::string path;
  /// A key that is equal for two outputs writing the same place (a device's
  /// key is empty: several outputs may go to /dev/null).
  std::string identity;
};

/// Resolves output path `path` (symlinks followed, at most 40). Throws
/// InputError when it is a directory, a link loop, or its folder is missing.
OutputTarget resolve_output(const std::string& path);

/// An output destination that appears atomically: data go to a unique
/// temporary file beside the target (mkstemp), and commit() renames it into
/// place. If the object is destroyed without commit(), or the process gets
/// SIGINT, SIGTERM, SIGHUP or SIGPIPE after remove_outputs_on_signals(), the
/// temporary file is removed, so an interrupted or failed run never leaves a
/// partial file or a stray temporary. Devices, FIFOs and "-" (standard
/// output) are written directly, never replaced. Every write, flush and
/// close is checked (InputError naming the path and the system's reason).
class AtomicOutput {
 public:
  explicit AtomicOutput(std::string path);
  ~AtomicOutput();
  AtomicOutput(const AtomicOutput&) = delete;
  AtomicOutput& operator=(const AtomicOutput&) = delete;

  void write(std::string_view data);
  /// Flushes (and for regular files syncs, closes and renames into place).
  void commit();
  bool is_stdout() const { return target_.kind == OutputTarget::Kind::kStdout; }
  const std::string& path() const { return path_; }

 private:
  [[noreturn]] void fail(const std::string& what);
  std::string path_;
  OutputTarget target_;
  std::string tmp_path_;
  int temp_slot_ = -1;  // slot in the signal-cleanup registry
  std::FILE* file_ = nullptr;
  bool committed_ = false;
  static constexpr std::size_t kWritebackBytes = std::size_t{8} << 20;
  std::size_t written_ = 0, started_ = 0;  ///< bytes written, and those whose writeback has started
};

/// Installs handlers for SIGINT, SIGTERM, SIGHUP and SIGPIPE that remove the
/// temporary files of live AtomicOutputs and then end the process with the
/// signal's default action. For the program's main (the library installs
/// nothing itself).
void remove_outputs_on_signals();

/// Opens `path` for reading ("-" = standard input). Throws InputError if the
/// file cannot be opened or is a directory.
class InputFile {
 public:
  explicit InputFile(const std::string& path);
  std::istream& stream() { return *in_; }
  const std::string& name() const { return name_; }

 private:
  std::unique_ptr<std::ifstream> file_;
  std::istream* in_ = nullptr;
  std::string name_;
};

/// Writes `data` to `path` atomically in one go.
void write_file_atomic(const std::string& path, std::string_view data);

}  // namespace heft
