#include "cli/common.hpp"

#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdio>

#include <iostream>

#include "heft/calibrate.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
#include "heft/rng.hpp"
#include "heft/simulate.hpp"
#include "heft/tablefile.hpp"
#include "heft/version.hpp"

namespace heft::cli {

ErrorReport report_of(const std::exception& e) {
  if (dynamic_cast<const UsageError*>(&e) || dynamic_cast<const CLI::Error*>(&e)) return {kUsage, "usage error: "};
  if (dynamic_cast<const InputError*>(&e)) return {kInput, "error: "};
  if (dynamic_cast<const NumericError*>(&e)) return {kNumeric, "numerical failure: "};
  return {kNumeric, "failure: "};
}

void require_distinct_outputs(const std::vector<std::pair<std::string, std::string>>& outputs) {
  std::map<std::string, std::string> seen;  // identity -> option
  for (const auto& [option, path] : outputs) {
    if (path.empty()) continue;
    const std::string id = resolve_output(path).identity;
    if (id.empty()) continue;
    const auto [it, fresh] = seen.emplace(id, option);
    if (!fresh)
      throw CLI::ValidationError(it->second + " and " + option + " would both write " +
                                 (id == "<stdout>" ? std::string("standard output") : "'" + path + "'") +
                                 "; give each output its own path");
  }
}

void message(const std::string& command, const std::string& text) {
  std::cerr << "heft " << command << ": " << text << '\n';
}

CLI::Option* add_vec3_option(CLI::App* app, const std::string& name, Eigen::Vector3d& v,
                             const std::string& help) {
  return app
      ->add_option_function<std::vector<double>>(
          name, [&v](const std::vector<double>& x) { v = Eigen::Vector3d(x[0], x[1], x[2]); },
          help)
      ->delimiter(',')
      ->expected(3)
      ->type_name("X,Y,Z");
}

CLI::Option* add_pair_option(CLI::App* app, const std::string& name, double& a, double& b,
                             const std::string& help) {
  return app
      ->add_option_function<std::vector<double>>(
          name,
          [&a, &b](const std::vector<double>& x) {
            a = x[0];
            b = x[1];
          },
          help)
      ->delimiter(',')
      ->expected(2)
      ->type_name("A,B");
}

CLI::Option* add_date_grid_option(CLI::App* app, std::vector<double>& dates, std::string& text) {
  return app
      ->add_option_function<std::string>(
          "--dates",
          [&dates, &text](const std::string& v) {
            const auto a = v.find(':'), b = a == std::string::npos ? a : v.find(':', a + 1);
            double start = 0, end = 0, step = 0;
            if (b == std::string::npos || !parse_double(std::string_view(v).substr(0, a), start) ||
                !parse_double(std::string_view(v).substr(a + 1, b - a - 1), end) ||
                !parse_double(std::string_view(v).substr(b + 1), step))
              throw CLI::ValidationError("--dates", "expected START:END:STEP (decimal Julian years), got '" + v + "'");
            if (!(start >= 1900.0 && end <= 2200.0 && start < end))
              throw CLI::ValidationError("--dates", "START < END, both within 1900-2200 (Julian years, not MJD)");
            if (!(step > 0.0 && (end - start) / step <= 10000.0))
              throw CLI::ValidationError("--dates", "STEP must be > 0 and give at most 10000 dates");
            dates.clear();
            for (long k = 0; start + k * step <= end + 1e-9 * step; ++k) dates.push_back(start + k * step);
            text = v;
          },
          "a date grid START:END:STEP (decimal Julian years, 1900-2200)")
      ->type_name("START:END:STEP");
}

void add_format_option(CLI::App* app, std::string& format) {
  app->add_option("--format", format,
                  "format of the -o table: csv, ecsv (astropy's Enhanced CSV, with units) or fits (binary table "
                  "with TUNIT); default: from the extension (.ecsv, .fits), else csv")
      ->check(CLI::IsMember({"csv", "ecsv", "fits"}));
}

TableFormat format_for(const std::string& path, const std::string& format) {
  return output_table_format(path, format, "--format");
}

void add_prior_options(CLI::App* app, PriorOptions& prior, std::string& ecc_text, const std::string& detect_help) {
  ecc_text = prior.ecc.str();
  app->add_option("--m-min", prior.m_min_mjup, "lower bound of the log-uniform mass prior of detections (MJup)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  app->add_option("--m-max", prior.m_max_mjup, "upper bound of the mass prior (MJup)")
      ->check(CLI::PositiveNumber)->capture_default_str();
  app->add_option("--ecc", ecc_text,
                  "eccentricity prior: V (fixed) | uniform:A,B | loguniform:A,B | beta:A,B (Monte Carlo curves cut it "
                  "at 0.99)")
      ->capture_default_str();
  app->add_option("--detect-sigma", prior.detect_sigma, detect_help)->capture_default_str();
}

void add_draws_option(CLI::App* app, int& draws) {
  app->add_option("--draws", draws,
                  "orbit draws per separation and round, at most (weighed in steps of at most 64 until 1,000 "
                  "effective samples)")
      ->check(CLI::Range(16, 10000000))->capture_default_str();
}

void resolve_prior_options(PriorOptions& prior, const std::string& ecc_text) {
  prior.ecc = Distribution::parse(ecc_text, "--ecc");
  prior.validate();
}

void add_screen_options(CLI::App* app, ScreenOptions& screen, WindowDefaults& windows,
                        std::string& late_spin_table) {
  add_vec3_option(app, "--early-orient", screen.early.orient_mas,
                  "orientation offset of the early frame at its epoch (mas), subtracted");
  add_vec3_option(app, "--early-spin", screen.early.spin_uas_yr,
                  "spin of the early frame (uas/yr), subtracted from its PMs");
  add_vec3_option(app, "--late-spin", screen.late.spin_uas_yr,
                  "spin of the late frame (uas/yr), subtracted from its PMs");
  app->add_option("--late-spin-table", late_spin_table,
                  "CSV mag_min,mag_max,wx,wy,wz (uas/yr): late-frame spin by the star's 'mag'");
  app->add_option("--early-inflate", screen.early.inflate,
                  "early errors x F (covariance x F^2)")
      ->check(CLI::PositiveNumber)
      ->default_val(1.0);
  app->add_option("--late-inflate", screen.late.inflate, "late errors x F (covariance x F^2)")
      ->check(CLI::PositiveNumber)
      ->default_val(1.0);
  app->add_option("--early-floor", screen.early.floor_mas_yr,
                  "added in quadrature to the early PM errors (mas/yr)")
      ->check(CLI::NonNegativeNumber)
      ->default_val(0.0);
  app->add_option("--late-floor", screen.late.floor_mas_yr,
                  "added in quadrature to the late PM errors (mas/yr)")
      ->check(CLI::NonNegativeNumber)
      ->default_val(0.0);
  app->add_option("--assume-rv", screen.assume_rv_km_s,
                  "radial velocity of stars without 'rv' (km/s)")
      ->default_val(0.0);
  app->add_option("--rv-sigma", screen.rv_sigma_km_s,
                  "prior width of that assumed radial velocity (km/s); default per star "
                  "sqrt(30^2 + v_t^2/2) from its tangential speed v_t (docs/method.md, Sect. 2)")
      ->check(CLI::NonNegativeNumber);
  add_pair_option(app, "--early-window", windows.early_start_yr, windows.early_end_yr,
                  "default early observing window START,END (yr) for rows without one")
      ->default_str("1989.85,1993.21");
  add_pair_option(app, "--late-window", windows.late_start_yr, windows.late_end_yr,
                  "default late observing window START,END (yr) for rows without one")
      ->default_str("2014.57,2017.41");
}

ScreenOptions resolve_screen_options(const ScreenOptions& screen, const std::string& late_spin_table) {
  ScreenOptions opt = screen;
  if (!late_spin_table.empty()) opt.late.spin_table = read_spin_table(late_spin_table);
  return opt;
}

void StatusCounter::add(const RowStatus& status) {
  ++total_;
  if (status.ok()) ++ok_;
  else ++counts_[status.text()];
}

nlohmann::ordered_json StatusCounter::run_json(const std::string& command,
                                              const std::string& input) const {
  nlohmann::ordered_json run;
  run["heft_version"] = kVersion;
  run["command"] = command;
  run["input"] = input;
  run["rows"] = total_;
  run["rows_ok"] = ok_;
  nlohmann::ordered_json bad = nlohmann::ordered_json::object();
  for (const auto& [status, n] : counts_) bad[status] = n;
  run["rows_not_ok"] = bad;
  return run;
}

void StatusCounter::print_summary(const std::string& command) const {
  for (const auto& [status, n] : counts_)
    message(command, std::to_string(n) + " row" + (n == 1 ? "" : "s") + " " + status);
}

namespace {
double now_s() {
  return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
}
std::string clock_text(double s) {
  const long t = static_cast<long>(std::lround(s));
  char b[32];
  std::snprintf(b, sizeof b, "%ld:%02ld:%02ld", t / 3600, (t / 60) % 60, t % 60);
  return b;
}
}  // namespace

ProgressBar::ProgressBar(std::string command, long total, bool quiet)
    : command_(std::move(command)), total_(total), enabled_(!quiet && total > 0 && isatty(STDERR_FILENO)),
      start_s_(now_s()) {}

ProgressBar::~ProgressBar() { finish(); }

void ProgressBar::update(long done) {
  if (!enabled_) return;
#pragma omp critical(heft_progress)
  {
    const double t = now_s();
    if (t - last_s_ >= 0.2 || done == total_) {
      last_s_ = t;
      const double el = t - start_s_, rate = el > 0 ? done / el : 0.0;
      const int width = 30, full = static_cast<int>(width * static_cast<double>(done) / total_);
      std::string bar(full, '#');
      bar.resize(width, '-');
      char b[160];
      std::snprintf(b, sizeof b, "\rheft %s [%s] %ld/%ld  %.1f/s  ETA %s ", command_.c_str(), bar.c_str(), done,
                    total_, rate, rate > 0 ? clock_text((total_ - done) / rate).c_str() : "?");
      std::cerr << b << std::flush;
    }
  }
}

void ProgressBar::finish() {
  if (!enabled_) return;
  std::cerr << "\r" << std::string(100, ' ') << "\r" << std::flush;
  enabled_ = false;
}

std::string screen_fingerprint(const ScreenOptions& s, const WindowDefaults& w) {
  std::string text;
  for (const EpochCalibration* c : {&s.early, &s.late}) {
    for (int k = 0; k < 3; ++k) text += format_double(c->orient_mas[k]) + "," + format_double(c->spin_uas_yr[k]) + ",";
    for (const auto& b : c->spin_table)
      text += format_double(b.mag_lo) + "," + format_double(b.mag_hi) + "," + format_double(b.spin_uas_yr[0]) + "," +
              format_double(b.spin_uas_yr[1]) + "," + format_double(b.spin_uas_yr[2]) + ",";
    text += format_double(c->inflate) + "," + format_double(c->floor_mas_yr) + ";";
  }
  text += format_double(s.assume_rv_km_s) + "," + format_double(s.rv_sigma_km_s) + ";";
  for (double v : {w.early_start_yr, w.early_end_yr, w.late_start_yr, w.late_end_yr}) text += format_double(v) + ",";
  char b[32];
  std::snprintf(b, sizeof b, "%016llx", static_cast<unsigned long long>(fnv1a64(text)));
  return b;
}

bool injected_companion(const std::string& path, const std::string& id, double& a_au, double& mass_mjup) {
  TableInput in(path, truth_column_units());
  ColumnTable t(in.stream(), in.name(), {"id", "companion", "a_au", "mass_mjup"});
  const int ii = t.index("id"), ic = t.index("companion"), ia = t.index("a_au"), im = t.index("mass_mjup");
  while (t.next()) {
    if (t.text(ii) != id) continue;
    if (t.number(ic) == 0) return false;
    a_au = t.number(ia);
    mass_mjup = t.number(im);
    return true;
  }
  throw InputError(in.name(), 0, 0, "no row for star '" + id + "'");
}

}  // namespace heft::cli
