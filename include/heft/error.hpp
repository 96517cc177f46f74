#pragma once
/// \file error.hpp
/// The one exception tree of heft. Library code throws these; only the CLI
/// catches them and maps them to exit codes (UsageError -> 1,
/// InputError -> 2, NumericError -> 3; see exit_code_of in the CLI).

#include <stdexcept>
#include <string>

namespace heft {

/// Root of all heft errors.
class Error : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

/// Bad input: names the file and, when known, the line and column (1-based;
/// 0 = unknown) or a JSON path, and the rule broken.
class InputError : public Error {
 public:
  InputError(std::string file, long line, long column, const std::string& rule);
  /// A JSON input error: `json_path` is e.g. "/relative/2/sep_mas".
  static InputError at_json(std::string file, const std::string& json_path,
                            const std::string& rule);
  const std::string& file() const { return file_; }
  long line() const { return line_; }
  long column() const { return column_; }

 private:
  InputError(std::string file, std::string message);
  std::string file_;
  long line_ = 0;
  long column_ = 0;
};

/// A value given on the command line (an option's text, e.g. a prior
/// "uniform:0,0.95") that breaks its rule; names the option.
class UsageError : public Error {
 public:
  UsageError(const std::string& option, const std::string& text, const std::string& rule);
};

/// A numerical failure that cannot be turned into a per-star flag.
class NumericError : public Error {
 public:
  NumericError(const std::string& star_id, const std::string& stage,
               const std::string& what);
};

}  // namespace heft
