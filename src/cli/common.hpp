#pragma once
// Shared pieces of the command-line layer: exit codes, stderr messages,
// option helpers, per-status counting. Only the CLI talks to the terminal.

#include <CLI/CLI.hpp>
#include <Eigen/Core>
#include <functional>
#include <map>
#include <nlohmann/json.hpp>
#include <string>

#include "heft/catalog.hpp"
#include "heft/prior.hpp"
#include "heft/tablefile.hpp"
#include "heft/screen.hpp"

namespace heft::cli {

/// Exit codes of every heft command.
enum ExitCode : int {
  kOk = 0,
  kUsage = 1,
  kInput = 2,
  kNumeric = 3,
  kPartial = 4,  ///< some rows bad_input or failed
};

/// How main reports an exception escaping a command: its exit code and
/// the words before the message. The one mapping from error kind to exit
/// code: UsageError and CLI errors -> 1, InputError -> 2 (also failed
/// reads and writes of files), NumericError and anything else -> 3.
struct ErrorReport {
  int code;
  const char* prefix;
};
ErrorReport report_of(const std::exception& e);

/// Refuses (CLI::ValidationError) two outputs of one command that would
/// write the same place: pairs of (option name, path); unset paths ("")
/// are skipped, stdout counts as one place, devices never clash.
void require_distinct_outputs(const std::vector<std::pair<std::string, std::string>>& outputs);

/// What a subcommand's setup registers: the function main runs after parsing.
using Runner = std::function<int()>;

/// Prints "heft <command>: <text>" on stderr.
void message(const std::string& command, const std::string& text);

/// Adds an option taking "X,Y,Z" into `v`.
CLI::Option* add_vec3_option(CLI::App* app, const std::string& name, Eigen::Vector3d& v,
                             const std::string& help);
/// Adds an option taking "A,B" into `a` and `b`.
CLI::Option* add_pair_option(CLI::App* app, const std::string& name, double& a, double& b,
                             const std::string& help);

/// Adds --dates START:END:STEP (Julian years within 1900-2200, at most
/// 10000 dates): the grid into `dates`, the text as given into `text`.
CLI::Option* add_date_grid_option(CLI::App* app, std::vector<double>& dates, std::string& text);

/// Adds the calibration and RV options of the screen stage (shared by every
/// command that screens stars).
void add_screen_options(CLI::App* app, ScreenOptions& screen, WindowDefaults& windows,
                        std::string& late_spin_table);
/// The screen options with the spin table file read in.
ScreenOptions resolve_screen_options(const ScreenOptions& screen, const std::string& late_spin_table);

/// Binds the prior options shared by curve, fit and rank: --m-min, --m-max,
/// --ecc (as text into `ecc_text`) and --detect-sigma (`detect_help` says
/// what it does in that command).
void add_prior_options(CLI::App* app, PriorOptions& prior, std::string& ecc_text, const std::string& detect_help);
/// Adds --draws, the Monte Carlo curve's orbit draws (curve and rank).
void add_draws_option(CLI::App* app, int& draws);
/// Parses --ecc into `prior` and validates the priors (UsageError, exit 1).
void resolve_prior_options(PriorOptions& prior, const std::string& ecc_text);

/// Adds --format (csv, ecsv, fits) for the table written by -o.
void add_format_option(CLI::App* app, std::string& format);
/// The format of an output table: `format` for -o (from --format), else
/// from the path's extension.
TableFormat format_for(const std::string& path, const std::string& format = "");

/// The injected companion of star `id` in a heft simulate --truth table:
/// false when the star has none; InputError when the table has no row for it.
bool injected_companion(const std::string& truth_path, const std::string& id, double& a_au, double& mass_mjup);

/// Counts rows by status; prints one summary line per non-ok status.
class StatusCounter {
 public:
  void add(const RowStatus& status);
  long total() const { return total_; }
  long not_ok() const { return total_ - ok_; }
  const std::map<std::string, long>& counts() const { return counts_; }
  void print_summary(const std::string& command) const;
  int exit_code() const { return not_ok() > 0 ? kPartial : kOk; }
  /// The common part of a command's JSON "run" object: heft version,
  /// command, input and its row counts (per status).
  nlohmann::ordered_json run_json(const std::string& command, const std::string& input) const;

 private:
  std::map<std::string, long> counts_;
  long total_ = 0, ok_ = 0;
};

/// A progress bar with rate and ETA on stderr, drawn only when stderr is a
/// terminal and not quiet (silent in pipelines, make and batch jobs).
/// update() may be called from any thread; it redraws at most 5 times a second.
class ProgressBar {
 public:
  ProgressBar(std::string command, long total, bool quiet);
  ~ProgressBar();
  void update(long done);
  /// Clears the bar's line.
  void finish();

 private:
  std::string command_;
  long total_;
  bool enabled_;
  double start_s_, last_s_ = -1.0;
};

/// A fingerprint (16 hex digits) of the screen options and window defaults,
/// for run metadata that must match between shards.
std::string screen_fingerprint(const ScreenOptions& screen, const WindowDefaults& windows);

}  // namespace heft::cli
