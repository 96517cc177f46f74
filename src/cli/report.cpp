// heft report: the imaging plan of a ranked table as one self-contained
// HTML page, with each listed candidate's curve and sky map computed again
// from the run's star table and options.

#include <omp.h>

#include <algorithm>
#include <cmath>
#include <memory>

#include "cli/commands.hpp"
#include "heft/error.hpp"
#include "heft/figures.hpp"
#include "heft/io.hpp"
#include "heft/report.hpp"
#include "heft/survey.hpp"
#include "heft/tablefile.hpp"

namespace heft::cli {
namespace {

struct ReportOptions {
  std::string input, output = "-", stars, truth, late_spin_table;
  ScreenOptions screen;
  WindowDefaults windows;
  long top = 20;
  int threads = 0;
  bool quiet = false;
};

// The ranked records and metadata of a rank JSON or a ranked table (CSV,
// ECSV, FITS), told apart by the content.
std::vector<RankRecord> read_any_ranked(const std::string& path, RankRunInfo& info, std::string& name) {
  TableInput in(path, rank_column_units());
  name = in.name();
  std::istream& s = in.stream();
  s >> std::ws;
  if (s.peek() == '{') return read_ranked_json(s, name, info);
  return read_ranked(s, name, info);
}

int run_report(const ReportOptions& o) {
  if (o.threads > 0) omp_set_num_threads(o.threads);
  RankRunInfo info;
  std::string name;
  std::vector<RankRecord> ranked = read_any_ranked(o.input, info, name);
  SurveyOptions base;
  base.screen = resolve_screen_options(o.screen, o.late_spin_table);
  base.windows = o.windows;
  base.screen_fingerprint = screen_fingerprint(base.screen, base.windows);
  const SurveyOptions so = survey_options_from(info, name, base);
  // The candidates: stars with a curve (p_real) in rank order, the first --top.
  std::sort(ranked.begin(), ranked.end(), [](const RankRecord& a, const RankRecord& b) { return a.rank < b.rank; });
  std::vector<RankRecord> listed;
  for (const auto& r : ranked)
    if (r.status.ok() && present(r.score) && present(r.p_real) && (o.top == 0 || static_cast<long>(listed.size()) < o.top))
      listed.push_back(r);
  std::vector<std::string> ids;
  for (const auto& r : listed) ids.push_back(r.id);
  std::string stars = o.stars.empty() ? metadata_text(info.fields.count("input") ? info.fields.at("input") : "") : o.stars;
  if (stars.empty() || stars == "-")
    throw CLI::ValidationError("the ranking read its stars from stdin: give the star table with --stars");
  if (!o.quiet) message("report", "computing the curves and sky maps of " + std::to_string(ids.size()) + " candidates from " + stars);
  TableInput in(stars, star_column_units());
  const std::vector<StarDetail> details = rank_details(in.stream(), in.name(), so, ids);
  std::vector<PlanCandidate> cands;
  for (std::size_t k = 0; k < listed.size(); ++k) {
    const StarDetail& d = details[k];
    // The same star, options and seed give the same score: anything else
    // means the table or the options changed since the ranking.
    if (d.detail.curve.empty() || !(d.record.score == listed[k].score ||
          std::abs(d.record.score - listed[k].score) <= 1e-9 * std::abs(listed[k].score)))
      throw InputError(name, 0, 0,
                       "star '" + ids[k] + "': score " + format_double(listed[k].score) + " in the ranked table, " +
                           format_double(d.record.score) + " computed again from " + in.name() +
                           ": the star table or the options changed since the ranking");
    CurveFigureOptions f;
    f.iwa_mas = so.rank.iwa_mas;
    f.owa_mas = std::isfinite(so.rank.owa_mas) ? so.rank.owa_mas : 0.0;
    f.prior_min_mjup = so.rank.curve.prior.m_min_mjup;
    f.prior_max_mjup = so.rank.curve.prior.m_max_mjup;
    f.id_prefix = "c" + std::to_string(listed[k].rank) + "-";
    if (!o.truth.empty() && !injected_companion(o.truth, ids[k], f.truth_a_au, f.truth_mass_mjup))
      f.truth_a_au = f.truth_mass_mjup = kAbsent;
    cands.push_back({listed[k], curve_svg(d.detail.curve, ids[k], f, in.name()),
                     sky_svg(d.detail.sky, f.iwa_mas, f.owa_mas, "predicted position of ", "s" + std::to_string(listed[k].rank) + "-")});
  }
  write_file_atomic(o.output, plan_html(info, name, static_cast<long>(ranked.size()), cands));
  if (!o.quiet && o.output != "-") message("report", "plan of " + std::to_string(cands.size()) + " candidates: " + o.output);
  return kOk;
}

}  // namespace

void setup_report(CLI::App& app, Runner& run) {
  auto o = std::make_shared<ReportOptions>();
  CLI::App* sub = app.add_subcommand(
      "report",
      "The imaging plan of a heft rank run as one self-contained HTML page (no network, no scripts): the "
      "run's options, the candidates in rank order with p_real, score, p_detect, best date, mass range, "
      "where to look (separation, position angle) and flags, and each candidate's curve and sky map, "
      "computed again from the run's star table with its options and seed (the scores are checked to match).");
  sub->add_option("ranked", o->input, "heft rank --json output, or its ranked table (CSV, ECSV or FITS)")->required();
  sub->add_option("-o,--output", o->output, "HTML file; default stdout");
  sub->add_option("--top", o->top, "list the N best candidates (0 = every star with a curve)")
      ->check(CLI::NonNegativeNumber)
      ->capture_default_str();
  sub->add_option("--stars", o->stars,
                  "the star table the ranking read (default: the path in its run metadata, 'input')");
  sub->add_option("--truth", o->truth, "heft simulate --truth table: mark injected companions on the curves");
  add_screen_options(sub, o->screen, o->windows, o->late_spin_table);
  sub->add_option("-j,--threads", o->threads, "threads (default: all cores); output is identical")
      ->check(CLI::NonNegativeNumber);
  sub->add_flag("-q,--quiet", o->quiet, "no messages");
  sub->footer("The screening options must be those given to heft rank (checked against the run's fingerprint).");
  sub->callback([o, &run] { run = [o] { return run_report(*o); }; });
}

}  // namespace heft::cli
