// Units of table files and the ECSV/FITS conversions of tablefile.hpp
// (astropy as the outside reader is tests/tools/astropy_tables.py).
#include <catch2/catch.hpp>

#include <cmath>
#include <fstream>
#include <iterator>

#include "heft/error.hpp"
#include "heft/tablefile.hpp"
#include "heft/unitconv.hpp"
#include "heft/units.hpp"
#include "test_util.hpp"

using namespace heft;

TEST_CASE("unitconv: spellings of the FITS standard and astropy, conversions, refusals", "[tablefile]") {
  double s = 0, o = 0;
  // The same unit in every spelling converts with factor exactly 1
  // (FITS standard 4.0, Sect. 4.3: products with '.', powers with '**').
  for (const char* form : {"mas/yr", "mas yr-1", "mas.yr**-1", "mas / yr", "MAS/YR", "mas yr^-1", "mas/a"}) {
    INFO(form);
    REQUIRE(unit_conversion(form, "mas/yr", s, o));
    CHECK(s == 1.0);
    CHECK(o == 0.0);
  }
  REQUIRE(unit_conversion("arcsec", "mas", s, o));
  CHECK(s == 1e3);
  REQUIRE(unit_conversion("deg", "mas", s, o));
  CHECK(s == 3.6e6);
  REQUIRE(unit_conversion("km s-1", "m/s", s, o));
  CHECK(s == 1e3);
  REQUIRE(unit_conversion("solMass", "Msun", s, o));
  CHECK(s == 1.0);
  REQUIRE(unit_conversion("jupiterMass", "Msun", s, o));
  CHECK(s == Approx(1.0 / units::kMjupPerMsun).epsilon(1e-15));
  REQUIRE(unit_conversion("1 / mas2", "mas-2", s, o));
  CHECK(s == 1.0);
  // Epochs: JD 2451545.0 and MJD 51544.5 are J2000.0 (IAU 1976 definition
  // of the Julian epoch, J = 2000 + (JD - 2451545) / 365.25).
  REQUIRE(unit_conversion("jd", "yr", s, o));
  CHECK(2451545.0 * s + o == Approx(2000.0).margin(1e-9));
  REQUIRE(unit_conversion("mjd", "yr", s, o));
  CHECK(57388.5 * s + o == Approx(2016.0).margin(1e-9));  // MJD 57388.5 = 2016.0 (Julian)
  REQUIRE(unit_conversion("pc", "AU", s, o));
  CHECK(s == Approx(206264.80624709636).epsilon(1e-14));  // 648000 / pi (IAU 2015 B2)
  CHECK_FALSE(unit_conversion("km/s", "mas/yr", s, o));    // another dimension
  CHECK_FALSE(unit_conversion("furlong", "mas", s, o));    // unknown
  CHECK_FALSE(unit_conversion("mas", "", s, o));
}

namespace {
std::string slurp(std::istream& in) { return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()}; }
}  // namespace

TEST_CASE("tablefile: ECSV and FITS written by heft read back to the same CSV text", "[tablefile]") {
  const std::string csv =
      "# heft-rank date_yr=2027.25 shard=1/1\n"
      "id,rank,sep_med,notes\n"
      "A,1,12.5,no_rv\n"
      "\"B,2\",2,,\n"
      "C,3,0.1,\n";
  const std::vector<ColumnUnit> cols = {{"sep_med", "mas"}};
  for (TableFormat f : {TableFormat::kEcsv, TableFormat::kFits}) {
    const std::string path = test::tmp_path(f == TableFormat::kFits ? "round.fits" : "round.ecsv");
    {
      std::ofstream out(path, std::ios::binary);
      out << table_bytes(csv, f, cols);
    }
    TableInput in(path, {{"sep_med", "arcsec"}});  // converted into arcsec on the way in
    const std::string back = slurp(in.stream());
    CHECK(back ==
          "# heft-rank date_yr=2027.25 shard=1/1\n"
          "id,rank,sep_med,notes\n"
          "A,1,0.0125,no_rv\n"
          "\"B,2\",2,,\n"
          "C,3,1e-04,\n");  // format_double: shortest round trip (std::to_chars)
    REQUIRE(in.units().size() == 4);
    CHECK(in.units()[2].unit == "arcsec");
    TableInput same(path);
    const std::string exact = slurp(same.stream());
    CHECK(exact == csv);
  }
}

