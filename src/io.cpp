#include "heft/io.hpp"

#include <unistd.h>

#include <cerrno>
#include <charconv>
#include <cmath>
#include <cstring>
#include <iostream>
#include <system_error>

#include "heft/error.hpp"

namespace heft {

CsvReader::CsvReader(std::istream& in, std::string name, long first_line)
    : in_(in), name_(std::move(name)), next_line_(first_line) {}

bool CsvReader::next() {
  fields_.clear();
  columns_.clear();
  ends_.clear();
  storage_.clear();
  for (;;) {
    if (!std::getline(in_, buf_)) return false;
    line_ = next_line_++;
    if (first_) {
      first_ = false;
      if (buf_.size() >= 3 && buf_.compare(0, 3, "\xEF\xBB\xBF") == 0) buf_.erase(0, 3);
    }
    if (!buf_.empty() && buf_.back() == '\r') buf_.pop_back();
    std::size_t k = 0;
    while (k < buf_.size() && (buf_[k] == ' ' || buf_[k] == '\t')) ++k;
    if (k == buf_.size() || buf_[k] == '#') continue;
    break;
  }
  std::size_t i = 0;
  for (;;) {
    // One field starting at i, appended to storage_.
    while (i < buf_.size() && (buf_[i] == ' ' || buf_[i] == '\t')) ++i;
    columns_.push_back(static_cast<long>(i) + 1);
    if (i < buf_.size() && buf_[i] == '"') {
      ++i;
      for (;;) {
        if (i >= buf_.size()) {
          // A quoted field continues on the next physical line.
          std::string more;
          if (!std::getline(in_, more))
            throw InputError(name_, line_, columns_.back(), "unterminated quoted field");
          ++next_line_;
          if (!more.empty() && more.back() == '\r') more.pop_back();
          storage_ += '\n';
          buf_ += '\n';
          i = buf_.size();
          buf_ += more;
          continue;
        }
        const char c = buf_[i];
        if (c == '"' && i + 1 < buf_.size() && buf_[i + 1] == '"') {
          storage_ += '"';
          i += 2;
        } else if (c == '"') {
          ++i;
          break;
        } else {
          storage_ += c;
          ++i;
        }
      }
      while (i < buf_.size() && buf_[i] != ',') ++i;  // ignore junk after the quote
    } else {
      const std::size_t start = i;
      const std::size_t comma = buf_.find(',', i);
      i = comma == std::string::npos ? buf_.size() : comma;
      std::size_t end = i;
      while (end > start && (buf_[end - 1] == ' ' || buf_[end - 1] == '\t')) --end;
      storage_.append(buf_, start, end - start);
    }
    ends_.push_back(storage_.size());
    if (i >= buf_.size()) break;
    ++i;  // skip the comma
  }
  std::size_t begin = 0;
  for (std::size_t e : ends_) {
    fields_.emplace_back(storage_.data() + begin, e - begin);
    begin = e;
  }
  return true;
}

bool parse_double(std::string_view text, double& value) {
  if (!text.empty() && text.front() == '+') text.remove_prefix(1);
  if (text.empty()) return false;
  const char* first = text.data();
  const char* last = text.data() + text.size();
  auto [ptr, ec] = std::from_chars(first, last, value);
  if (ec == std::errc::result_out_of_range) {
    value = std::strtod(std::string(text).c_str(), nullptr);
    return true;
  }
  return ec == std::errc() && ptr == last;
}

void append_double(std::string& out, double value) {
  if (!std::isfinite(value)) return;
  char buf[32];
  auto [ptr, ec] = std::to_chars(buf, buf + sizeof buf, value);
  out.append(buf, ptr);
}

std::string format_double(double value) {
  std::string s;
  append_double(s, value);
  return s;
}

void append_csv_field(std::string& out, std::string_view field) {
  const bool quote = field.find_first_of(",\"\n\r") != std::string_view::npos ||
                     (!field.empty() && (field.front() == ' ' || field.front() == '#'));
  if (!quote) {
    out.append(field);
    return;
  }
  out += '"';
  for (char c : field) {
    if (c == '"') out += '"';
    out += c;
  }
  out += '"';
}

AtomicOutput::AtomicOutput(std::string path) : path_(std::move(path)) {
  if (path_.empty() || path_ == "-") {
    to_stdout_ = true;
    file_ = stdout;
    return;
  }
  const auto slash = path_.find_last_of('/');
  const std::string dir = slash == std::string::npos ? std::string() : path_.substr(0, slash + 1);
  const std::string base = slash == std::string::npos ? path_ : path_.substr(slash + 1);
  tmp_path_ = dir + "." + base + ".tmp." + std::to_string(::getpid());
  file_ = std::fopen(tmp_path_.c_str(), "wb");
  if (!file_)
    throw InputError(path_, 0, 0, std::string("cannot create output: ") + std::strerror(errno));
}

AtomicOutput::~AtomicOutput() {
  if (to_stdout_ || committed_) return;
  if (file_) std::fclose(file_);
  std::remove(tmp_path_.c_str());
}

void AtomicOutput::write(std::string_view data) {
  if (data.empty()) return;
  if (std::fwrite(data.data(), 1, data.size(), file_) != data.size())
    throw InputError(path_, 0, 0, std::string("write failed: ") + std::strerror(errno));
}

void AtomicOutput::commit() {
  if (committed_) return;
  if (to_stdout_) {
    std::fflush(stdout);
    committed_ = true;
    return;
  }
  const bool ok = std::fflush(file_) == 0 && ::fsync(::fileno(file_)) == 0;
  std::fclose(file_);
  file_ = nullptr;
  if (!ok || std::rename(tmp_path_.c_str(), path_.c_str()) != 0) {
    const std::string why = std::strerror(errno);
    std::remove(tmp_path_.c_str());
    committed_ = true;
    throw InputError(path_, 0, 0, "cannot write output: " + why);
  }
  committed_ = true;
}

InputFile::InputFile(const std::string& path) : name_(path) {
  if (path == "-") {
    in_ = &std::cin;
    name_ = "<stdin>";
    return;
  }
  file_ = std::make_unique<std::ifstream>(path, std::ios::binary);
  if (!*file_) throw InputError(path, 0, 0, std::string("cannot open: ") + std::strerror(errno));
  in_ = file_.get();
}

void write_file_atomic(const std::string& path, std::string_view data) {
  AtomicOutput out(path);
  out.write(data);
  out.commit();
}

}  // namespace heft

