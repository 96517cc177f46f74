#include "cli/common.hpp"

#include <iostream>

#include "heft/calibrate.hpp"
#include "heft/version.hpp"

namespace heft::cli {

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

void add_screen_options(CLI::App* app, ScreenOptions& screen, WindowDefaults& windows,
                        std::string& late_spin_table) {
  add_vec3_option(app, "--early-orient", screen.early.orient_mas,
                  "orientation offset of the early frame at its epoch (mas), subtracted");
  add_vec3_option(app, "--early-spin", screen.early.spin_uas_yr,
                  "spin of the early frame (uas/yr), subtracted from its PMs");
  add_vec3_option(app, "--late-spin", screen.late.spin_uas_yr,
                  "spin of the late frame (uas/yr), subtracted from its PMs");
  app->add_option("--late-spin-table", late_spin_table,
                  "CSV mag_min,mag_max,wx,wy,wz (uas/yr): late-frame spin by the star's 'mag'")
      ->check(CLI::ExistingFile);
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
                  "prior width of that assumed radial velocity (km/s)")
      ->check(CLI::NonNegativeNumber)
      ->default_val(30.0);
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

void StatusCounter::add(const std::string& status) {
  ++total_;
  if (status == "ok") ++ok_;
  else ++counts_[status];
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

}  // namespace heft::cli
