#pragma once
/// \file rank.hpp
/// Survey-scale ranking of imaging candidates: each star is screened, its
/// Monte Carlo curve computed when the anomaly is significant, and its
/// companion's sky position at the planned date predicted from the curve's
/// draws; the score is the probability that the star has a companion (the
/// false-alarm odds from the curve's Bayes factor and the assumed
/// occurrence) times the posterior probability that the companion lies
/// between the working angles with a mass inside the target window
/// (docs/method.md, Sect. 10). The ranked table and its run metadata are
/// defined so that shards merge into exactly the table of a single run.

#include <iosfwd>
#include <limits>
#include <map>
#include <string>
#include <vector>

#include "heft/curve.hpp"
#include "heft/io.hpp"
#include "heft/predict.hpp"
#include "heft/screen.hpp"

namespace heft {

/// An instrument's contrast limit: the faintest detectable companion as a
/// magnitude difference from the host, against separation (mas). Linear
/// interpolation; nothing is detectable outside the tabulated separations.
class ContrastCurve {
 public:
  /// Reads a CSV with columns sep_mas, delta_mag (separations strictly
  /// increasing, delta_mag >= 0); errors name file, line and column.
  static ContrastCurve read(std::istream& in, const std::string& name);
  /// The limit at sep_mas, or -inf outside the table.
  double limit_mag(double sep_mas) const;

 private:
  std::vector<double> sep_, dmag_;
};

/// The user's mass-magnitude relation in the band of the contrast curve:
/// absolute magnitude against companion mass (MJup), linear in log mass.
/// Below the lightest mass the companion counts as too faint; above the
/// heaviest it takes the heaviest's magnitude.
class MassMagnitude {
 public:
  /// Reads a CSV with columns mass_mjup, abs_mag (masses > 0, strictly
  /// increasing); errors name file, line and column.
  static MassMagnitude read(std::istream& in, const std::string& name);
  double abs_mag(double mass_mjup) const;

