#pragma once
/// \file io.hpp
/// Text input and output shared by every file format of heft: a streaming
/// CSV tokenizer, exact number parsing and shortest round-trip formatting,
/// and atomic output files (temporary file + rename).

#include <cstdio>
#include <fstream>
#include <iosfwd>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

namespace heft {

/// Streaming CSV tokenizer (RFC 4180 fields).
///
/// Notes:
/// 1. A UTF-8 byte-order mark at the start is skipped; CRLF and LF line ends
///    are both accepted.
/// 2. Lines whose first character is '#' and blank lines are skipped.
/// 3. Fields may be quoted with '"' ("" inside is a literal quote, and a
///    quoted field may contain commas and line breaks); surrounding
///    whitespace of unquoted fields is trimmed.
class CsvReader {
 public:
  /// `name` is the file name used in error messages; `first_line` is the
  /// line number of the stream's first line (when a caller consumed some).
  CsvReader(std::istream& in, std::string name, long first_line = 1);

  /// Reads the next record into fields(); false at end of input.
  /// Throws InputError on an unterminated quote.
  bool next();

  /// Fields of the current record; valid until the next call to next().
  const std::vector<std::string_view>& fields() const { return fields_; }
  /// 1-based line number where the current record starts.
  long line() const { return line_; }
  /// 1-based character column where field `i` of the current record starts.
  long column(std::size_t i) const { return columns_.at(i); }
  const std::string& name() const { return name_; }

 private:
  std::istream& in_;
  std::string name_;
  std::string buf_;
  std::string storage_;  // field contents, back to back
  std::vector<std::string_view> fields_;
  std::vector<std::size_t> ends_;
  std::vector<long> columns_;
  long line_ = 0;
  long next_line_ = 1;
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

/// Parses a whole field as a double (std::from_chars: exact, locale-free).
/// Returns false when the text is not a number (leading '+' is accepted;
/// "nan"/"inf" parse and are reported as non-finite by the caller).
bool parse_double(std::string_view text, double& value);

/// Shortest decimal text that reads back to exactly `value`
/// (std::to_chars). NaN and infinities give an empty string.
std::string format_double(double value);
/// Appends format_double(value) to `out`.
void append_double(std::string& out, double value);

/// Appends `field` to `out`, quoted as CSV requires.
void append_csv_field(std::string& out, std::string_view field);

/// An output destination that appears atomically: data go to a temporary
/// file beside the target, and commit() renames it into place. If the object
/// is destroyed without commit() the temporary file is removed, so an
/// interrupted or failed run never leaves a partial file. Path "-" (or empty)
/// means standard output, written directly.
class AtomicOutput {
 public:
  explicit AtomicOutput(std::string path);
  ~AtomicOutput();
  AtomicOutput(const AtomicOutput&) = delete;
  AtomicOutput& operator=(const AtomicOutput&) = delete;

  void write(std::string_view data);
  /// Flushes, and renames the temporary file onto the target.
  void commit();
  bool is_stdout() const { return to_stdout_; }
  const std::string& path() const { return path_; }

 private:
  std::string path_;
  std::string tmp_path_;
  std::FILE* file_ = nullptr;
  bool to_stdout_ = false;
  bool committed_ = false;
};

/// Opens `path` for reading ("-" = standard input). Throws InputError if the
/// file cannot be opened.
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
