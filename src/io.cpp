#include "heft/io.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <csignal>
#include <cstdint>
#include <cstdlib>
#include <sstream>
#include <charconv>
#include <cmath>
#include <cstring>
#include <iostream>
#include <system_error>

#include <dragonbox/dragonbox.h>
#include <fast_float/fast_float.h>

#include "heft/error.hpp"

namespace heft {

CsvReader::CsvReader(std::istream& in, std::string name, long first_line)
    : in_(in), name_(std::move(name)), next_line_(first_line) {}

bool CsvReader::read_line(std::string& line) {
  line.clear();
  bool got = false;
  for (bool ended = false; !ended;) {
    if (block_pos_ == block_end_) {
      // Blocks grow from 4 KiB to 256 KiB: small tables (and one-row
      // streams) stay cheap, large ones are read in few calls.
      block_.resize(std::clamp<std::size_t>(2 * block_.size(), 4096, 262144));
      in_.read(block_.data(), static_cast<std::streamsize>(block_.size()));
      block_pos_ = 0;
      block_end_ = static_cast<std::size_t>(in_.gcount());
      if (block_end_ == 0) break;
    }
    got = true;
    const char* begin = block_.data() + block_pos_;
    const auto* nl = static_cast<const char*>(std::memchr(begin, '\n', block_end_ - block_pos_));
    ended = nl != nullptr;
    const char* end = ended ? nl : block_.data() + block_end_;
    line.append(begin, end);
    block_pos_ = static_cast<std::size_t>(end - block_.data()) + (ended ? 1 : 0);
  }
  if (!line.empty() && line.back() == '\r') line.pop_back();
  return got;
}

const std::vector<std::string_view>& CsvReader::fields() const {
  if (!fields_valid_) {
    fields_.clear();
    for (std::size_t f = 0; f < spans_.size(); ++f) fields_.push_back(field(f));
    fields_valid_ = true;
  }
  return fields_;
}

namespace {
// The first position from i on that is not a space or a tab.
std::size_t skip_blanks(const std::string& line, std::size_t i) {
  while (i < line.size() && (line[i] == ' ' || line[i] == '\t')) ++i;
  return i;
}

// The unquoted field of `line` that starts at i (after its leading spaces
// and tabs): its span without the trailing ones; i moves to the comma
// after it, or to the line's end.
std::pair<std::size_t, std::size_t> unquoted_field(const std::string& line, std::size_t& i) {
  const std::size_t start = i, comma = line.find(',', i);
  i = comma == std::string::npos ? line.size() : comma;
  std::size_t end = i;
  while (end > start && (line[end - 1] == ' ' || line[end - 1] == '\t')) --end;
  return {start, end};
}

// Commas in t, counted in byte lanes 255 bytes at a time (std::count's
// 64-bit lanes took most of a row that is passed over).
std::size_t count_commas(std::string_view t) {
  std::size_t total = 0;
  for (std::size_t i = 0; i < t.size(); i += 255) {
    const std::size_t m = std::min<std::size_t>(t.size() - i, 255);
    unsigned char n = 0;  // at most 255: the sum of the lanes cannot wrap
    for (std::size_t k = 0; k < m; ++k) n += t[i + k] == ',' ? 1 : 0;
    total += n;
  }
  return total;
}
}  // namespace

bool CsvReader::next() { return next_record(std::string::npos); }

bool CsvReader::next_first(std::size_t n) { return next_record(n); }

bool CsvReader::next_record(std::size_t n_first) {
  fields_valid_ = false;
  columns_.clear();
  spans_.clear();
  storage_.clear();
  rest_ = std::string::npos;
  for (;;) {
    if (!read_line(buf_)) return false;
    line_ = next_line_++;
    if (first_) {
      first_ = false;
      if (buf_.size() >= 3 && buf_.compare(0, 3, "\xEF\xBB\xBF") == 0) buf_.erase(0, 3);
    }
    const std::size_t k = skip_blanks(buf_, 0);
    if (k == buf_.size()) continue;
    if (buf_[k] == '#') {
      if (guard_fields_ > 0 && static_cast<std::size_t>(std::count(buf_.begin(), buf_.end(), ',')) + 1 == guard_fields_)
        throw InputError(name_, line_, static_cast<long>(k) + 1,
                         "a line starting with '#' has the header's " + std::to_string(guard_fields_) +
                             " fields: quote an id that starts with '#' (\"#...\"), or delete a commented-out row");
      continue;
    }
    break;
  }
  // Plain ASCII rows (nearly all) need no per-field check; the OR over
  // all bytes has no early exit, so that it vectorises.
  unsigned char high = 0;
  for (char c : buf_) high |= static_cast<unsigned char>(c);
  // Without quotes (nearly every row) the fields are spans of the line
  // itself, which becomes the storage; else they are copied, unescaped.
  if (buf_.find('"') == std::string::npos) {
    // A plain line's fields are its commas plus one: those after the first
    // n_first are counted, not split, unless they need the UTF-8 check.
    const std::size_t rest = split_plain(buf_, 0, high & 0x80 ? std::string::npos : n_first);
    count_ = spans_.size();
    if (rest != std::string::npos) {
      rest_ = rest;
      count_ += 1 + count_commas(std::string_view(buf_).substr(rest));
    }
    storage_.swap(buf_);
  } else {
    for (std::size_t i = 0;;) {
      i = skip_blanks(buf_, i);
      columns_.push_back(static_cast<long>(i) + 1);
      if (i < buf_.size() && buf_[i] == '"') {
        const std::size_t begin = storage_.size();
        read_quoted(i);
        spans_.emplace_back(begin, storage_.size());
      } else {
        const auto [start, end] = unquoted_field(buf_, i);
        spans_.emplace_back(storage_.size(), storage_.size() + (end - start));
        storage_.append(buf_, start, end - start);
      }
      if (i++ >= buf_.size()) break;  // past the comma
    }
    count_ = spans_.size();
    for (char c : storage_) high |= static_cast<unsigned char>(c);
  }
  if (high & 0x80)
    for (std::size_t f = 0; f < spans_.size(); ++f)
      if (!valid_utf8(field(f))) throw InputError(name_, line_, column(f), "field is not valid UTF-8 text");
  return true;
}

std::size_t CsvReader::split_plain(const std::string& line, std::size_t i, std::size_t n) {
  for (std::size_t f = 0; f < n; ++f) {
    i = skip_blanks(line, i);
    spans_.push_back(unquoted_field(line, i));
    if (i++ >= line.size()) return std::string::npos;  // past the comma
  }
  return i;
}

void CsvReader::complete() {
  if (rest_ == std::string::npos) return;
  split_plain(storage_, rest_, std::string::npos);
  rest_ = std::string::npos;
  fields_valid_ = false;
}

void CsvReader::read_quoted(std::size_t& i) {
  ++i;
  for (;;) {
    if (i >= buf_.size()) {
      // A quoted field continues on the next physical line.
      std::string more;
      if (!read_line(more)) throw InputError(name_, line_, columns_.back(), "unterminated quoted field");
      ++next_line_;
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
}

void CsvReader::take_record(std::string& text, std::vector<std::pair<std::size_t, std::size_t>>& spans,
                            std::vector<long>& columns) {
  complete();
  fields_valid_ = false;
  text.swap(storage_);
  spans.swap(spans_);
  columns.swap(columns_);
  storage_.clear();  // the caller's old buffers: nothing of them is read again
  spans_.clear();
  columns_.clear();
}

bool valid_utf8(std::string_view t) {
  const auto* p = reinterpret_cast<const unsigned char*>(t.data());
  const std::size_t n = t.size();
  for (std::size_t i = 0; i < n;) {
    const unsigned c = p[i];
    if (c < 0x80) {
      ++i;
      continue;
    }
    // Lead byte: sequence length and the allowed range of the second byte
    // (RFC 3629, Table 3-7 of the Unicode standard).
    std::size_t len;
    unsigned lo = 0x80, hi = 0xBF;
    if (c >= 0xC2 && c <= 0xDF) len = 2;
    else if (c == 0xE0) len = 3, lo = 0xA0;
    else if (c >= 0xE1 && c <= 0xEC) len = 3;
    else if (c == 0xED) len = 3, hi = 0x9F;
    else if (c >= 0xEE && c <= 0xEF) len = 3;
    else if (c == 0xF0) len = 4, lo = 0x90;
    else if (c >= 0xF1 && c <= 0xF3) len = 4;
    else if (c == 0xF4) len = 4, hi = 0x8F;
    else return false;
    if (i + len > n || p[i + 1] < lo || p[i + 1] > hi) return false;
    for (std::size_t k = 2; k < len; ++k)
      if (p[i + k] < 0x80 || p[i + k] > 0xBF) return false;
    i += len;
  }
  return true;
}

std::string clip_for_message(std::string_view text, std::size_t max_bytes) {
  if (text.size() <= max_bytes) return std::string(text);
  std::size_t cut = max_bytes;
  while (cut > 0 && (static_cast<unsigned char>(text[cut]) & 0xC0) == 0x80) --cut;  // UTF-8 boundary
  return std::string(text.substr(0, cut)) + "... (" + std::to_string(text.size()) + " bytes)";
}

namespace {
// A field of the form [-]digits[.digits] with at most 19 digits (nearly
// every number of an astrometric table) into value; false for any other
// form, which parse_double hands to fast_float's own reader. The digits are
// gathered here, eight at a time where the field allows (fast_float's SWAR
// steps; the last one to seven fraction digits by the eight bytes that end
// the field, the digits before them replaced by '0'), and converted by
// fast_float's Eisel-Lemire step (Lemire 2021), the conversion
// fast_float::from_chars makes of the same digits: 16 against 20 ns a
// number on a star table's fields. That step decides the rounding of
// w x 10^q for every q in [-27, 55] (fast_float's "safe exponent" range, so
// always here); should it ever not (power2 < 0), fast_float's reader does.
bool parse_plain_decimal(const char* first, const char* last, double& value) {
  static constexpr std::uint64_t kTenTo[8] = {1, 10, 100, 1000, 10000, 100000, 1000000, 10000000};
  const auto digit = [](char c) { return static_cast<unsigned char>(c - '0'); };
  const char* p = first;
  const bool negative = *p == '-';
  p += negative;
  const char* const integer = p;
  std::uint64_t w = 0;
  for (; p != last && digit(*p) < 10; ++p) w = 10 * w + digit(*p);
  const long integer_digits = p - integer;
  if (integer_digits == 0 || integer_digits > 19) return false;
  long fraction_digits = 0;
  if (p != last) {
    if (*p != '.') return false;
    ++p;
    fraction_digits = last - p;
    if (fraction_digits == 0 || integer_digits + fraction_digits > 19) return false;
    for (; last - p >= 8; p += 8) {
      const std::uint64_t eight = fast_float::read_u64(p);
      if (!fast_float::is_made_of_eight_digits_fast(eight)) return false;
      w = w * 100000000 + fast_float::parse_eight_digits_unrolled(eight);
    }
    if (const long n = last - p; n > 0 && last - first >= 8) {
      const std::uint64_t keep = ~std::uint64_t{0} << (8 * (8 - n));  // the field's last n bytes
      const std::uint64_t eight = (fast_float::read_u64(last - 8) & keep) | (0x3030303030303030ULL & ~keep);
      if (!fast_float::is_made_of_eight_digits_fast(eight)) return false;
      w = w * kTenTo[n] + fast_float::parse_eight_digits_unrolled(eight);
    } else {
      for (; p != last; ++p) {
        if (digit(*p) >= 10) return false;
        w = 10 * w + digit(*p);
      }
    }
  }
  const fast_float::adjusted_mantissa am =
      fast_float::compute_float<fast_float::binary_format<double>>(-fraction_digits, w);
  if (am.power2 < 0) return false;
  fast_float::to_float(negative, am, value);
  return true;
}
}  // namespace

bool parse_double(std::string_view text, double& value) {
  if (!text.empty() && text.front() == '+') text.remove_prefix(1);
  if (text.empty()) return false;
  const char* last = text.data() + text.size();
  if (parse_plain_decimal(text.data(), last, value)) return true;
  // fast_float (Lemire 2021, "Number Parsing at a Gigabyte per Second"),
  // the algorithm inside libstdc++ 12's std::from_chars, called without
  // the library's wrapper. Out of range it rounds to +-inf or +-0 (or the
  // subnormal) as strtod does, where std::from_chars reports an error and
  // leaves the value unset.
  const auto [ptr, ec] = fast_float::from_chars(text.data(), last, value);
  return ptr == last && ec == std::errc();  // the whole field must be the number
}

namespace {
constexpr char kDigitPairs[] =
    "00010203040506070809101112131415161718192021222324252627282930313233343536373839"
    "40414243444546474849505152535455565758596061626364656667686970717273747576777879"
    "8081828384858687888990919293949596979899";
constexpr std::uint64_t kPow10[20] = {1ULL, 10ULL, 100ULL, 1000ULL, 10000ULL, 100000ULL, 1000000ULL,
                                      10000000ULL, 100000000ULL, 1000000000ULL, 10000000000ULL,
                                      100000000000ULL, 1000000000000ULL, 10000000000000ULL,
                                      100000000000000ULL, 1000000000000000ULL, 10000000000000000ULL,
                                      100000000000000000ULL, 1000000000000000000ULL,
                                      10000000000000000000ULL};

// Decimal digits of v > 0: from its bit length times log10(2) (1233 / 4096),
// then one comparison.
int decimal_length(std::uint64_t v) {
  const int t = (64 - __builtin_clzll(v | 1)) * 1233 >> 12;
  return t + (v >= kPow10[t] ? 1 : 0);
}

// The eight digits of v < 10^8 at out.
void write_eight_digits(char* out, std::uint32_t v) {
  const std::uint32_t hi = v / 10000, lo = v % 10000;
  std::memcpy(out, kDigitPairs + 2 * (hi / 100), 2);
  std::memcpy(out + 2, kDigitPairs + 2 * (hi % 100), 2);
  std::memcpy(out + 4, kDigitPairs + 2 * (lo / 100), 2);
  std::memcpy(out + 6, kDigitPairs + 2 * (lo % 100), 2);
}

// The decimal digits of v, ending just before end.
void write_digits(char* end, std::uint64_t v) {
  for (; v >= 100000000; v /= 100000000, end -= 8)
    write_eight_digits(end - 8, static_cast<std::uint32_t>(v % 100000000));
  auto w = static_cast<std::uint32_t>(v);
  for (; w >= 100; w /= 100, end -= 2) std::memcpy(end - 2, kDigitPairs + 2 * (w % 100), 2);
  if (w >= 10) std::memcpy(end - 2, kDigitPairs + 2 * w, 2);
  else end[-1] = static_cast<char>('0' + w);
}
}  // namespace

// The characters of std::to_chars(first, last, value) (C++17
// [charconv.to.chars]: the shortest digits that read back as value, in
// fixed or scientific notation, whichever is shorter, fixed on a tie), in
// two thirds of its time (24.5 against 37.9 ns a number on a screened
// table's numbers): the digits by Dragonbox (Jeon 2020, "Dragonbox:
// A New Floating-Point Binary-to-Decimal Conversion Algorithm"), which gives
// the same shortest digits as libstdc++'s Ryu, laid out here. Fixed
// notation of an integer that needs zeros after its digits goes to
// std::to_chars, which writes such integers' exact value (tests/io_test.cpp
// compares the two on two million values).
char* write_double(char* first, double value) {
  if (!std::isfinite(value)) return first;
  char* p = first;
  if (value == 0.0) {
    if (std::signbit(value)) *p++ = '-';
    *p++ = '0';
    return p;
  }
  const auto dec = jkj::dragonbox::to_decimal(value);
  const int n = decimal_length(dec.significand), e = dec.exponent;  // |value| = significand x 10^e
  const int e_sci = e + n - 1, abs_sci = e_sci < 0 ? -e_sci : e_sci;
  const int sci_chars = n + (n > 1 ? 1 : 0) + 2 + (abs_sci >= 100 ? 3 : 2);
  const int fixed_chars = e >= 0 ? n + e : (n + e > 0 ? n + 1 : 2 - e);
  if (fixed_chars <= sci_chars && e > 0) return std::to_chars(first, first + kDoubleCharsMax, value).ptr;
  if (dec.is_negative) *p++ = '-';
  if (fixed_chars <= sci_chars) {
    if (e == 0) {
      write_digits(p + n, dec.significand);
      p += n;
    } else if (n + e > 0) {  // d.ddd: the digits written one place right, the integer part moved back
      write_digits(p + n + 1, dec.significand);
      std::memmove(p, p + 1, n + e);
      p[n + e] = '.';
      p += n + 1;
    } else {  // 0.000ddd
      p[0] = '0';
      p[1] = '.';
      std::memset(p + 2, '0', -(n + e));
      write_digits(p + 2 - e, dec.significand);
      p += 2 - e;
    }
  } else {  // d.ddde+XX
    write_digits(p + n + 1, dec.significand);
    p[0] = p[1];
    if (n > 1) p[1] = '.';
    p += n + (n > 1 ? 1 : 0);
    *p++ = 'e';
    *p++ = e_sci < 0 ? '-' : '+';
    int rest = abs_sci;
    if (rest >= 100) {
      *p++ = static_cast<char>('0' + rest / 100);
      rest %= 100;
    }
    std::memcpy(p, kDigitPairs + 2 * rest, 2);
    p += 2;
  }
  return p;
}

void append_double(std::string& out, double value) {
  char buf[kDoubleCharsMax];
  out.append(buf, write_double(buf, value));
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

namespace {

std::string system_reason() { return std::strerror(errno); }

std::string dir_of(const std::string& p) {
  const auto slash = p.find_last_of('/');
  if (slash == std::string::npos) return ".";
  return slash == 0 ? "/" : p.substr(0, slash);
}

std::string base_of(const std::string& p) {
  const auto slash = p.find_last_of('/');
  return slash == std::string::npos ? p : p.substr(slash + 1);
}

// Temporary files of live outputs, for the signal handler: a fixed table of
// heap strings that the handler only reads (unlink is async-signal-safe).
constexpr int kTempSlots = 64;
std::atomic<char*> g_temp_paths[kTempSlots];

int register_temp(const std::string& path) {
  char* copy = ::strdup(path.c_str());
  if (!copy) return -1;
  for (int k = 0; k < kTempSlots; ++k) {
    char* expected = nullptr;
    if (g_temp_paths[k].compare_exchange_strong(expected, copy)) return k;
  }
  std::free(copy);
  return -1;  // table full: the destructor still removes the file
}

void unregister_temp(int slot) {
  if (slot >= 0) std::free(g_temp_paths[slot].exchange(nullptr));
}

extern "C" void remove_temps_and_reraise(int sig) {
  for (auto& slot : g_temp_paths)
    if (const char* p = slot.load()) ::unlink(p);
  std::signal(sig, SIG_DFL);
  std::raise(sig);
}

}  // namespace

OutputTarget resolve_output(const std::string& path) {
  OutputTarget t;
  if (path.empty() || path == "-") {
    t.identity = "<stdout>";
    return t;
  }
  std::string p = path;
  struct stat st {};
  for (int hop = 0;; ++hop) {
    if (::lstat(p.c_str(), &st) != 0) {
      if (errno != ENOENT) throw InputError(path, 0, 0, "cannot use as output: " + system_reason());
      t.kind = OutputTarget::Kind::kFile;  // a new file (or a dangling link's target)
      break;
    }
    if (!S_ISLNK(st.st_mode)) {
      if (S_ISDIR(st.st_mode)) throw InputError(path, 0, 0, "cannot write output: is a directory");
      t.kind = S_ISREG(st.st_mode) ? OutputTarget::Kind::kFile : OutputTarget::Kind::kDirect;
      break;
    }
    if (hop == 40) throw InputError(path, 0, 0, "cannot write output: too many levels of symbolic links");
    std::string link(4096, '\0');
    const ssize_t n = ::readlink(p.c_str(), link.data(), link.size());
    if (n < 0) throw InputError(path, 0, 0, "cannot read symbolic link: " + system_reason());
    link.resize(static_cast<std::size_t>(n));
    p = link.front() == '/' ? link : dir_of(p) + "/" + link;
  }
  t.path = p;
  if (t.kind == OutputTarget::Kind::kDirect) {
    if (S_ISCHR(st.st_mode)) return t;  // /dev/null twice is fine
    t.identity = "inode:" + std::to_string(st.st_dev) + ":" + std::to_string(st.st_ino);
    return t;
  }
  char* dir = ::realpath(dir_of(p).c_str(), nullptr);
  if (!dir) throw InputError(path, 0, 0, "cannot write output: folder " + dir_of(p) + ": " + system_reason());
  t.identity = std::string(dir) + "/" + base_of(p);
  std::free(dir);
  return t;
}

void remove_outputs_on_signals() {
  for (int sig : {SIGINT, SIGTERM, SIGHUP, SIGPIPE}) std::signal(sig, remove_temps_and_reraise);
}

AtomicOutput::AtomicOutput(std::string path) : path_(std::move(path)), target_(resolve_output(path_)) {
  switch (target_.kind) {
    case OutputTarget::Kind::kStdout:
      file_ = stdout;
      return;
    case OutputTarget::Kind::kDirect: {
      // No O_CREAT, no O_TRUNC: a device or FIFO is written as it is.
      const int fd = ::open(target_.path.c_str(), O_WRONLY | O_CLOEXEC);
      if (fd < 0 || !(file_ = ::fdopen(fd, "wb"))) {
        if (fd >= 0) ::close(fd);
        throw InputError(path_, 0, 0, "cannot open output: " + system_reason());
      }
      return;
    }
    case OutputTarget::Kind::kFile: {
      std::string tmpl = dir_of(target_.path) + "/." + base_of(target_.path) + ".heft-XXXXXX";
      const int fd = ::mkstemp(tmpl.data());
      if (fd < 0) throw InputError(path_, 0, 0, "cannot create output: " + system_reason());
      tmp_path_ = tmpl;
      temp_slot_ = register_temp(tmp_path_);
      // mkstemp makes the file 0600: give it the mode a plain create (or the
      // file it replaces) would have.
      struct stat st {};
      mode_t mode;
      if (::stat(target_.path.c_str(), &st) == 0) {
        mode = st.st_mode & 07777;
      } else {
        const mode_t mask = ::umask(0);
        ::umask(mask);
        mode = 0666 & ~mask;
      }
      if (::fchmod(fd, mode) != 0 || !(file_ = ::fdopen(fd, "wb"))) {
        const std::string why = system_reason();
        ::close(fd);
        ::unlink(tmp_path_.c_str());
        unregister_temp(temp_slot_);
        throw InputError(path_, 0, 0, "cannot create output: " + why);
      }
      return;
    }
  }
}

AtomicOutput::~AtomicOutput() {
  if (committed_ || is_stdout()) return;
  if (file_) std::fclose(file_);
  if (!tmp_path_.empty()) ::unlink(tmp_path_.c_str());
  unregister_temp(temp_slot_);
}

void AtomicOutput::fail(const std::string& what) {
  const std::string why = system_reason();
  throw InputError(is_stdout() ? "<stdout>" : path_, 0, 0, what + ": " + why);
}

void AtomicOutput::write(std::string_view data) {
  if (data.empty()) return;
  if (committed_) throw InputError(path_, 0, 0, "write after commit");
  if (std::fwrite(data.data(), 1, data.size(), file_) != data.size()) fail("write failed");
  if (target_.kind != OutputTarget::Kind::kFile) return;
  // Start the disk's writeback every kWritebackBytes, so that commit()'s
  // fsync has little left to wait for (advice: its failure is harmless,
  // fsync reports any real error).
  written_ += data.size();
  if (written_ - started_ >= kWritebackBytes) {
    if (std::fflush(file_) != 0) fail("write failed");
    ::sync_file_range(::fileno(file_), static_cast<off_t>(started_), static_cast<off_t>(written_ - started_),
                      SYNC_FILE_RANGE_WRITE);
    started_ = written_;
  }
}

void AtomicOutput::commit() {
  if (committed_) return;
  committed_ = true;
  if (is_stdout()) {
    if (std::fflush(stdout) != 0 || std::ferror(stdout)) fail("write failed");
    return;
  }
  std::FILE* f = file_;
  file_ = nullptr;
  const bool flushed = std::fflush(f) == 0 && !std::ferror(f);
  int saved = errno;
  const bool synced = target_.kind != OutputTarget::Kind::kFile || ::fsync(::fileno(f)) == 0;
  if (flushed && !synced) saved = errno;
  const bool closed = std::fclose(f) == 0;
  if (flushed && synced && !closed) saved = errno;
  bool ok = flushed && synced && closed;
  if (ok && target_.kind == OutputTarget::Kind::kFile) {
    ok = std::rename(tmp_path_.c_str(), target_.path.c_str()) == 0;
    if (!ok) saved = errno;
  }
  if (target_.kind == OutputTarget::Kind::kFile) {
    if (!ok) ::unlink(tmp_path_.c_str());
    unregister_temp(temp_slot_);
    temp_slot_ = -1;
  }
  if (!ok) {
    errno = saved;
    fail("cannot write output");
  }
}

InputFile::InputFile(const std::string& path) : name_(path) {
  if (path == "-") {
    in_ = &std::cin;
    name_ = "<stdin>";
    return;
  }
  struct stat st {};
  if (::stat(path.c_str(), &st) == 0 && S_ISDIR(st.st_mode)) throw InputError(path, 0, 0, "cannot read: is a directory");
  file_ = std::make_unique<std::ifstream>(path, std::ios::binary);
  if (!*file_) throw InputError(path, 0, 0, std::string("cannot open: ") + std::strerror(errno));
  in_ = file_.get();
}

nlohmann::json read_json(std::istream& in, const std::string& name) {
  std::ostringstream buf;
  buf << in.rdbuf();
  const std::string text = buf.str();
  // Line and column (1-based, in bytes) of byte offset `pos` (0-based).
  auto fail_at = [&](std::size_t pos, const std::string& rule) -> nlohmann::json {
    pos = std::min(pos, text.size());
    long line = 1, col = 1;
    for (std::size_t k = 0; k < pos; ++k) {
      if (text[k] == '\n') ++line, col = 1;
      else ++col;
    }
    throw InputError(name, line, col, rule);
  };
  // nlohmann's DOM parser drops the position of a number overflow (error
  // 406); the SAX form of the same parser keeps it.
  struct Sax : nlohmann::detail::json_sax_dom_parser<nlohmann::json> {
    using json_sax_dom_parser::json_sax_dom_parser;
    std::size_t pos = 0;
    std::string what;
    bool parse_error(std::size_t position, const std::string&, const nlohmann::detail::exception& ex) {
      pos = position;
      what = ex.what();
      return false;
    }
  };
  nlohmann::json j;
  Sax sax(j, false);
  if (text.empty()) throw InputError(name, 0, 0, "malformed JSON: empty file");
  if (!nlohmann::json::sax_parse(text, &sax) || sax.is_errored()) {
    std::string what = sax.what;
    // Keep the library's reason, without its "[json.exception...]" tag.
    if (const auto close = what.find("] "); what.rfind("[json.exception", 0) == 0 && close != std::string::npos)
      what = what.substr(close + 2);
    if (const auto colon = what.find(": "); what.rfind("parse error at line", 0) == 0 && colon != std::string::npos)
      what = what.substr(colon + 2);  // we name the line and column ourselves
    return fail_at(sax.pos > 0 ? sax.pos - 1 : 0, "malformed JSON: " + what);
  }
  return j;
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
      throw InputError(csv_.name(), csv_.line(), csv_.column(f), "duplicated column '" + clip_for_message(h) + "'");
    header_.push_back(std::move(h));
  }
  if (header_.front() == "id") csv_.guard_commented_rows(header_.size());
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
    fail(col, "not a finite number: '" + clip_for_message(text(col)) + "'");
  return v;
}

void ColumnTable::fail(int col, const std::string& rule) const {
  throw InputError(csv_.name(), csv_.line(), csv_.column(col), "column '" + header_[col] + "': " + rule);
}

nlohmann::ordered_json json_number(double value) {
  return std::isfinite(value) ? nlohmann::ordered_json(value) : nlohmann::ordered_json(nullptr);
}

nlohmann::ordered_json quantiles_json(std::initializer_list<std::pair<double, double>> percent_value) {
  nlohmann::ordered_json j = nlohmann::ordered_json::object();
  for (const auto& [pct, v] : percent_value) j["q" + format_double(pct)] = json_number(v);
  return j;
}

std::string header_line(const std::vector<ColumnUnit>& cols) {
  std::string h;
  for (const auto& c : cols) h += (h.empty() ? "" : ",") + c.name;
  return h + '\n';
}

std::vector<std::string> column_names(const std::vector<ColumnUnit>& cols) {
  std::vector<std::string> n;
  for (const auto& c : cols) n.push_back(c.name);
  return n;
}

nlohmann::ordered_json units_json(const std::vector<ColumnUnit>& cols) {
  nlohmann::ordered_json j = nlohmann::ordered_json::object();
  for (const auto& c : cols)
    if (!c.unit.empty()) j[c.name] = c.unit;
  return j;
}

}  // namespace heft
