// heft simulate end to end: byte-identical across runs and thread counts.
#include <catch2/catch.hpp>
#include "heft/screen.hpp"
#include "heft/simulate.hpp"
#include "heft/stats.hpp"
#include "test_util.hpp"
using namespace heft;

TEST_CASE("simulate is byte-identical across runs and thread counts", "[simulate][cli]") {
  const std::string a = test::tmp_path("sim_a.csv"), b = test::tmp_path("sim_b.csv"),
                    ta = test::tmp_path("sim_ta.csv"), tb = test::tmp_path("sim_tb.csv");
  REQUIRE(test::run_heft("simulate -q --stars 3000 --seed 9 --companion-fraction 0.3 -j 1 -o " + a + " --truth " + ta) == 0);
  REQUIRE(test::run_heft("simulate -q --stars 3000 --seed 9 --companion-fraction 0.3 -j 2 -o " + b + " --truth " + tb) == 0);
  CHECK(test::read_text(a) == test::read_text(b));
  CHECK(test::read_text(ta) == test::read_text(tb));
  const auto truth = test::read_table(ta);
  for (const char* c : {"id", "host_mass", "parallax", "companion", "mass_mjup", "a_au", "period_yr",
                        "ecc", "inc_deg", "arg_peri_deg", "node_deg", "mean_anom_late_deg",
                        "dpm_late_ra", "dpm_late_dec", "dpm_early_ra", "dpm_early_dec"})
    CHECK(truth.col(c) >= 0);
  const auto stars = test::read_table(a);
  REQUIRE(stars.rows.size() == 3000);
  CHECK(stars.num(0, "early_window_start") == 1989.85);
  CHECK(stars.num(0, "late_window_end") == 2017.41);
  std::string err;
  CHECK(test::run_heft("simulate --stars 10 --ecc beta:0", &err) == 1);  // a bad option value is a usage error
  CHECK(err.find("--ecc") != std::string::npos);
}
