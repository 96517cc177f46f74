#include "test_util.hpp"

#include <erfa.h>
#include <erfam.h>
#include <dirent.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>

#include <cstdlib>
#include <fstream>
#include <sstream>

#include "heft/io.hpp"
#include "heft/rng.hpp"

namespace heft::test {

std::string tmp_path(const std::string& name) { return std::string(HEFT_TEST_TMP) + "/" + name; }

void write_text(const std::string& path, const std::string& text) {
  std::ofstream f(path, std::ios::binary);
  f << text;
}

std::size_t line_start(const std::string& text, int line) {
  std::size_t p = 0;
  for (int k = 1; k < line; ++k) p = text.find('\n', p) + 1;
  return p;
}

std::string read_text(const std::string& path) {
  std::ifstream f(path, std::ios::binary);
  std::stringstream ss;
  ss << f.rdbuf();
  return ss.str();
}

bool file_exists(const std::string& path) { return std::ifstream(path).good(); }

std::string fresh_dir(const std::string& name) {
  const std::string d = tmp_path(name);
  std::system(("rm -rf '" + d + "' && mkdir -p '" + d + "'").c_str());
  return d;
}

std::vector<std::string> listing(const std::string& dir) {
  std::vector<std::string> names;
  if (DIR* d = ::opendir(dir.c_str())) {
    while (const dirent* e = ::readdir(d))
      if (std::string(e->d_name) != "." && std::string(e->d_name) != "..") names.push_back(e->d_name);
    ::closedir(d);
  }
  std::sort(names.begin(), names.end());
  return names;
}

int run_heft(const std::string& args, std::string* err) {
  // Unique across the test processes ctest runs side by side (an unseeded
  // std::rand gave every process the same name, so parallel tests read and
  // removed each other's stderr).
  static int calls = 0;
  const std::string err_path =
      tmp_path("last_stderr.txt." + std::to_string(getpid()) + "." + std::to_string(calls++));
  const std::string cmd = std::string(HEFT_BINARY) + " " + args + " 2>" + err_path;
  const int status = std::system(cmd.c_str());
  if (err) *err = read_text(err_path);
  std::remove(err_path.c_str());
  return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

int Table::col(const std::string& name) const {
  for (std::size_t i = 0; i < header.size(); ++i)
    if (header[i] == name) return static_cast<int>(i);
  return -1;
}

double Table::num(std::size_t row, const std::string& name) const {
  double v = kAbsent;
  const int c = col(name);
  if (c < 0 || !parse_double(rows.at(row).at(c), v)) return kAbsent;
  return v;
}

const std::string& Table::str(std::size_t row, const std::string& name) const {
  return rows.at(row).at(col(name));
}

Table read_table(const std::string& path) {
  std::ifstream f(path, std::ios::binary);
  CsvReader csv(f, path);
  Table t;
  if (csv.next()) t.header.assign(csv.fields().begin(), csv.fields().end());
  while (csv.next()) t.rows.emplace_back(csv.fields().begin(), csv.fields().end());
  return t;
}

Astrometry entry(const SkyState<double>& s, double epoch_yr, double pos_err, double pm_err,
                 double win_start, double win_end) {
  Astrometry a;
  a.epoch_yr = epoch_yr;
  a.ra_deg = units::rad_to_deg(s.ra_rad);
  a.dec_deg = units::rad_to_deg(s.dec_rad);
  a.parallax_mas = s.parallax_mas;
  a.pmra_mas_yr = s.pmra_mas_yr;
  a.pmdec_mas_yr = s.pmdec_mas_yr;
  a.ra_error_mas = a.dec_error_mas = a.parallax_error_mas = pos_err;
  a.pmra_error_mas_yr = a.pmdec_error_mas_yr = pm_err;
  a.window_start_yr = win_start;
  a.window_end_yr = win_end;
  return a;
}

SkyState<double> erfa_propagate(const SkyState<double>& s, double epoch_from, double epoch_to) {
  const double jd1 = ERFA_DJ00 + (epoch_from - 2000.0) * ERFA_DJY;
  const double jd2 = ERFA_DJ00 + (epoch_to - 2000.0) * ERFA_DJY;
  double ra, dec, pmr, pmd, px, rv;
  eraStarpm(s.ra_rad, s.dec_rad, units::mas_to_rad(s.pmra_mas_yr) / std::cos(s.dec_rad),
            units::mas_to_rad(s.pmdec_mas_yr), s.parallax_mas / 1000.0, s.rv_km_s, jd1, 0.0,
            jd2, 0.0, &ra, &dec, &pmr, &pmd, &px, &rv);
  return {ra, dec, px * 1000.0, units::rad_to_mas(pmr * std::cos(dec)), units::rad_to_mas(pmd),
          rv};
}

ScreenRow simulate_and_screen(const SurveyModel& model, long index, StarRecord& star,
                              SimTruth& truth) {
  simulate_star(model, index, star, truth);
  return screen_star(star, validate_star(star), ScreenOptions{});
}

std::vector<OrbitDraw> face_on_ring(int n, std::uint64_t seed) {
  Rng rng(seed);
  std::vector<OrbitDraw> d;
  for (int k = 0; k < n; ++k)
    d.push_back({10.0, 5.0, 0.0, 0.0, 0.0, 0.0, 360.0 * rng.uniform(), 2016.0, 30.0, 20.0, 1.0, 1.0 / n});
  return d;
}

}  // namespace heft::test
