#pragma once
// Shared part of the libFuzzer targets: one reader per target, fed the
// fuzzer's bytes as a file. A heft::Error is the reader's correct answer to
// bad input; anything else escaping (another exception, a crash, a
// sanitizer report) is a finding.
#include <cstddef>
#include <cstdint>
#include <sstream>
#include <string>
#include <string_view>

#include "heft/error.hpp"

namespace heft::fuzz {

inline std::string bytes(const std::uint8_t* data, std::size_t size) {
  return std::string(reinterpret_cast<const char*>(data), size);
}

/// Runs `read` on an input stream over `text`; heft errors are expected.
template <class Read>
void guarded(const std::string& text, Read read) {
  std::istringstream in(text);
  try {
    read(in);
  } catch (const heft::Error&) {
  }
}

/// Splits `text` at the first line "----" (for targets that read two files).
inline std::pair<std::string, std::string> split_two(const std::string& text) {
  const auto cut = text.find("\n----\n");
  if (cut == std::string::npos) return {text, std::string()};
  return {text.substr(0, cut + 1), text.substr(cut + 6)};
}

}  // namespace heft::fuzz
