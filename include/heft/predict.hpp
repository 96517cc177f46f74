#pragma once
/// \file predict.hpp
/// Where the companion is on the sky at a date, from weighted orbit draws
/// (heft fit --samples or heft curve --keep-draws): separation quantiles,
/// position angle with circular statistics (modes, shortest 68 % arc), the
/// probability of lying between two working angles, and a density map.

#include <iosfwd>
#include <functional>
#include <limits>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "heft/draws.hpp"

namespace heft {

/// Offset of the companion from the host (mas): east = Delta alpha*, north =
/// Delta delta; its separation (mas) and position angle (deg, [0, 360),
/// north through east).
struct SkyOffset {
  double east_mas, north_mas, sep_mas, pa_deg, weight;
};

/// The companion's offset for each draw at date_yr (docs/orbits.md).
std::vector<SkyOffset> sky_offsets(const std::vector<OrbitDraw>& draws, double date_yr);

inline constexpr int kGridCellsAcross68 = 64, kGridMinCells = 101, kGridMaxCells = 301;

struct PredictOptions {
  double iwa_mas = 0.0;                                        ///< inner working angle
  double owa_mas = std::numeric_limits<double>::infinity();    ///< outer working angle
  /// Cells per side of the density map; 0 = automatic: at least
  /// kGridCellsAcross68 cells across the 68 % region, kGridMinCells to
  /// kGridMaxCells.
  int grid_n = 0;
  /// Half width of the map (mas); 0 = automatic: 1.2 x the 99.5 % separation
  /// of the draws (whatever the working angles).
  double grid_half_mas = 0.0;
};

/// The position angle counts as constrained when the mean resultant length
/// of the angles, or of the doubled angles (two opposite directions, the
/// node ambiguity of velocity-only data), reaches this (for a von Mises
/// distribution R = 0.5 is a concentration of ~1.2, half the weight within
/// ~70 deg of the mean). Below it no modes are given (note pa_unconstrained).
inline constexpr double kMinPaResultant = 0.5;

struct SkyPrediction {
  double date_yr = 0.0;
  double ess = 0.0;             ///< effective number of draws
  double sep_q[5] = {};         ///< separation quantiles 2.5, 16, 50, 84, 97.5 % (mas)
  double pa_mean_deg = 0.0;     ///< circular mean of the position angle
  double pa_resultant = 0.0;    ///< mean resultant length R (1: one direction, 0: uniform)
  double pa_resultant_axial = 0.0;  ///< the same of the doubled angles (1: one axis)
  /// max(R, axial R) >= kMinPaResultant; otherwise pa_modes_deg is empty.
  bool pa_constrained = false;
  /// Modes of the position-angle density (smoothed with a 5 deg Gaussian
  /// kernel; maxima above a quarter of the highest), strongest first; empty
  /// unless pa_constrained.
  std::vector<double> pa_modes_deg;
  double pa_arc68_start_deg = 0.0;  ///< shortest arc with 68 % of the weight, from its start
  double pa_arc68_width_deg = 0.0;  ///< through increasing position angle
  double p_in_wa = 0.0;         ///< P(iwa <= sep <= owa)
  /// Density map (per mas^2): cell (i, j) is centred at east =
  /// -h + (i + 0.5) 2h / n, north = -h + (j + 0.5) 2h / n; index j * n + i.
  double grid_half_mas = 0.0;
  int grid_n = 0;
  std::vector<double> density;
};

/// Summary of the draws at one date. Weights need not be normalised.
SkyPrediction predict_sky(const std::vector<OrbitDraw>& draws, double date_yr, const PredictOptions& opt);
/// The same from offsets already computed by sky_offsets at date_yr.
SkyPrediction summarize_sky(const std::vector<SkyOffset>& offsets, double date_yr, const PredictOptions& opt);

/// The draws' separations at many dates: what does not depend on the date
/// (Thiele-Innes constants in mas, mean motion) is prepared once per draw,
/// and each date solves Kepler's equation four draws at a time
/// (kepler_solutions4).
class SkyTracks {
 public:
  explicit SkyTracks(const std::vector<OrbitDraw>& draws);
  /// The separations (mas) at date_yr, in the draws' order, into `sep_mas`:
  /// sky_offsets' sep_mas without the position angle.
  void separations(double date_yr, std::vector<double>& sep_mas) const;

 private:
  struct Track {
    double A, B, F, G;  ///< Thiele-Innes constants times a x parallax (mas)
    double ecc, root_1me2, mean_anom_ref_rad, mean_motion_rad_yr, ref_epoch_yr;
  };
  std::vector<Track> tracks_;
};

/// The best of a grid of dates for a quantity of the draws' separations
/// (mas, in the draws' order; each draw on its own orbit at every date): the date of the largest value (the
/// first on ties), that value, and the value at the first date. NaN for an
/// empty grid.
struct BestDate {
  double date_yr, value, first_value;
};
BestDate best_date(const std::vector<OrbitDraw>& draws, const std::vector<double>& dates_yr,
                   const std::function<double(const std::vector<double>&)>& value);

/// The prediction table of `heft predict` (docs/formats.md): header and one
/// row per star and date; `n_draws` is the star's number of draws.
/// The prediction table's columns with their units, in output order.
const std::vector<ColumnUnit>& prediction_column_units();
std::string prediction_header();
void append_prediction_row(std::string& out, const std::string& id, std::size_t n_draws, const SkyPrediction& p);

/// The density-map table (`heft predict --grid`): header and the n x n
/// cells of one star and date (cell centres in mas, density per mas^2).
/// The density grid's columns with their units, in output order.
const std::vector<ColumnUnit>& grid_column_units();
std::string grid_header();
/// One prediction as a JSON object (the per-star entries of `heft predict
/// --json`; sep_mas quantiles q2.5 ... q97.5).
nlohmann::ordered_json prediction_json(const std::string& id, std::size_t n_draws, const SkyPrediction& p);

void append_grid_rows(std::string& out, const std::string& id, const SkyPrediction& p);

/// One density map read back from a grid table.
struct SkyGrid {
  std::string id;
  double date_yr = 0.0;
  double half_mas = 0.0;        ///< half width of the map
  int n = 0;                    ///< cells per side
  std::vector<double> density;  ///< index j * n + i, as in SkyPrediction
};
/// Reads the map of star `id` at `date_yr` (empty id / NaN date: the first
/// in the table). InputError naming file, line and column for a bad value,
/// or the file when there is no square map for that star and date.
SkyGrid read_sky_grid(std::istream& in, const std::string& name, const std::string& id, double date_yr);

/// Shortest arc (deg) holding `fraction` of the weight of angles `deg`
/// (any values; taken mod 360): start and width through increasing angle.
void shortest_arc(std::vector<std::pair<double, double>> deg_weight, double fraction, double& start_deg,
                  double& width_deg);

}  // namespace heft