TEST_CASE("tablefile: bad ECSV and FITS inputs name the file and the rule", "[tablefile]") {
  const std::string bad = test::tmp_path("bad.ecsv");
  test::write_text(bad, "# %ECSV 1.0\n# ---\n# datatype:\n# - {name: a, datatype: float64, unit: furlong}\na\n1\n");
  try {
    TableInput in(bad, {{"a", "mas"}});
    FAIL("no error");
  } catch (const InputError& e) {
    CHECK_THAT(e.what(), Catch::Contains("bad.ecsv") && Catch::Contains("'a'") && Catch::Contains("furlong"));
  }
  test::write_text(bad, "# %ECSV 1.0\n# ---\n# datatype: [\n");
  CHECK_THROWS_AS(TableInput(bad), InputError);
  test::write_text(bad, "# %ECSV 1.0\n# ---\n# datatype:\n# - {name: a, datatype: float64}\nb\n1\n");
  CHECK_THROWS_WITH(TableInput(bad), Catch::Contains("column names"));
  const std::string fits = test::tmp_path("tiny.fits");
  {
    std::ofstream out(fits, std::ios::binary);
    out << table_bytes("x\n1\n", TableFormat::kFits, {});
  }
  CHECK_THROWS_WITH(TableInput(fits + "[7]"), Catch::Contains("tiny.fits[7]"));
  CHECK_THROWS_AS(output_table_format("x.out", "xls", "--format"), UsageError);
  CHECK(output_table_format("a.FITS", "", "--format") == TableFormat::kFits);
  CHECK(output_table_format("a.fits.gz", "", "--format") == TableFormat::kFits);
  CHECK(output_table_format("a.ecsv", "", "--format") == TableFormat::kEcsv);
  CHECK(output_table_format("-", "", "--format") == TableFormat::kCsv);
  CHECK(output_table_format("a.csv", "fits", "--format") == TableFormat::kFits);
}

// LD_LIBRARY_PATH is searched before the system's folders (ld.so(8)), so a
// file that is not a library under cfitsio's SONAME stands for a machine
// without cfitsio: heft must start and run a CSV job without it, and name
// the library when a FITS table needs it. (Before cfitsio was opened on
// demand, such a heft did not start at all.)
TEST_CASE("tablefile: heft starts without cfitsio and names it where a FITS table needs it", "[tablefile][cli]") {
  const std::string dir = test::fresh_dir("no_cfitsio");
  const std::string csv = dir + "/t.csv", fits = dir + "/t.fits";
  test::write_text(csv, "id,sep\nA,1.5\n");
  REQUIRE(test::run_heft("convert " + csv + " -o " + fits) == 0);
  test::write_text(dir + "/" + HEFT_CFITSIO_SONAME, "not a shared library\n");
  const char* before = std::getenv("LD_LIBRARY_PATH");
  const std::string saved = before ? before : "";
  setenv("LD_LIBRARY_PATH", dir.c_str(), 1);
  std::string err;
  const int csv_rc = test::run_heft("convert " + csv + " -o " + dir + "/t.ecsv", &err);
  const std::string csv_err = err;
  const int read_rc = test::run_heft("convert " + fits + " -o " + dir + "/back.csv", &err);
  const std::string read_err = err;
  const int write_rc = test::run_heft("convert " + csv + " -o " + dir + "/new.fits", &err);
  if (before) setenv("LD_LIBRARY_PATH", saved.c_str(), 1);
  else unsetenv("LD_LIBRARY_PATH");
  CHECK(csv_rc == 0);
  CHECK(csv_err.empty());
  CHECK(read_rc == 2);  // an input error (exit codes: README.md)
  CHECK_THAT(read_err, Catch::Contains(fits + ": FITS tables need cfitsio's shared library " HEFT_CFITSIO_SONAME) &&
                           Catch::Contains("could not be loaded"));
  CHECK(write_rc == 2);
  CHECK_THAT(err, Catch::Contains("FITS tables need cfitsio's shared library " HEFT_CFITSIO_SONAME));
  // nothing half-written
  CHECK(!test::file_exists(dir + "/back.csv"));
  CHECK(!test::file_exists(dir + "/new.fits"));
}
