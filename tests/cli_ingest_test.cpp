// heft ingest: column maps with units, the three matching modes, and the
// round trip ingest -> screen against the canonical table written directly.
#include <catch2/catch.hpp>

#include "heft/io.hpp"
#include "heft/propagate.hpp"
#include "test_util.hpp"

using namespace heft;
using heft::test::run_heft;
using heft::test::tmp_path;

namespace {
struct Truth {
  std::string id;
  SkyState<double> late;
};

std::vector<Truth> truths() {
  std::vector<Truth> t;
  for (int i = 0; i < 6; ++i)
    t.push_back({"KMG-" + std::to_string(100 + i),
                 {units::deg_to_rad(60.0 + 0.5 * i), units::deg_to_rad(-20.0 + 0.3 * i),
                  10.0 + 5 * i, 30.0 - 4 * i, -15.0 + 3 * i, 0.0}});
  return t;
}

// Raw early extract: degrees and mas; late extract: radians for positions,
// arcsec/yr for PMs, uas for errors, epoch as a JD column.
void write_raw(const std::string& early_path, const std::string& late_path) {
  std::string e = "hid,RAdeg,DEdeg,Plx,pmRA,pmDE,e_RA,e_DE,e_Plx,e_pmRA,e_pmDE,Hmag\n";
  std::string l = "# late extract\nsrc,alpha_rad,delta_rad,plx,mu_a,mu_d,s_a,s_d,s_plx,s_mua,s_mud,c_ad,jd,G\n";
  int k = 0;
  for (const auto& t : truths()) {
    const SkyState<double> early = propagate(t.late, 1991.25 - 2016.0);
    auto num = [](double v) { return format_double(v); };
    e += "H" + std::to_string(k) + "," + num(units::rad_to_deg(early.ra_rad)) + "," +
         num(units::rad_to_deg(early.dec_rad)) + "," + num(early.parallax_mas) + "," +
         num(early.pmra_mas_yr) + "," + num(early.pmdec_mas_yr) + ",0.8,0.7,0.9,0.8,0.75,7.5\n";
    l += "G" + std::to_string(k) + "," + num(t.late.ra_rad) + "," + num(t.late.dec_rad) + "," +
         num(t.late.parallax_mas) + "," + num(t.late.pmra_mas_yr / 1e3) + "," +
         num(t.late.pmdec_mas_yr / 1e3) + ",30,25,40,35,30,0.1,2457389.0,8.1\n";
    ++k;
  }
  l += "G99,1.0,0.2,5,0.001,0.001,30,25,40,35,30,0,2457389.0,12\n";  // late-only star
  test::write_text(early_path, e);
  test::write_text(late_path, l);
}

const char* kMap = R"({
  "comment": "Keth Moving Group, invented example",
  "early": {
    "epoch": 1991.25,
    "window": [1989.85, 1993.21],
    "columns": {"ra": "RAdeg", "dec": "DEdeg", "parallax": "Plx", "pmra": "pmRA",
                "pmdec": "pmDE", "ra_error": "e_RA", "dec_error": "e_DE",
                "parallax_error": "e_Plx", "pmra_error": "e_pmRA", "pmdec_error": "e_pmDE"}
  },
  "late": {
    "epoch": {"column": "jd", "unit": "jd"},
    "columns": {"ra": {"column": "alpha_rad", "unit": "rad"},
                "dec": {"column": "delta_rad", "unit": "rad"},
                "parallax": "plx",
                "pmra": {"column": "mu_a", "unit": "arcsec/yr"},
                "pmdec": {"column": "mu_d", "unit": "arcsec/yr"},
                "ra_error": {"column": "s_a", "unit": "uas"},
                "dec_error": {"column": "s_d", "unit": "uas"},
                "parallax_error": {"column": "s_plx", "unit": "uas"},
                "pmra_error": {"column": "s_mua", "unit": "uas/yr"},
                "pmdec_error": {"column": "s_mud", "unit": "uas/yr"},
                "ra_dec_corr": "c_ad"},
    "star": {"mag": "G"}
  }
})";
}  // namespace

