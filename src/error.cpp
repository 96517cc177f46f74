#include "heft/error.hpp"

namespace heft {
namespace {
std::string where(const std::string& file, long line, long column) {
  std::string s = file.empty() ? std::string("<input>") : file;
  if (line > 0) s.append(1, ':').append(std::to_string(line));
  if (line > 0 && column > 0) s.append(1, ':').append(std::to_string(column));
  return s;
}
}  // namespace

InputError::InputError(std::string file, long line, long column, const std::string& rule)
    : Error(file.empty() && line == 0 ? rule : where(file, line, column) + ": " + rule),
      file_(std::move(file)),
      line_(line),
      column_(column) {}

InputError::InputError(std::string file, std::string message)
    : Error(std::move(message)), file_(std::move(file)) {}

InputError InputError::at_json(std::string file, const std::string& json_path,
                               const std::string& rule) {
  std::string msg = where(file, 0, 0) + ": at " + (json_path.empty() ? "/" : json_path) + ": " + rule;
  return InputError(std::move(file), std::move(msg));
}

UsageError::UsageError(const std::string& option, const std::string& text, const std::string& rule)
    : Error("option " + option + " '" + text + "': " + rule) {}

NumericError::NumericError(const std::string& star_id, const std::string& stage,
                           const std::string& what)
    : Error("star " + star_id + ", " + stage + ": " + what) {}

}  // namespace heft