namespace heft {

ColumnTable::ColumnTable(std::istream& in, std::string name, const std::vector<std::string>& required,
                         long first_line)
    : csv_(in, std::move(name), first_line) {
  if (!csv_.next()) throw InputError(csv_.name(), 0, 0, "empty file: no header row");
  for (std::size_t f = 0; f < csv_.fields().size(); ++f) {
    std::string h(csv_.fields()[f]);
    if (index(h) >= 0)
      throw InputError(csv_.name(), csv_.line(), csv_.column(f), "duplicated column '" + h + "'");
    header_.push_back(std::move(h));
  }
  for (const auto& r : required)
    if (index(r) < 0) throw InputError(csv_.name(), csv_.line(), 0, "missing required column '" + r + "'");
}

bool ColumnTable::next() {
  if (!csv_.next()) return false;
  if (csv_.fields().size() != header_.size())
    throw InputError(csv_.name(), csv_.line(), 0,
                     "row has " + std::to_string(csv_.fields().size()) + " fields, header has " +
                         std::to_string(header_.size()));
  return true;
}

int ColumnTable::index(std::string_view name) const {
  for (std::size_t k = 0; k < header_.size(); ++k)
    if (header_[k] == name) return static_cast<int>(k);
  return -1;
}

double ColumnTable::number(int col) const {
  double v = 0.0;
  if (!parse_double(text(col), v) || !std::isfinite(v))
    fail(col, "not a finite number: '" + std::string(text(col)) + "'");
  return v;
}

void ColumnTable::fail(int col, const std::string& rule) const {
  throw InputError(csv_.name(), csv_.line(), csv_.column(col), "column '" + header_[col] + "': " + rule);
}

}  // namespace heft