TEST_CASE("ingest by key, pairs and position, round trip into screen", "[cli][ingest]") {
  const std::string e = tmp_path("raw_early.csv"), l = tmp_path("raw_late.csv"),
                    map = tmp_path("map.json");
  write_raw(e, l);
  test::write_text(map, kMap);
  // Keys differ between the extracts: a cross-match table links them.
  std::string pairs = "hid,src\n";
  for (int k = 0; k < 6; ++k) pairs += "H" + std::to_string(k) + ",G" + std::to_string(k) + "\n";
  test::write_text(tmp_path("pairs.csv"), pairs);
  const std::string by_pairs = tmp_path("ing_pairs.csv"), by_pos = tmp_path("ing_pos.csv"),
                    unmatched = tmp_path("ing_unmatched.csv");
  std::string err;
  REQUIRE(run_heft("ingest --early " + e + " --late " + l + " --map " + map +
                       " --key-early hid --key-late src --xmatch " + tmp_path("pairs.csv") +
                       " -o " + by_pairs + " --unmatched " + unmatched,
                   &err) == 0);
  CHECK(err.find("6 stars matched; 0 early-only and 1 late-only") != std::string::npos);
  const auto um = test::read_table(unmatched);
  REQUIRE(um.rows.size() == 1);
  CHECK(um.str(0, "key") == "G99");
  CHECK(um.str(0, "catalogue") == "late");
  REQUIRE(run_heft("ingest -q --early " + e + " --late " + l + " --map " + map +
                       " --match-radius 1.0 --key-late src -o " + by_pos) == 0);
  CHECK(test::read_text(by_pos) == test::read_text(by_pairs) /* same ids: late keys */);
  // By position without a mapped id or --key-late every star would lack an
  // id: refused, naming where the map should say it, and nothing written.
  const std::string no_id = tmp_path("ing_no_id.csv");
  CHECK(run_heft("ingest -q --early " + e + " --late " + l + " --map " + map + " --match-radius 1.0 -o " + no_id,
                 &err) == 2);
  CHECK_THAT(err, Catch::Contains(map + ": at /late/star/id: matching by position needs the stars' ids"));
  CHECK_FALSE(test::file_exists(no_id));

  const auto t = test::read_table(by_pairs);
  REQUIRE(t.rows.size() == 6);
  const auto tr = truths();
  for (std::size_t i = 0; i < 6; ++i) {
    CHECK(t.str(i, "id") == "G" + std::to_string(i));
    CHECK(t.num(i, "late_ra") == Approx(units::rad_to_deg(tr[i].late.ra_rad)).epsilon(1e-14));
    CHECK(t.num(i, "late_pmra") == Approx(tr[i].late.pmra_mas_yr).epsilon(1e-12));
    CHECK(t.num(i, "late_pmra_error") == Approx(0.035).epsilon(1e-12));
    // JD 2457389.0 = J2016.0 (J = 2000 + (JD - 2451545) / 365.25).
    CHECK(t.num(i, "late_epoch") == Approx(2016.0).epsilon(1e-13));
    CHECK(t.num(i, "late_ra_dec_corr") == 0.1);
    CHECK(t.num(i, "mag") == 8.1);
  }
  // Round trip: the ingested table screens as the truth does (no anomaly).
  const std::string sc = tmp_path("ing_screen.csv");
  REQUIRE(run_heft("screen -q " + by_pairs + " -o " + sc) == 0);
  const auto s = test::read_table(sc);
  for (std::size_t i = 0; i < 6; ++i) {
    CHECK(s.str(i, "status") == "ok");
    CHECK(std::abs(s.num(i, "dpm_late_ra")) < 1e-6);
    CHECK(std::abs(s.num(i, "dpm_early_dec")) < 1e-6);
    CHECK(s.str(i, "notes") == "no_rv");
  }
}

TEST_CASE("ingest: bad maps and raw files name the JSON path or file:line:column", "[cli][ingest]") {
  const std::string e = tmp_path("raw_early2.csv"), l = tmp_path("raw_late2.csv"),
                    map = tmp_path("map2.json"), out = tmp_path("ing_bad.csv");
  write_raw(e, l);
  const std::string args = "ingest --early " + e + " --late " + l + " --map " + map +
                           " --match-radius 1 --key-late src -o " + out;
  struct Case {
    std::string from, to, expect;
  };
  const std::vector<Case> cases = {
      {"\"unit\": \"arcsec/yr\"", "\"unit\": \"furlong\"", "/late/columns/pmra/unit"},
      {"\"parallax\": \"plx\"", "\"parralax\": \"plx\"", "/late/columns/parralax"},
      {"\"window\": [1989.85, 1993.21]", "\"window\": [1989.85]", "/early/window"},
      {"\"star\": {\"mag\": \"G\"}", "\"star\": {\"mag\": \"G\"}, \"colour\": 1", "/late/colour"},
  };
  for (const auto& c : cases) {
    DYNAMIC_SECTION(c.expect) {
      std::string m = kMap;
      m.replace(m.find(c.from), c.from.size(), c.to);
      test::write_text(map, m);
      std::remove(out.c_str());
      std::string err;
      CHECK(run_heft(args, &err) == 2);
      CHECK(err.find(c.expect) != std::string::npos);
      CHECK(!test::file_exists(out));
    }
  }
  SECTION("unparsable raw value") {
    test::write_text(map, kMap);
    std::string raw = test::read_text(e);
    raw.replace(raw.find(",0.8,0.7,"), 9, ",0.8x,0.7,");
    test::write_text(e, raw);
    std::string err;
    CHECK(run_heft(args, &err) == 2);
    CHECK(err.find(e + ":2:") != std::string::npos);
    CHECK(err.find("'e_RA' (ra_error): not a number") != std::string::npos);
  }
}
