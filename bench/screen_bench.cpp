// screen_bench: throughput of `heft screen` on a 1,000,000-star canonical
// table. Prints parse and compute rates separately (stars/s, one core), the
// end-to-end rate of the heft binary, and its peak RSS at 1e5 and 1e6 stars
// (flat when the screen streams).
//
// Usage: screen_bench [N=1000000] [workdir=/tmp]

#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "heft/catalog.hpp"
#include "heft/io.hpp"
#include "heft/screen.hpp"
#include "heft/simulate.hpp"

using namespace heft;
using Clock = std::chrono::steady_clock;

namespace {
double seconds_since(Clock::time_point t0) {
  return std::chrono::duration<double>(Clock::now() - t0).count();
}

void write_table(const std::string& path, long n) {
  std::ofstream f(path, std::ios::binary);
  std::string buf = star_table_header();
  const CatalogueModel em = default_early_model(), lm = default_late_model();
  for (long i = 0; i < n; ++i) {
    StarRecord s;
    s.id = "B" + std::to_string(i);
    Rng rng = Rng::for_star(1, s.id);
    const double pm = 100.0 * rng.uniform(), th = units::kTwoPi * rng.uniform();
    const SkyState<double> late{units::kTwoPi * rng.uniform(), std::asin(rng.uniform(-1, 1)),
                                rng.uniform(1.0, 50.0), pm * std::cos(th), pm * std::sin(th), 0};
    s.late = make_astrometry(late, lm, rng);
    s.early = make_astrometry(propagate(late, em.epoch_yr - lm.epoch_yr), em, rng);
    if (i % 3 == 0) {
      s.rv_km_s = rng.uniform(-40, 40);
      s.rv_error_km_s = 1.0;
    }
    s.mag = rng.uniform(4, 12);
    append_star_row(buf, s);
    if (buf.size() > (1u << 22)) {
      f << buf;
      buf.clear();
    }
  }
  f << buf;
}

// Runs `heft screen path -o out -q` as a child; returns wall seconds and the
// child's peak RSS (MiB).
void run_binary(const std::string& in, const std::string& out, double& secs, double& rss_mib) {
  const auto t0 = Clock::now();
  const pid_t pid = fork();
  if (pid == 0) {
    execl(HEFT_BINARY, HEFT_BINARY, "screen", in.c_str(), "-o", out.c_str(), "-q", (char*)nullptr);
    _exit(127);
  }
  int status = 0;
  struct rusage ru {};
  wait4(pid, &status, 0, &ru);
  secs = seconds_since(t0);
  rss_mib = ru.ru_maxrss / 1024.0;
}
}  // namespace

int main(int argc, char** argv) {
  const long n = argc > 1 ? std::atol(argv[1]) : 1000000;
  const std::string dir = argc > 2 ? argv[2] : "/tmp";
  const std::string big = dir + "/heft_bench_stars.csv", small = dir + "/heft_bench_small.csv";
  const std::string out = dir + "/heft_bench_out.csv";
  auto t0 = Clock::now();
  write_table(big, n);
  write_table(small, n / 10);
  std::printf("generated %ld + %ld stars in %.1f s\n", n, n / 10, seconds_since(t0));

  // Parse only.
  {
    std::ifstream f(big, std::ios::binary);
    StarTableReader reader(f, big);
    StarRecord s;
    std::string bad;
    long rows = 0;
    t0 = Clock::now();
    while (reader.next(s, bad)) ++rows;
    const double dt = seconds_since(t0);
    std::printf("parse:   %9.0f stars/s (%ld rows in %.2f s)\n", rows / dt, rows, dt);
  }
  // Compute only, on records held in memory, with the CSV row formatting.
  {
    std::ifstream f(small, std::ios::binary);
    StarTableReader reader(f, small);
    std::vector<StarRecord> stars;
    StarRecord s;
    std::string bad;
    while (reader.next(s, bad)) stars.push_back(s);
    std::string buf;
    t0 = Clock::now();
    long done = 0;
    for (int rep = 0; rep < 3; ++rep)
      for (const auto& st : stars) {
        append_screen_row(buf, screen_star(st, "", ScreenOptions{}));
        if (buf.size() > (1u << 20)) buf.clear();
        ++done;
      }
    const double dt = seconds_since(t0);
    std::printf("compute: %9.0f stars/s (%ld stars in %.2f s, incl. row formatting)\n", done / dt,
                done, dt);
  }
  // End to end through the binary, and its peak memory at two sizes.
  double secs_small, rss_small, secs_big, rss_big;
  run_binary(small, out, secs_small, rss_small);
  run_binary(big, out, secs_big, rss_big);
  std::printf("heft screen end to end: %9.0f stars/s (%ld stars in %.2f s)\n", n / secs_big, n,
              secs_big);
  std::printf("peak RSS: %.1f MiB at %ld stars, %.1f MiB at %ld stars\n", rss_small, n / 10,
              rss_big, n);
  std::remove(big.c_str());
  std::remove(small.c_str());
  std::remove(out.c_str());
  return 0;
}
