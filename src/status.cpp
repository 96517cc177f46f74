#include "heft/status.hpp"

#include <algorithm>

namespace heft {
namespace {
constexpr std::string_view kBadInput = "bad_input:", kFailed = "failed:";
}  // namespace

std::string RowStatus::text() const {
  switch (state) {
    case RowState::kOk: return "ok";
    case RowState::kBadInput: return std::string(kBadInput) + reason;
    case RowState::kFailed: return std::string(kFailed) + reason;
  }
  return "";
}

bool RowStatus::parse(std::string_view text, RowStatus& s) {
  if (text == "ok") {
    s = {};
    return true;
  }
  for (auto [prefix, state] : {std::pair{kBadInput, RowState::kBadInput}, std::pair{kFailed, RowState::kFailed}})
    if (text.size() > prefix.size() && text.substr(0, prefix.size()) == prefix) {
      s = {state, std::string(text.substr(prefix.size()))};
      return true;
    }
  return false;
}

std::string join_notes(const Notes& notes) {
  std::string s;
  for (const auto& n : notes) s += (s.empty() ? "" : "|") + n;
  return s;
}

Notes split_notes(std::string_view field) {
  Notes out;
  while (!field.empty()) {
    const auto bar = field.find('|');
    out.emplace_back(field.substr(0, bar));
    if (bar == std::string_view::npos) break;
    field.remove_prefix(bar + 1);
  }
  return out;
}

void add_note(Notes& notes, std::string note) {
  if (!has_note(notes, note)) notes.push_back(std::move(note));
}

bool has_note(const Notes& notes, std::string_view note) {
  return std::find(notes.begin(), notes.end(), note) != notes.end();
}

}  // namespace heft
