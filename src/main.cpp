// heft: weighs unseen companions from the way they tug on their host star.
// main only registers the subcommands, parses, and maps errors to exit codes.

#include <CLI/CLI.hpp>
#include <glog/logging.h>
#include <malloc.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <iostream>

#include "cli/commands.hpp"
#include "cli/common.hpp"
#include "heft/error.hpp"
#include "heft/io.hpp"
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
  // Batch jobs allocate and free buffers of the same sizes star after star
  // (a curve's kept draws: about 2 MB). Below 64 MiB they come from the
  // heap and stay there when freed, instead of being mapped afresh and
  // faulted in page by page each time (glibc's default beyond 128 KiB to
  // 32 MiB): heft rank on 10^4 stars had 54,000-59,000 page faults and
  // 6.3 core-s, now 6,500 and 5.7 (docs/performance.md, stop 35).
  mallopt(M_MMAP_THRESHOLD, 64 << 20);
  mallopt(M_TRIM_THRESHOLD, 128 << 20);
  Runner run;
  setup_ingest(app, run);
  setup_screen(app, run);
  setup_curve(app, run);
  setup_fit(app, run);
  setup_predict(app, run);
  setup_rank(app, run);
  setup_merge(app, run);
  setup_plot(app, run);
  setup_report(app, run);
  setup_simulate(app, run);
  setup_convert(app, run);
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    const int code = app.exit(e);
    return code == 0 ? kOk : kUsage;
  }
  heft::remove_outputs_on_signals();
  try {
    const int code = run();
    // Data on stdout that could not be written is an error, not a success.
    if (std::fflush(stdout) != 0 || std::ferror(stdout)) {
      std::cerr << "heft: error: <stdout>: write failed: " << std::strerror(errno) << '\n';
      return kInput;
    }
    return code;
  } catch (const std::exception& e) {
    const ErrorReport r = report_of(e);
    std::cerr << "heft: " << r.prefix << e.what() << '\n';
    return r.code;
  }
}
