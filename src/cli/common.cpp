#include "cli/common.hpp"

#include <iostream>

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

void StatusCounter::add(const std::string& status) {
  ++total_;
  if (status == "ok") ++ok_;
  else ++counts_[status];
}

void StatusCounter::print_summary(const std::string& command) const {
  for (const auto& [status, n] : counts_)
    message(command, std::to_string(n) + " row" + (n == 1 ? "" : "s") + " " + status);
}

}  // namespace heft::cli
