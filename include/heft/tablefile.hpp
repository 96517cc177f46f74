#pragma once
/// \file tablefile.hpp
/// Tables in the archive formats: FITS binary tables (FITS standard 4.0,
/// Sect. 7.3, through cfitsio) and ECSV (astropy's Enhanced CSV, version
/// 1.0: a YAML header with name, datatype and unit per column, parsed and
/// written with yaml-cpp), besides heft's plain CSV.
///
/// heft's readers and writers work on CSV text; this module converts at the
/// edges. Reading: a FITS or ECSV table becomes CSV text with every number
/// written exactly (shortest round trip), FITS TNULL, NaN and empty ECSV
/// fields as empty fields (absent values, the same rules as empty CSV
/// fields), and each column that heft knows converted from the file's unit
/// to heft's. Writing: heft's CSV text (optional leading `# ` metadata line,
/// header, rows) becomes a FITS binary table with TUNIT per column and the
/// metadata as header keywords, or an ECSV file with datatype and unit per
/// column and the metadata in `meta`. Plain CSV is written unchanged.

#include <istream>
#include <memory>
#include <sstream>
#include <string>
#include <string_view>
#include <vector>

#include "heft/io.hpp"

namespace heft {

enum class TableFormat { kCsv, kEcsv, kFits };

/// The format of an output path: `format` "csv", "ecsv" or "fits", or ""
/// for the path's extension (.fits, .fit, .fts, optionally .gz: FITS;
/// .ecsv: ECSV; anything else, and "-": CSV). Throws UsageError naming
/// `option` for another name.
TableFormat output_table_format(const std::string& path, const std::string& format, const std::string& option);

/// A table file of any format opened as heft CSV text.
///
/// Notes:
/// 1. The format is read from the content (a FITS file starts with
///    "SIMPLE  =", an ECSV file with "# %ECSV"), so pipes work too; a path
///    ending in "[N]" or "[NAME]" (cfitsio's extended file name) selects a
///    FITS extension by number or EXTNAME; without one, the first table.
/// 2. CSV streams through unchanged; FITS and ECSV are converted in memory.
/// 3. `expected` names heft's unit for the columns it reads (for the
///    canonical star table, catalog.hpp's star_column_units(); for raw
///    extracts, the column map's units). A file column of that name with a
///    unit is converted into it (unit_conversion); a unit heft does not
///    know, or of another dimension, is an InputError naming the file and
///    the column. Columns not in `expected` pass through.
/// 4. A vector column of a FITS table (repeat n > 1, e.g. a weight matrix)
///    becomes the columns NAME_1 ... NAME_n.
/// 5. Metadata written by heft (FITS keywords HEFTTAB and HIERARCH HEFT *,
///    ECSV meta) come back as the leading `# heft-...` line, so heft merge
///    reads shards in any format.
class TableInput {
 public:
  explicit TableInput(const std::string& path, const std::vector<ColumnUnit>& expected = {});
  std::istream& stream() { return converted_ ? static_cast<std::istream&>(text_) : file_->stream(); }
  const std::string& name() const { return name_; }
  TableFormat format() const { return format_; }
  /// The columns' units after conversion (a FITS or ECSV file's own units,
  /// or the `expected` unit where converted; empty for CSV).
  const std::vector<ColumnUnit>& units() const { return units_; }

 private:
  std::string name_;
  std::vector<ColumnUnit> units_;
  TableFormat format_ = TableFormat::kCsv;
  bool converted_ = false;
  std::unique_ptr<InputFile> file_;
  std::istringstream text_;
};

/// Converts heft CSV text to the bytes of `format` (CSV: unchanged).
/// `columns` gives each column's unit (by name; a column not listed has
/// none). Column types: a column whose fields all read as numbers (empty
/// fields allowed) is float64 (FITS 'D'; empty as NaN), int64 when listed in
/// kIntegerColumns and all its fields are integers; others are strings.
std::string table_bytes(std::string_view csv, TableFormat format, const std::vector<ColumnUnit>& columns);

/// Column names written as 64-bit integers when all their fields are.
inline constexpr std::string_view kIntegerColumns[] = {"rank", "n_draws"};

/// An output table: CSV text written through (streamed) for plain CSV,
/// gathered and converted on commit() for FITS and ECSV. The same safety as
/// AtomicOutput (it is one).
class TableOutput {
 public:
  TableOutput(const std::string& path, TableFormat format, std::vector<ColumnUnit> columns);
  void write(std::string_view csv);
  void commit();
  TableFormat format() const { return format_; }

 private:
  AtomicOutput out_;
  TableFormat format_;
  std::vector<ColumnUnit> columns_;
  std::string buffer_;
};

}  // namespace heft