 private:
  std::vector<double> log_mass_, mag_;
};

/// Companions above this mass (MJup) burn hydrogen: stars, luminous, so
/// their host's anomaly is diluted by their light (not modelled yet; the
/// hydrogen-burning limit is ~75-80 MJup, e.g. Chabrier & Baraffe 2000,
/// ARA&A 38, 337).
inline constexpr double kStellarMassMjup = 80.0;

struct RankOptions {
  double date_yr = 2027.5;
  /// Prior fraction of stars that host a companion inside the prior's mass
  /// and separation ranges (an assumption the user should set).
  double occurrence = 0.1;
  double iwa_mas = 0.0, owa_mas = std::numeric_limits<double>::infinity();
  double target_min_mjup = 1.0, target_max_mjup = 80.0;  ///< scoring window in mass
  /// Dates (Julian years) at which to find each star's best date; empty:
  /// none. Each draw moves on its own orbit (no re-sampling).
  std::vector<double> dates_yr;
  CurveOptions curve;           ///< prior bounds, a grid, draws, seed, detect_sigma
  double host_mass_msun = kAbsent, host_mass_error_msun = kAbsent;
  const ContrastCurve* contrast = nullptr;
  const MassMagnitude* mass_mag = nullptr;
};

/// One ranked star (units in the names; NaN where not computed).
struct RankRecord {
  std::string id;
  double score = kAbsent, p_detect = kAbsent, sig_joint = kAbsent;
  double p_real = kAbsent, log10_bayes = kAbsent;  ///< companion probability; its Bayes factor
  double p_stellar = kAbsent;  ///< P(mass > kStellarMassMjup | companion, data)
  /// With RankOptions::dates_yr: the date of the highest ranking quantity
  /// (p_detect with a detection model, else score), that value, and its
  /// value at the first date.
  double best_date_yr = kAbsent, best_date_score = kAbsent, first_date_score = kAbsent;
  double a_best_au = kAbsent, mass_lo68 = kAbsent, mass_med = kAbsent, mass_hi68 = kAbsent;
  double sep_lo68 = kAbsent, sep_med = kAbsent, sep_hi68 = kAbsent;
  double pa_mode_deg = kAbsent, pa_arc68_start_deg = kAbsent, pa_arc68_width_deg = kAbsent;
  RowStatus status;
  Notes notes;
  long rank = 0;  ///< 1-based; 0 before ranking
  /// Wall time of this star's curve and of its sky prediction and score (s);
  /// for the run's stage summary, never written to the outputs.
  double curve_s = 0.0, predict_s = 0.0;
};

/// What the plan report shows of a scored star beside its record: its curve
/// and its sky map at the date (sized from the draws, as `heft predict`).
struct RankDetail {
  std::vector<CurvePoint> curve;
  SkyGrid sky;
};

/// Scores one screened star (`row` from screen_star) when its anomaly is
/// significant: its curve, sky prediction at the date and score. Per-star
/// numerical failures become a RowState::kFailed status, never an exception.
/// With `detail`, a scored star's curve and sky map are also kept there.
RankRecord rank_star(const StarRecord& star, const ScreenRow& row, const RankOptions& opt,
                     RankDetail* detail = nullptr);

/// The screen-only part of rank_star: the record of a star whose curve is
/// not computed (below the detection threshold, or bad input).
RankRecord screened_record(const ScreenRow& row);

/// What the ranks sort by: p_detect when the run has a detection model
/// (--contrast and --mass-mag), else score.
enum class RankBy { kScore, kDetect };
/// What a run with these options ranks by.
inline RankBy rank_by(const RankOptions& opt) { return opt.contrast ? RankBy::kDetect : RankBy::kScore; }
/// The rank_by metadata value, and back (false for an unknown word).
const char* rank_by_name(RankBy by);
bool parse_rank_by(const std::string& word, RankBy& by);
/// Sorts by the key (descending; stars without it last, by score when
/// ranking by p_detect), then sig_joint (descending), then id, and numbers
/// the ranks.
void assign_ranks(std::vector<RankRecord>& records, RankBy by);

/// The ranked table's columns (docs/formats.md, "Ranked candidates").
/// The ranked table's columns with their units, in output order.
const std::vector<ColumnUnit>& rank_column_units();
const std::vector<std::string>& rank_columns();
std::string rank_header();
void append_rank_row(std::string& out, const RankRecord& r);
/// One data row of a ranked table as read back (columns by name).
RankRecord parse_rank_row(const ColumnTable& t);

/// Run metadata of a ranked table, written as its first line
/// "# heft-rank key=value ..." so that `heft merge` can check that parts
/// belong together and that no star is missing. `shard` is "K/N".
struct RankRunInfo {
  std::map<std::string, std::string> fields;  ///< options, input, rows, shard
  std::string line() const;
  static RankRunInfo parse(const std::string& line, const std::string& file);
};

/// The ranked table as written: metadata line, header, rows in rank order.
std::string ranked_table(const RankRunInfo& info, const std::vector<RankRecord>& ranked);
/// The same as JSON: {"stars": [...], "run": {metadata, rows per status}}.
std::string ranked_json(const RankRunInfo& info, const std::vector<RankRecord>& ranked);

/// Reads a ranked table back: its metadata line and records. Errors name
/// file, line and column.
std::vector<RankRecord> read_ranked(std::istream& in, const std::string& name, RankRunInfo& info);
/// Reads the JSON of ranked_json back (records and metadata, as written).
/// Errors name the file and the JSON path.
std::vector<RankRecord> read_ranked_json(std::istream& in, const std::string& name, RankRunInfo& info);

/// The checkpoint of a running `heft rank` (docs/formats.md): the run
/// metadata line, the header of the ranked table with a last column
/// `check`, and one line per finished star in completion order. `check` is
/// the FNV-1a 64-bit hash (16 hex digits) of the line's bytes before its
/// last comma, so a damaged line is detected.
std::string checkpoint_head(const RankRunInfo& info);
/// One finished star's checkpoint line (with newline).
std::string checkpoint_line(const RankRecord& r);

struct Checkpoint {
  RankRunInfo info;
  std::vector<RankRecord> records;  ///< the stars whose lines are intact
  long dropped = 0;  ///< damaged lines and a torn last line (no newline): their stars are computed again
};
/// Reads a checkpoint. Only newline-terminated lines with a matching check
/// count; the others are dropped (Checkpoint::dropped). A missing or foreign
/// metadata line or header is an InputError naming file and line.
Checkpoint read_checkpoint(std::istream& in, const std::string& name);

}  // namespace heft
