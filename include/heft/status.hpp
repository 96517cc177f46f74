#pragma once
/// \file status.hpp
/// The state of one row of a batch (a star): ok, bad input or a numerical
/// failure, with a reason code, and the informational notes that never
/// change it. One type for every table and JSON heft writes, so a status is
/// never built or compared as a string.

#include <string>
#include <string_view>
#include <vector>

namespace heft {

enum class RowState {
  kOk,        ///< computed
  kBadInput,  ///< the row's input breaks a rule (exit 4)
  kFailed,    ///< a numerical step failed for this row (exit 4)
};

/// A row state and its reason code (snake_case, empty when ok).
struct RowStatus {
  RowState state = RowState::kOk;
  std::string reason;

  static RowStatus bad_input(std::string reason) { return {RowState::kBadInput, std::move(reason)}; }
  static RowStatus failed(std::string reason) { return {RowState::kFailed, std::move(reason)}; }
  bool ok() const { return state == RowState::kOk; }
  /// The text written in tables and JSON: "ok", "bad_input:<reason>" or
  /// "failed:<reason>".
  std::string text() const;
  /// Reads text(); false when `text` is none of its forms.
  static bool parse(std::string_view text, RowStatus& status);
  friend bool operator==(const RowStatus&, const RowStatus&) = default;
};

/// Informational flags of a row, in the order they were raised (never
/// change the exit code), e.g. "no_rv".
using Notes = std::vector<std::string>;

/// Notes as written in a CSV field: joined with '|'.
std::string join_notes(const Notes& notes);
/// The inverse of join_notes (an empty field is no note).
Notes split_notes(std::string_view field);
/// Appends `note` unless it is already there.
void add_note(Notes& notes, std::string note);
bool has_note(const Notes& notes, std::string_view note);

}  // namespace heft
