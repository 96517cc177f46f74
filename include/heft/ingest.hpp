#pragma once
/// \file ingest.hpp
/// Joining two raw catalogue extracts with arbitrary column names into the
/// canonical star table: the column map (JSON, docs/formats.md), reading raw
/// rows with unit conversion, and matching by key, by a cross-match table
/// or by position.

#include <iosfwd>
#include <map>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "heft/catalog.hpp"

namespace heft {

/// Where one canonical field comes from: a source column times `scale`
/// (to the canonical unit, plus `offset` for time units), or a constant.
struct FieldSource {
  std::string column;     ///< empty: use `constant`
  std::string unit;       ///< the unit the map gives the column in
  double scale = 1.0;
  double offset = 0.0;
  double constant = kAbsent;
};

/// The column map of one raw catalogue: canonical field name (without the
/// early_/late_ prefix, e.g. "pmra", "window_start") -> source; plus the
/// star-level fields (id, mass, rv, mag, ...) this catalogue supplies.
struct EpochMap {
  std::map<std::string, FieldSource> fields;
  std::map<std::string, FieldSource> star_fields;
  /// Quality indicators carried through (kCarriedFields -> source).
  std::map<std::string, FieldSource> carry;
  /// The 15 columns of an upper-triangular weight matrix U (docs/formats.md
  /// gives the element order), or the name of its vector column (NAME_1 ...
  /// NAME_15 when the extract has them, else NAME1 ... NAME15); both empty
  /// when the catalogue gives errors and correlations instead.
  std::vector<std::string> weight_matrix;
  std::string weight_matrix_vector;
};

/// The column map of a public catalogue schema (docs/formats.md, "Presets"):
/// "hip2007-main" (the early mission's re-reduction: 5x5 solutions as a
/// weight matrix) or "dr3-source" (the later mission's main source table:
/// errors, correlations, RUWE and excess noise), as the JSON of one epoch
/// of a column map. Throws UsageError naming `option` for another name.
nlohmann::json ingest_preset(const std::string& name, const std::string& option);

/// The JSON of one epoch of a column map with `override` laid over `base`:
/// the objects `columns`, `star` and `carry` merge field by field, every
/// other key is replaced.
nlohmann::json overlay_epoch_map(nlohmann::json base, const nlohmann::json& override);

/// Covariance (mas, mas/yr) from the 15 elements of an upper-triangular
/// weight matrix U with N = U^T U the normal matrix of (alpha*, delta,
/// parallax, mu_alpha*, mu_delta): Sigma = N^-1 = U^-1 U^-T. `u` holds the
/// upper triangle column by column: U11, U12, U22, U13, U23, U33, ..., U55.
/// False when U is singular or not finite.
bool covariance_from_weight_matrix(const double u[15], Eigen::Matrix<double, 5, 5>& cov);

/// The whole map: one EpochMap per catalogue.
struct IngestMap {
  EpochMap early, late;
};

/// Parses and checks a column map. Throws InputError naming the JSON path
/// (e.g. "/late/columns/pmra/unit") and the rule broken.
IngestMap parse_ingest_map(const nlohmann::json& j, const std::string& file);

/// The map's source columns with the units it gives them: what a FITS or
/// ECSV raw extract is converted into before the map's own conversion
/// (tablefile.hpp).
std::vector<ColumnUnit> map_column_units(const EpochMap& map);

/// One row of a raw catalogue after mapping and unit conversion.
struct RawEntry {
  std::string key;  ///< value of the key column (empty when none)
  /// Carried quality indicators (EpochMap::carry), NaN when absent.
  std::map<std::string, double> carried;
  long line = 0;    ///< line in the raw file
  Astrometry astrometry;
  StarRecord star;  ///< only the star-level fields are used
};

/// Reads a raw extract. `key_column` may be empty. Unparsable numbers are
/// InputErrors naming file, line, column and the source column.
std::vector<RawEntry> read_raw_catalogue(std::istream& in, const std::string& name,
                                         const EpochMap& map, const std::string& key_column);

/// Result of matching: pairs of (early index, late index), and the rows
/// left over with the reason ("unmatched" or "ambiguous").
struct MatchResult {
  std::vector<std::pair<std::size_t, std::size_t>> pairs;
  struct Leftover {
    bool early;
    std::size_t index;
    std::string reason;
  };
  std::vector<Leftover> leftovers;
};

/// Matches by equal keys. Duplicate keys on either side are "ambiguous".
MatchResult match_by_key(const std::vector<RawEntry>& early, const std::vector<RawEntry>& late);

/// Matches through a table of (early key, late key) pairs.
MatchResult match_by_pairs(const std::vector<RawEntry>& early, const std::vector<RawEntry>& late,
                           const std::vector<std::pair<std::string, std::string>>& pairs);

/// Matches by position: each late position is carried back to the early
/// epoch with its own PM and parallax (rigorous propagation, rv = 0), and
/// paired with the nearest early star within `radius_arcsec`. A late star
/// with two early stars inside the radius, or an early star claimed by two
/// late stars, is "ambiguous" and left unmatched.
MatchResult match_by_position(const std::vector<RawEntry>& early,
                              const std::vector<RawEntry>& late, double radius_arcsec);

/// Reads a cross-match table: CSV whose first two columns are the early and
/// the late key.
std::vector<std::pair<std::string, std::string>> read_pairs(std::istream& in,
                                                            const std::string& name);

/// Builds the canonical record of a matched pair: early and late
/// astrometry; star-level fields from the catalogue that maps them (late
/// wins when both do); id from the map, else the late key, else the early key.
StarRecord join_entries(const RawEntry& early, const RawEntry& late);

}  // namespace heft
