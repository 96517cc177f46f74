#pragma once
// One setup function per subcommand; each lives in its own file.
#include <CLI/CLI.hpp>

#include "cli/common.hpp"

namespace heft::cli {
void setup_ingest(CLI::App& app, Runner& run);
void setup_convert(CLI::App& app, Runner& run);
void setup_curve(CLI::App& app, Runner& run);
void setup_fit(CLI::App& app, Runner& run);
void setup_predict(CLI::App& app, Runner& run);
void setup_rank(CLI::App& app, Runner& run);
void setup_merge(CLI::App& app, Runner& run);
void setup_plot(CLI::App& app, Runner& run);
void setup_report(CLI::App& app, Runner& run);
void setup_screen(CLI::App& app, Runner& run);
void setup_simulate(CLI::App& app, Runner& run);
}  // namespace heft::cli
