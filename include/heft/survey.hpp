#pragma once
/// \file survey.hpp
/// The survey job behind `heft rank`: read a star table, keep one shard,
/// screen every star, compute curves and scores of the significant ones in
/// parallel (the most significant first, at most max_curves), resumable from
/// a checkpoint, and the run metadata that lets `heft merge` join shards.
/// Deterministic: the same input and options give the same records for any
/// thread count, shard layout or resume history (docs/scaling.md).

#include <functional>
#include <iosfwd>
#include <string>
#include <string_view>
#include <vector>

#include "heft/rank.hpp"

namespace heft {

struct SurveyOptions {
  RankOptions rank;                  ///< date, working angles, target masses, curve options
  ScreenOptions screen;
  WindowDefaults windows;
  double a_min_au = 0.5, a_max_au = 500.0;  ///< log grid of trial separations (refined by curve)
  int n_a = kDefaultSeparations;
  long shard_k = 1, shard_n = 1;     ///< this run takes rows k-1, k-1+n, ... (0-based)
  long max_curves = 0;               ///< 0 = a curve for every star above detect_sigma
  std::string contrast_name = "none", mass_mag_name = "none";  ///< for the metadata
  std::string screen_fingerprint;    ///< of the screen options (metadata)
  /// Checkpoint file ("" = none): finished stars are appended and flushed as
  /// they end; with `resume`, the stars of an existing one are not computed again.
  std::string checkpoint;
  bool resume = false;
};

struct SurveyRun {
  RankRunInfo info;                  ///< the run metadata
  std::vector<RankRecord> records;   ///< ranked (assign_ranks applied)
  long rows = 0;                     ///< data rows of the whole input
  long curves = 0;                   ///< stars of this shard that got a curve
  bool checkpoint_found = false;     ///< with resume: an existing checkpoint was read
  long checkpoint_dropped = 0;       ///< its torn or damaged lines (computed again)
  double screen_s = 0.0, stage2_s = 0.0;  ///< wall time of pass 1 and of the curves
  double curve_s = 0.0, predict_s = 0.0;  ///< thread sums
};

/// Parses a shard "K/N" (whole numbers, 1 <= K <= N <= 10^6); false when
/// `text` is not one. Shared by --shard and the metadata `heft merge` reads.
bool parse_shard(std::string_view text, long& k, long& n);

/// Metadata value as one word: spaces and '%' percent-encoded, "-" if empty.
std::string metadata_word(const std::string& text);

/// Metadata word back to its text (the inverse of metadata_word).
std::string metadata_text(const std::string& word);

/// The options of the run that `info` describes (the inverse of its
/// metadata), to compute some of its stars again. The screening options
/// are not in the metadata, only their fingerprint: they are taken from
/// `base` and must match it. InputError naming `source` and the field when
/// a field is missing or malformed or the fingerprint differs.
SurveyOptions survey_options_from(const RankRunInfo& info, const std::string& source, SurveyOptions base);

/// One star of a ranked run computed again, with its figures' data.
struct StarDetail {
  RankRecord record;
  RankDetail detail;
};

/// Computes the stars `ids` of the star table `in` again as run_survey does
/// (screen, curve, sky prediction at the date), in parallel; in the order
/// of `ids`. InputError naming the table when an id has no row.
std::vector<StarDetail> rank_details(std::istream& in, const std::string& input_name, const SurveyOptions& opt,
                                     const std::vector<std::string>& ids);

/// Runs the survey over `in` (named `input_name` in the metadata and in
/// errors). `progress(done, total)` is called from any thread after each
/// curve. Throws InputError for a bad table, a foreign checkpoint or a
/// checkpoint that cannot be written; the checkpoint is removed only by the
/// caller, once the outputs are written.
SurveyRun run_survey(std::istream& in, const std::string& input_name, const SurveyOptions& opt,
                     const std::function<void(long, long)>& progress = {});

}  // namespace heft
