#include "heft/tablefile.hpp"

#include <dlfcn.h>
#include <fitsio.h>
#include <sys/stat.h>
#include <unistd.h>
#include <yaml-cpp/yaml.h>

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <iterator>
#include <limits>
#include <map>

#include "heft/error.hpp"
#include "heft/unitconv.hpp"

namespace heft {
namespace {

std::string lower(std::string_view s) {
  std::string out(s);
  for (char& c : out) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return out;
}

// ---------------------------------------------------------------- reading

// A table read from FITS or ECSV: column names, units, and the rows as text
// fields ("" = absent).
struct TextTable {
  std::vector<std::string> names, units;
  std::vector<std::vector<std::string>> rows;
  std::vector<std::pair<std::string, std::string>> meta;  // heft metadata, in order
  std::string kind;                                       // "heft-rank" etc.; "" when not heft's
};

// cfitsio is opened on the first FITS table, not linked: with its chain of
// shared libraries (curl, gnutls, krb5, ldap ...) it made up half the start
// of every heft command, FITS or not (docs/performance.md, "Start of a
// command"). The functions heft calls, by their names in fitsio.h (macros
// for cfitsio's short names, which are what the library exports).
#define HEFT_CFITSIO_FUNCTIONS(X)                                                                                  \
  X(fits_close_file) X(fits_create_file) X(fits_create_tbl) X(fits_free_memory) X(fits_get_coltype)               \
  X(fits_get_errstatus) X(fits_get_hdrspace) X(fits_get_num_cols) X(fits_get_num_rowsll) X(fits_make_keyn)        \
  X(fits_movabs_hdu) X(fits_open_memfile) X(fits_open_table) X(fits_read_col_str) X(fits_read_colnull)            \
  X(fits_read_key_lng) X(fits_read_key_longstr) X(fits_read_key_str) X(fits_read_keyn) X(fits_write_col)          \
  X(fits_write_key_longstr) X(fits_write_key_str) X(fits_write_tblbytes)
#define HEFT_STRING(x) #x
#define HEFT_NAME_OF(x) HEFT_STRING(x)

struct Cfitsio {
#define HEFT_MEMBER(f) decltype(&::f) f = nullptr;
  HEFT_CFITSIO_FUNCTIONS(HEFT_MEMBER)
#undef HEFT_MEMBER
  std::string error;  ///< why it could not be loaded; empty when it was
};

Cfitsio load_cfitsio() {
  Cfitsio api;
  void* lib = dlopen(HEFT_CFITSIO_SONAME, RTLD_NOW | RTLD_LOCAL);  // never closed
  if (!lib) {
    api.error = dlerror();
    return api;
  }
#define HEFT_BIND(f)                                                      \
  api.f = reinterpret_cast<decltype(api.f)>(dlsym(lib, HEFT_NAME_OF(f))); \
  if (!api.f) api.error = std::string("no function ") + HEFT_NAME_OF(f);
  HEFT_CFITSIO_FUNCTIONS(HEFT_BIND)
#undef HEFT_BIND
  return api;
}
#undef HEFT_NAME_OF
#undef HEFT_STRING
#undef HEFT_CFITSIO_FUNCTIONS

// cfitsio's functions, loaded on first use; `file` is the table read that
// needs them ("" for one written), named in the error when the library
// cannot be loaded.
const Cfitsio& cfitsio(const std::string& file) {
  static const Cfitsio api = load_cfitsio();
  if (!api.error.empty())
    throw InputError(file, 0, 0,
                     "FITS tables need cfitsio's shared library " HEFT_CFITSIO_SONAME ", which could not be loaded (" +
                         api.error + ")");
  return api;
}

[[noreturn]] void fits_fail(const std::string& file, int status, const std::string& what) {
  char text[FLEN_STATUS] = {0};
  cfitsio(file).fits_get_errstatus(status, text);
  throw InputError(file, 0, 0, what + ": " + text + " (cfitsio status " + std::to_string(status) + ")");
}

// cfitsio 4.2 overruns a buffer (and aborts) on a table keyword whose
// string value is not quoted. Before cfitsio sees a file, every header card
// of the table keywords with string values (FITS standard 4.0, Sect. 4.2.1:
// a quoted string that closes within the card) is checked.
void check_fits_cards(std::string_view data, const std::string& name) {
  static const char* string_keys[] = {"XTENSION", "EXTNAME", "TTYPE", "TFORM", "TUNIT", "TDISP", "TDIM"};
  for (std::size_t at = 0; at + 80 <= data.size(); at += 80) {
    const std::string_view card = data.substr(at, 80);
    if (card[8] != '=') continue;  // cfitsio reads "KEY     =value" as a value card too
    bool string_key = false;
    for (const char* k : string_keys) {
      const std::string_view key(k);
      if (card.substr(0, key.size()) != key) continue;
      std::size_t i = key.size();
      while (i < 8 && std::isdigit(static_cast<unsigned char>(card[i]))) ++i;
      while (i < 8 && card[i] == ' ') ++i;
      string_key = i == 8;
    }
    if (!string_key) continue;
    std::size_t v = 9;
    while (v < 80 && card[v] == ' ') ++v;
    bool closed = false;
    if (v < 80 && card[v] == '\'') {
      for (std::size_t i = v + 1; i < 80; ++i)
        if (card[i] == '\'') {
          if (i + 1 < 80 && card[i + 1] == '\'') {
            ++i;
            continue;
          }
          closed = true;
          break;
        }
    }
    if (!closed)
      throw InputError(name, 0, 0, "FITS header card " + std::to_string(at / 80 + 1) + " (" +
                                       std::string(card.substr(0, 8)) + "): a string value must be quoted within its card");
  }
}

// Reads the FITS table of `spec` (a path with an optional [extension]) or,
// when `bytes` is given, of that memory image.
TextTable read_fits(const std::string& spec, const std::string& name, std::string* bytes) {
  const Cfitsio& fx = cfitsio(name);
  fitsfile* f = nullptr;
  int st = 0;
  void* mem = nullptr;
  std::size_t mem_size = 0;
  // cfitsio reads gzip-compressed files (whatever their name); their cards
  // and size are checked by cfitsio as it inflates them.
  const std::string plain = spec.substr(0, spec.find('['));
  bool compressed = false;
  if (!bytes) {
    unsigned char magic[2] = {0, 0};
    std::ifstream probe(plain, std::ios::binary);
    probe.read(reinterpret_cast<char*>(magic), 2);
    compressed = magic[0] == 0x1f && magic[1] == 0x8b;
  }
  if (bytes) {
    mem = bytes->data();
    mem_size = bytes->size();
    check_fits_cards(*bytes, name);
    fx.fits_open_memfile(&f, "stdin.fits", READONLY, &mem, &mem_size, 0, nullptr, &st);
    int hdutype = 0;
    // The first table: the primary HDU of a table file holds no data.
    if (!st) fx.fits_movabs_hdu(f, 2, &hdutype, &st);
    if (!st && hdutype == IMAGE_HDU) st = NOT_TABLE;
  } else {
    if (!compressed) {
      std::ifstream in(plain, std::ios::binary);
      std::string block(2880 * 64, '\0');  // whole cards, memory flat
      while (in.read(block.data(), static_cast<std::streamsize>(block.size())) || in.gcount() > 0)
        check_fits_cards(std::string_view(block.data(), static_cast<std::size_t>(in.gcount())), name);
    }
    fx.fits_open_table(&f, spec.c_str(), READONLY, &st);
  }
  if (st) {
    int s = 0;
    if (f) fx.fits_close_file(f, &s);
    fits_fail(name, st, "cannot open a FITS table");
  }
  struct Closer {
    const Cfitsio& fx;
    fitsfile* f;
    ~Closer() {
      int s = 0;
      fx.fits_close_file(f, &s);
    }
  } closer{fx, f};
  TextTable t;
  LONGLONG nrows = 0;
  int ncols = 0;
  long row_bytes = 0;
  fx.fits_get_num_rowsll(f, &nrows, &st);
  fx.fits_get_num_cols(f, &ncols, &st);
  fx.fits_read_key_lng(f, "NAXIS1", &row_bytes, nullptr, &st);
  if (st) fits_fail(name, st, "cannot read the table size");
  // A header that promises more data than the file holds is refused before
  // anything is allocated for it.
  std::error_code ec;
  const auto file_bytes = bytes ? bytes->size() : std::filesystem::file_size(plain, ec);
  if (nrows < 0 || row_bytes < 0 ||
      (!compressed && !ec && static_cast<long double>(nrows) * row_bytes > static_cast<long double>(file_bytes)))
    throw InputError(name, 0, 0, "FITS table: the header promises " + std::to_string(nrows) + " rows of " +
                                     std::to_string(row_bytes) + " bytes, more than the file holds");
  // heft's own metadata.
  char value[FLEN_VALUE] = {0}, comment[FLEN_COMMENT] = {0};
  if (fx.fits_read_key_str(f, "HEFTTAB", value, comment, &st) == 0) t.kind = value;
  st = 0;
  int nkeys = 0;
  fx.fits_get_hdrspace(f, &nkeys, nullptr, &st);
  for (int k = 1; k <= nkeys && !st; ++k) {
    char key[FLEN_KEYWORD] = {0}, val[FLEN_VALUE] = {0};
    fx.fits_read_keyn(f, k, key, val, comment, &st);
    const std::string kname = key;
    if (kname.rfind("HEFT ", 0) != 0) continue;
    char* text = nullptr;
    int s2 = 0;
    fx.fits_read_key_longstr(f, key, &text, comment, &s2);
    if (!s2 && text) t.meta.emplace_back(lower(kname.substr(5)), text);
    if (text) fx.fits_free_memory(text, &s2);
  }
  st = 0;
  struct Col {
    int index, type;
    long repeat, width;
    bool is_int;
  };
  std::vector<Col> cols;
  for (int c = 1; c <= ncols; ++c) {
    char key[FLEN_KEYWORD], ttype[FLEN_VALUE] = {0}, tunit[FLEN_VALUE] = {0};
    int type = 0;
    long repeat = 0, width = 0;
    fx.fits_get_coltype(f, c, &type, &repeat, &width, &st);
    fx.fits_make_keyn("TTYPE", c, key, &st);
    fx.fits_read_key_str(f, key, ttype, comment, &st);
    if (st) fits_fail(name, st, "cannot read column " + std::to_string(c));
    fx.fits_make_keyn("TUNIT", c, key, &st);
    if (fx.fits_read_key_str(f, key, tunit, comment, &st) == KEY_NO_EXIST) st = 0;
    const bool is_string = type == TSTRING;
    const bool is_int = type == TBYTE || type == TSBYTE || type == TSHORT || type == TUSHORT || type == TINT ||
                        type == TUINT || type == TLONG || type == TULONG || type == TLONGLONG;
    if (type == TCOMPLEX || type == TDBLCOMPLEX || type == TBIT || (type < 0))
      throw InputError(name, 0, 0, std::string("column '") + ttype + "': variable-length, bit and complex columns are not read");
    const long n = is_string ? 1 : repeat;
    if (n == 0) continue;
    if (n > 10000)
      throw InputError(name, 0, 0, std::string("column '") + ttype + "': a vector of " + std::to_string(n) +
                                       " elements is not a table column heft reads");
    for (long k = 0; k < n; ++k) {
      t.names.push_back(n == 1 ? std::string(ttype) : std::string(ttype) + "_" + std::to_string(k + 1));
      t.units.push_back(tunit);
    }
    cols.push_back({c, type, n, width, is_int});
  }
  t.rows.assign(static_cast<std::size_t>(nrows), std::vector<std::string>(t.names.size()));
  std::size_t out_col = 0;
  for (const Col& c : cols) {
    const LONGLONG nelem = nrows * c.repeat;
    if (c.type == TSTRING) {
      std::vector<std::string> storage(static_cast<std::size_t>(nrows), std::string(c.width + 1, '\0'));
      std::vector<char*> ptrs;
      for (auto& s : storage) ptrs.push_back(s.data());
      int anynul = 0;
      char nul[] = "";
      if (nrows > 0) fx.fits_read_col_str(f, c.index, 1, 1, nrows, nul, ptrs.data(), &anynul, &st);
      for (LONGLONG r = 0; r < nrows; ++r) {
        std::string v = ptrs[r];
        v.erase(v.find_last_not_of(' ') + 1);
        t.rows[r][out_col] = v;
      }
    } else if (c.type == TLOGICAL) {
      std::vector<char> v(static_cast<std::size_t>(nelem)), nul(static_cast<std::size_t>(nelem));
      int anynul = 0;
      if (nelem > 0) fx.fits_read_colnull(f, TLOGICAL, c.index, 1, 1, nelem, v.data(), nul.data(), &anynul, &st);
      for (LONGLONG e = 0; e < nelem; ++e)
        t.rows[e / c.repeat][out_col + e % c.repeat] = nul[e] ? "" : (v[e] ? "T" : "F");
    } else if (c.is_int) {
      std::vector<LONGLONG> v(static_cast<std::size_t>(nelem));
      std::vector<char> nul(static_cast<std::size_t>(nelem));
      int anynul = 0;
      if (nelem > 0) fx.fits_read_colnull(f, TLONGLONG, c.index, 1, 1, nelem, v.data(), nul.data(), &anynul, &st);
      for (LONGLONG e = 0; e < nelem; ++e)
        t.rows[e / c.repeat][out_col + e % c.repeat] = nul[e] ? "" : std::to_string(v[e]);
    } else {
      // Floating point (and scaled integers): NaN and TNULL are absent.
      std::vector<double> v(static_cast<std::size_t>(nelem));
      std::vector<char> nul(static_cast<std::size_t>(nelem));
      int anynul = 0;
      if (nelem > 0) fx.fits_read_colnull(f, TDOUBLE, c.index, 1, 1, nelem, v.data(), nul.data(), &anynul, &st);
      for (LONGLONG e = 0; e < nelem; ++e)
        t.rows[e / c.repeat][out_col + e % c.repeat] = nul[e] || !std::isfinite(v[e]) ? "" : format_double(v[e]);
    }
    if (st) fits_fail(name, st, "cannot read column '" + t.names[out_col] + "'");
    out_col += c.type == TSTRING ? 1 : c.repeat;
  }
  return t;
}

// Splits an ECSV data line with a one-character delimiter and '"' quotes
// (Python csv rules, which ECSV uses; a space delimiter also skips runs of
// spaces). `quoted` marks fields that were quoted.
std::vector<std::string> split_ecsv(const std::string& line, char delim, const std::string& name, long line_no) {
  std::vector<std::string> out;
  std::size_t i = 0;
  const std::size_t n = line.size();
  auto skip_spaces = [&] {
    if (delim == ' ')
      while (i < n && line[i] == ' ') ++i;
  };
  skip_spaces();
  while (i <= n) {
    std::string field;
    if (i < n && line[i] == '"') {
      ++i;
      for (;;) {
        if (i >= n) throw InputError(name, line_no, static_cast<long>(i), "unterminated quote");
        if (line[i] == '"') {
          if (i + 1 < n && line[i + 1] == '"') {
            field += '"';
            i += 2;
            continue;
          }
          ++i;
          break;
        }
        field += line[i++];
      }
    } else {
      while (i < n && line[i] != delim) field += line[i++];
    }
    out.push_back(field);
    if (i >= n) break;
    ++i;  // the delimiter
    skip_spaces();
    if (delim == ' ' && i >= n) break;
  }
  return out;
}

// The YAML header of an ECSV file: column names, units, numeric columns,
// heft's metadata and the delimiter.
void read_ecsv_header(const YAML::Node& head, const std::string& name, TextTable& t, std::vector<bool>& numeric,
                      char& delim) {
  if (!head.IsMap() || !head["datatype"] || !head["datatype"].IsSequence())
    throw InputError(name, 2, 1, "ECSV header: no 'datatype' list");
  for (const auto& c : head["datatype"]) {
    if (!c.IsMap() || !c["name"]) throw InputError(name, 2, 1, "ECSV header: a datatype entry without 'name'");
    t.names.push_back(c["name"].as<std::string>());
    t.units.push_back(c["unit"] ? c["unit"].as<std::string>() : "");
    const std::string dt = c["datatype"] ? c["datatype"].as<std::string>() : "string";
    numeric.push_back(dt.rfind("float", 0) == 0 || dt.rfind("int", 0) == 0 || dt.rfind("uint", 0) == 0);
  }
  if (head["meta"] && head["meta"].IsMap())
    for (const auto& kv : head["meta"]) {
      const std::string k = kv.first.as<std::string>();
      if (!kv.second.IsScalar()) continue;
      if (k == "heft_table")
        t.kind = kv.second.as<std::string>();
      else
        t.meta.emplace_back(k, kv.second.as<std::string>());
    }
  const std::string delim_text = head["delimiter"] ? head["delimiter"].as<std::string>() : " ";
  if (delim_text != " " && delim_text != ",")
    throw InputError(name, 2, 1, "ECSV header: delimiter must be ' ' or ','");
  delim = delim_text[0];
}

TextTable read_ecsv(std::istream& in, const std::string& name) {
  std::string line, yaml;
  long line_no = 0;
  if (!std::getline(in, line) || line.rfind("# %ECSV", 0) != 0)
    throw InputError(name, 1, 1, "not an ECSV file (first line '# %ECSV 1.0')");
  ++line_no;
  while (std::getline(in, line)) {
    ++line_no;
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (line.rfind("#", 0) != 0) break;
    if (line == "# ---" || line == "#---") continue;
    yaml += (line.size() > 2 ? line.substr(2) : std::string()) + "\n";
  }
  TextTable t;
  std::vector<bool> numeric;
  char delim = ' ';
  try {
    const YAML::Node head = YAML::Load(yaml);
    read_ecsv_header(head, name, t, numeric, delim);
  } catch (const YAML::Exception& e) {
    throw InputError(name, e.mark.line + 3, e.mark.column + 3, std::string("ECSV header: ") + e.msg);
  }
  // `line` holds the header row of the body.
  const auto header = split_ecsv(line, delim, name, line_no);
  if (header != t.names)
    throw InputError(name, line_no, 1, "ECSV: the column names of the data differ from the header's datatype list");
  while (std::getline(in, line)) {
    ++line_no;
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (line.empty()) continue;
    auto f = split_ecsv(line, delim, name, line_no);
    if (f.size() != t.names.size())
      throw InputError(name, line_no, 1,
                       "ECSV: " + std::to_string(f.size()) + " fields, the header has " + std::to_string(t.names.size()));
    for (std::size_t k = 0; k < f.size(); ++k)
      if (numeric[k] && (f[k] == "--" || lower(f[k]) == "nan")) f[k].clear();  // absent values
    t.rows.push_back(std::move(f));
  }
  return t;
}

// The text table as heft CSV, with units converted to `expected`.
std::string to_csv(TextTable& t, const std::vector<ColumnUnit>& expected, const std::string& name,
                   std::vector<ColumnUnit>& units) {
  for (std::size_t k = 0; k < t.names.size(); ++k) {
    const auto it = std::find_if(expected.begin(), expected.end(), [&](const ColumnUnit& c) { return c.name == t.names[k]; });
    if (it == expected.end() || t.units[k].empty()) continue;
    double scale = 1.0, offset = 0.0;
    UnitScale u;
    if (!parse_unit(t.units[k], u))
      throw InputError(name, 0, 0, "column '" + t.names[k] + "': unit '" + t.units[k] + "' is not one heft knows (docs/formats.md)");
    if (!unit_conversion(t.units[k], it->unit, scale, offset))
      throw InputError(name, 0, 0, "column '" + t.names[k] + "': unit '" + t.units[k] + "' cannot be converted to '" +
                                       (it->unit.empty() ? "dimensionless" : it->unit) + "'");
    t.units[k] = it->unit;
    if (scale == 1.0 && offset == 0.0) continue;  // the text as written, to the bit
    for (auto& row : t.rows) {
      double v = 0.0;
      if (row[k].empty() || !parse_double(row[k], v)) continue;  // the readers report non-numbers
      row[k] = format_double(v * scale + offset);
    }
  }
  units.clear();
  for (std::size_t k = 0; k < t.names.size(); ++k) units.push_back({t.names[k], t.units[k]});
  std::string out;
  if (!t.kind.empty()) {
    out += "# " + t.kind;
    auto meta = t.meta;
    std::sort(meta.begin(), meta.end());
    for (const auto& [k, v] : meta) out += " " + k + "=" + v;
    out += "\n";
  }
  for (std::size_t k = 0; k < t.names.size(); ++k) {
    if (k) out += ',';
    append_csv_field(out, t.names[k]);
  }
  out += '\n';
  for (const auto& row : t.rows) {
    for (std::size_t k = 0; k < row.size(); ++k) {
      if (k) out += ',';
      append_csv_field(out, row[k]);
    }
    out += '\n';
  }
  return out;
}

// ---------------------------------------------------------------- writing

// heft CSV text parsed back: the metadata line, header and fields.
TextTable parse_csv(std::string_view csv, const std::vector<ColumnUnit>& columns) {
  TextTable t;
  std::string text(csv);
  std::size_t start = 0;
  // Leading "# kind key=value ..." metadata line.
  if (text.rfind("# ", 0) == 0) {
    const std::size_t eol = text.find('\n');
    std::istringstream words(text.substr(2, eol - 2));
    std::string w;
    words >> t.kind;
    while (words >> w) {
      const auto eq = w.find('=');
      if (eq != std::string::npos) t.meta.emplace_back(w.substr(0, eq), w.substr(eq + 1));
    }
    start = eol + 1;
  }
  std::istringstream in(text.substr(start));
  CsvReader reader(in, "<table>");
  bool header = true;
  while (reader.next()) {
    std::vector<std::string> f(reader.fields().begin(), reader.fields().end());
    if (header) {
      t.names = f;
      for (const auto& n : t.names) {
        const auto it = std::find_if(columns.begin(), columns.end(), [&](const ColumnUnit& c) { return c.name == n; });
        t.units.push_back(it == columns.end() ? "" : it->unit);
      }
      header = false;
    } else {
      t.rows.push_back(std::move(f));
    }
  }
  return t;
}

enum class ColType { kFloat, kInt, kString };

std::vector<ColType> column_types(const TextTable& t) {
  std::vector<ColType> types;
  for (std::size_t k = 0; k < t.names.size(); ++k) {
    bool numbers = true, integers = true;
    for (const auto& row : t.rows) {
      const std::string& v = row[k];
      if (v.empty()) {
        integers = false;  // no null for the integers we write
        continue;
      }
      double x = 0.0;
      if (!parse_double(v, x) || std::isinf(x)) numbers = false;
      if (v.find_first_not_of("-0123456789") != std::string::npos) integers = false;
    }
    const bool int_name = std::find(std::begin(kIntegerColumns), std::end(kIntegerColumns), t.names[k]) !=
                          std::end(kIntegerColumns);
    types.push_back(!numbers ? ColType::kString : int_name && integers ? ColType::kInt : ColType::kFloat);
  }
  return types;
}

std::string ecsv_bytes(const TextTable& t, std::string_view csv) {
  const auto types = column_types(t);
  YAML::Emitter y;
  y << YAML::BeginMap;
  y << YAML::Key << "delimiter" << YAML::Value << YAML::SingleQuoted << ",";
  y << YAML::Key << "datatype" << YAML::Value << YAML::BeginSeq;
  for (std::size_t k = 0; k < t.names.size(); ++k) {
    y << YAML::Flow << YAML::BeginMap << YAML::Key << "name" << YAML::Value << t.names[k];
    if (!t.units[k].empty()) y << YAML::Key << "unit" << YAML::Value << t.units[k];
    y << YAML::Key << "datatype" << YAML::Value
      << (types[k] == ColType::kFloat ? "float64" : types[k] == ColType::kInt ? "int64" : "string");
    y << YAML::EndMap;
  }
  y << YAML::EndSeq;
  if (!t.kind.empty()) {
    y << YAML::Key << "meta" << YAML::Value << YAML::BeginMap;
    y << YAML::Key << "heft_table" << YAML::Value << t.kind;
    for (const auto& [k, v] : t.meta) y << YAML::Key << k << YAML::Value << YAML::DoubleQuoted << v;
    y << YAML::EndMap;
  }
  y << YAML::EndMap;
  std::string out = "# %ECSV 1.0\n# ---\n";
  std::istringstream lines(y.c_str());
  for (std::string l; std::getline(lines, l);) out += "# " + l + "\n";
  // The body is heft's CSV without its metadata line.
  std::string_view body = csv;
  if (body.rfind("# ", 0) == 0) body.remove_prefix(body.find('\n') + 1);
  out += body;
  return out;
}

std::string fits_bytes(const TextTable& t) {
  const Cfitsio& fx = cfitsio("");
  const auto types = column_types(t);
  const char* tmpdir = std::getenv("TMPDIR");
  std::string pattern = std::string(tmpdir && *tmpdir ? tmpdir : "/tmp") + "/heft-fits-XXXXXX";
  std::vector<char> path(pattern.begin(), pattern.end());
  path.push_back('\0');
  const int fd = mkstemp(path.data());
  if (fd < 0) throw InputError(pattern, 0, 0, "cannot make a temporary file for the FITS output");
  ::close(fd);
  struct Remove {
    const char* p;
    ~Remove() { std::remove(p); }
  } remove{path.data()};
  fitsfile* f = nullptr;
  int st = 0;
  fx.fits_create_file(&f, ("!" + std::string(path.data())).c_str(), &st);
  std::vector<std::string> tform, names = t.names, units = t.units;
  // The FITS standard 4.0 (Table 3) spelling of the solar mass.
  for (auto& u : units)
    if (u == "Msun") u = "solMass";
  for (std::size_t k = 0; k < t.names.size(); ++k) {
    std::size_t w = 1;
    if (types[k] == ColType::kString)
      for (const auto& row : t.rows) w = std::max(w, row[k].size());
    tform.push_back(types[k] == ColType::kFloat ? "D" : types[k] == ColType::kInt ? "K" : std::to_string(w) + "A");
  }
  std::vector<std::size_t> offset;  // of each column in a row, bytes
  std::size_t row_bytes = 0;
  for (const auto& tfk : tform) {
    offset.push_back(row_bytes);
    row_bytes += tfk == "D" || tfk == "K" ? 8 : std::stoul(tfk);
  }
  std::vector<char*> ttype, tf, tu;
  for (std::size_t k = 0; k < names.size(); ++k) {
    ttype.push_back(names[k].data());
    tf.push_back(tform[k].data());
    tu.push_back(units[k].data());
  }
  std::string extname = t.kind.empty() ? "HEFT" : t.kind;
  for (char& c : extname) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  fx.fits_create_tbl(f, BINARY_TBL, static_cast<LONGLONG>(t.rows.size()), static_cast<int>(names.size()), ttype.data(),
                  tf.data(), tu.data(), extname.c_str(), &st);
  const LONGLONG n = static_cast<LONGLONG>(t.rows.size());
  for (std::size_t k = 0; k < names.size() && !st && n > 0; ++k) {
    const int col = static_cast<int>(k + 1);
    if (types[k] == ColType::kFloat) {
      std::vector<double> v(t.rows.size());
      for (std::size_t r = 0; r < v.size(); ++r)
        if (t.rows[r][k].empty() || !parse_double(t.rows[r][k], v[r])) v[r] = std::numeric_limits<double>::quiet_NaN();
      fx.fits_write_col(f, TDOUBLE, col, 1, 1, n, v.data(), &st);
    } else if (types[k] == ColType::kInt) {
      std::vector<LONGLONG> v(t.rows.size());
      for (std::size_t r = 0; r < v.size(); ++r) v[r] = std::stoll(t.rows[r][k]);
      fx.fits_write_col(f, TLONGLONG, col, 1, 1, n, v.data(), &st);
    } else {
      // Written as bytes, NUL-padded: the FITS standard 4.0 (Sect. 7.3.3.1)
      // ends a shorter string with ASCII NUL, so readers do not keep the
      // blanks that cfitsio's string writer pads with.
      const std::size_t w = std::stoul(tform[k]);
      std::string cell(w, '\0');
      for (LONGLONG r = 0; r < n && !st; ++r) {
        std::fill(cell.begin(), cell.end(), '\0');
        std::copy(t.rows[r][k].begin(), t.rows[r][k].end(), cell.begin());
        fx.fits_write_tblbytes(f, r + 1, static_cast<LONGLONG>(offset[k]) + 1, static_cast<LONGLONG>(w),
                            reinterpret_cast<unsigned char*>(cell.data()), &st);
      }
    }
  }
  if (!t.kind.empty()) {
    fx.fits_write_key_str(f, "HEFTTAB", t.kind.c_str(), "table written by heft", &st);
    for (const auto& [k, v] : t.meta) {
      std::string key = "HIERARCH HEFT " + k;
      fx.fits_write_key_longstr(f, key.c_str(), v.c_str(), "", &st);
    }
  }
  fx.fits_close_file(f, &st);
  if (st) fits_fail(path.data(), st, "cannot write the FITS table");
  std::ifstream in(path.data(), std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

}  // namespace

TableFormat output_table_format(const std::string& path, const std::string& format, const std::string& option) {
  if (format == "csv") return TableFormat::kCsv;
  if (format == "ecsv") return TableFormat::kEcsv;
  if (format == "fits") return TableFormat::kFits;
  if (!format.empty()) throw UsageError(option, format, "expected csv, ecsv or fits");
  const std::string p = lower(path);
  for (const char* ext : {".fits", ".fit", ".fts", ".fits.gz", ".fit.gz", ".fts.gz"})
    if (p.ends_with(ext)) return TableFormat::kFits;
  if (p.ends_with(".ecsv")) return TableFormat::kEcsv;
  return TableFormat::kCsv;
}

TableInput::TableInput(const std::string& path, const std::vector<ColumnUnit>& expected) : name_(path == "-" ? "<stdin>" : path) {
  // A FITS extension in cfitsio's syntax: "file.fits[1]", "file.fits[NAME]".
  const bool extension = path != "-" && !path.empty() && path.back() == ']' && path.find('[') != std::string::npos &&
                         access(path.c_str(), F_OK) != 0;
  TextTable t;
  if (extension) {
    format_ = TableFormat::kFits;
    t = read_fits(path, name_, nullptr);
  } else {
    file_ = std::make_unique<InputFile>(path);  // stdin, or a file: existence and directory checks
    struct stat st {};
    const bool regular = path != "-" && ::stat(path.c_str(), &st) == 0 && S_ISREG(st.st_mode);
    std::string head, bytes;
    if (regular) {
      // A regular file is sniffed by a second read and handed to cfitsio by name.
      char buf[9] = {0};
      std::ifstream probe(path, std::ios::binary);
      probe.read(buf, sizeof buf);
      head.assign(buf, static_cast<std::size_t>(probe.gcount()));
      if (head.size() >= 2 && static_cast<unsigned char>(head[0]) == 0x1f && static_cast<unsigned char>(head[1]) == 0x8b)
        head = "SIMPLE  =";  // gzip: cfitsio reads compressed FITS
    } else {
      // A pipe (stdin, <(...), a FIFO) can be read once: only an input that
      // may be FITS or ECSV is gathered in memory; CSV streams.
      std::istream& in = file_->stream();
      const int c = in.peek();
      if (c == 'S' || c == '#') {
        bytes.assign(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
        head = bytes.substr(0, 9);
      }
    }
    if (head.rfind("SIMPLE  =", 0) == 0) format_ = TableFormat::kFits;
    if (head.rfind("# %ECSV", 0) == 0) format_ = TableFormat::kEcsv;
    if (format_ == TableFormat::kFits) {
      t = read_fits(path, name_, regular ? nullptr : &bytes);
    } else if (format_ == TableFormat::kEcsv) {
      std::ifstream file;
      std::istringstream memory(bytes);
      if (regular) file.open(path, std::ios::binary);
      t = read_ecsv(regular ? static_cast<std::istream&>(file) : memory, name_);
    } else {
      if (!bytes.empty()) {  // CSV that began with '#' or 'S', already read
        text_.str(std::move(bytes));
        converted_ = true;
      }
      return;  // else CSV streamed by file_
    }
  }
  text_.str(to_csv(t, expected, name_, units_));
  converted_ = true;
  file_.reset();
}

std::string table_bytes(std::string_view csv, TableFormat format, const std::vector<ColumnUnit>& columns) {
  if (format == TableFormat::kCsv) return std::string(csv);
  const TextTable t = parse_csv(csv, columns);
  return format == TableFormat::kEcsv ? ecsv_bytes(t, csv) : fits_bytes(t);
}

TableOutput::TableOutput(const std::string& path, TableFormat format, std::vector<ColumnUnit> columns)
    : out_(path), format_(format), columns_(std::move(columns)) {}

void TableOutput::write(std::string_view csv) {
  if (format_ == TableFormat::kCsv)
    out_.write(csv);
  else
    buffer_.append(csv);
}

void TableOutput::commit() {
  if (format_ != TableFormat::kCsv) out_.write(table_bytes(buffer_, format_, columns_));
  out_.commit();
}

}  // namespace heft
