// heft convert: a table from one format to another (CSV, ECSV, FITS).

#include <memory>

#include "cli/commands.hpp"
#include "heft/error.hpp"
#include "heft/tablefile.hpp"
#include "heft/unitconv.hpp"

#include <algorithm>
#include <iterator>

namespace heft::cli {
namespace {

struct ConvertCliOptions {
  std::string input, output = "-", format;
  std::vector<std::string> units;
};

int run_convert(const ConvertCliOptions& o) {
  const TableFormat fmt = output_table_format(o.output, o.format, "--format");
  TableInput in(o.input);
  std::vector<ColumnUnit> units = in.units();
  for (const std::string& u : o.units) {
    const auto eq = u.find('=');
    if (eq == std::string::npos || eq == 0) throw UsageError("--unit", u, "expected COLUMN=UNIT");
    const std::string col = u.substr(0, eq), unit = u.substr(eq + 1);
    UnitScale s;
    if (!parse_unit(unit, s)) throw UsageError("--unit", u, "a unit heft does not know (docs/formats.md)");
    auto it = std::find_if(units.begin(), units.end(), [&](const ColumnUnit& c) { return c.name == col; });
    if (it == units.end())
      units.push_back({col, unit});
    else
      it->unit = unit;
  }
  std::string text((std::istreambuf_iterator<char>(in.stream())), std::istreambuf_iterator<char>());
  TableOutput out(o.output, fmt, units);
  out.write(text);
  out.commit();
  return kOk;
}

}  // namespace

void setup_convert(CLI::App& app, Runner& run) {
  auto o = std::make_shared<ConvertCliOptions>();
  CLI::App* sub = app.add_subcommand(
      "convert", "Converts a table between CSV, ECSV and FITS binary tables, values to the last bit, units kept.");
  sub->add_option("table", o->input, "input table: CSV, ECSV or FITS (file.fits[N] or [NAME] for an extension; '-' = stdin)")
      ->required();
  sub->add_option("-o,--output", o->output, "output table; its format from the extension (.fits, .ecsv) or --format");
  sub->add_option("--format", o->format, "output format: csv, ecsv or fits (default: from the output's extension)")
      ->check(CLI::IsMember({"csv", "ecsv", "fits"}));
  sub->add_option("--unit", o->units, "COLUMN=UNIT: the unit of a column (e.g. pmra=mas/yr), for CSV inputs")
      ->take_all();
  sub->footer("Units: mas, uas, arcsec, deg, rad, h; mas/yr and the like; yr (epochs), jd, mjd; km/s, m/s; Msun, Mjup; "
              "AU; mag; Myr, Gyr; FITS and astropy spellings (mas yr-1, mas.yr**-1, solMass) are read.");
  sub->callback([o, &run] { run = [o] { return run_convert(*o); }; });
}

}  // namespace heft::cli
