#pragma once
// Helpers shared by the tests: temporary files, running the heft binary,
// reading CSV output back, and building catalogue entries.
#include <map>
#include <string>
#include <vector>

#include "heft/catalog.hpp"
#include "heft/draws.hpp"
#include "heft/propagate.hpp"
#include "heft/screen.hpp"
#include "heft/simulate.hpp"

namespace heft::test {

/// A fresh path under the test build directory (unique per test name).
std::string tmp_path(const std::string& name);
void write_text(const std::string& path, const std::string& text);
std::string read_text(const std::string& path);
/// Offset of 1-based line `line` in a text.
std::size_t line_start(const std::string& text, int line);
bool file_exists(const std::string& path);
/// A fresh empty folder under the test build directory (removed and made again).
std::string fresh_dir(const std::string& name);
/// The names in folder `dir` (without . and ..), sorted.
std::vector<std::string> listing(const std::string& dir);

/// Runs `heft ARGS` through the shell; returns its exit code; stderr of the
/// run is stored in `err` when given.
int run_heft(const std::string& args, std::string* err = nullptr);

/// A parsed CSV table: header and rows of fields.
struct Table {
  std::vector<std::string> header;
  std::vector<std::vector<std::string>> rows;
  int col(const std::string& name) const;
  double num(std::size_t row, const std::string& name) const;
  const std::string& str(std::size_t row, const std::string& name) const;
};
Table read_table(const std::string& path);

/// A catalogue entry with exact values from `s` (at `epoch_yr`), diagonal
/// errors pos_err (mas) and pm_err (mas/yr), and the given window.
Astrometry entry(const SkyState<double>& s, double epoch_yr, double pos_err, double pm_err,
                 double win_start, double win_end);

/// The state at `epoch_to` of a star whose late state is `late` (ERFA
/// eraStarpm with its light-time term, i.e. the reference library).
SkyState<double> erfa_propagate(const SkyState<double>& s, double epoch_from, double epoch_to);

/// Face-on (i = 0) circular orbits at a x parallax = 200 mas, random phases:
/// n equal-weight draws of one star.
std::vector<OrbitDraw> face_on_ring(int n, std::uint64_t seed);

/// Simulates star `index` of `model` and screens it with default options.
ScreenRow simulate_and_screen(const SurveyModel& model, long index, StarRecord& star,
                              SimTruth& truth);

}  // namespace heft::test
