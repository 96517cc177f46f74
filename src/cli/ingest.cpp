// heft ingest: placeholder replaced below.
#include "cli/commands.hpp"
namespace heft::cli {
void setup_ingest(CLI::App&, Runner&) {}
}  // namespace heft::cli
