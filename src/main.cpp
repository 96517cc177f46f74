// heft: weighs unseen companions from the way they tug on their host star.
// main only registers the subcommands, parses, and maps errors to exit codes.

#include <CLI/CLI.hpp>
#include <glog/logging.h>
#include <iostream>

#include "cli/commands.hpp"
#include "cli/common.hpp"
#include "heft/error.hpp"
#include "heft/version.hpp"

int main(int argc, char** argv) {
  using namespace heft::cli;
  CLI::App app{
      "heft: finds and weighs unseen companions from the proper-motion anomaly between two "
      "astrometric catalogues, and tells an imaging team where to point."};
  app.set_version_flag("--version", heft::kVersion);
  app.require_subcommand(1);
  // Ceres reports through glog; heft reports failures itself (as flags).
  FLAGS_minloglevel = google::GLOG_FATAL;
  Runner run;
  setup_ingest(app, run);
  setup_screen(app, run);
  setup_curve(app, run);
  setup_fit(app, run);
  setup_predict(app, run);
  setup_rank(app, run);
  setup_merge(app, run);
  setup_plot(app, run);
  setup_simulate(app, run);
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    const int code = app.exit(e);
    return code == 0 ? kOk : kUsage;
  }
  try {
    return run();
  } catch (const heft::InputError& e) {
    std::cerr << "heft: error: " << e.what() << '\n';
    return kInput;
  } catch (const heft::NumericError& e) {
    std::cerr << "heft: numerical failure: " << e.what() << '\n';
    return kNumeric;
  } catch (const CLI::Error& e) {
    std::cerr << "heft: " << e.what() << '\n';
    return kUsage;
  } catch (const std::exception& e) {
    std::cerr << "heft: failure: " << e.what() << '\n';
    return kNumeric;
  }
}
