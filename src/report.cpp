#include "heft/report.hpp"

#include <cmath>
#include <cstdio>

#include "heft/svg.hpp"

namespace heft {
namespace {

// A number for a table cell with `digits` decimals; an em dash when absent.
std::string cell(double v, int digits) {
  if (!present(v)) return "&#8212;";
  char b[48];
  std::snprintf(b, sizeof b, "%.*f", digits, v);
  return b;
}

// "med (lo-hi)" of a 68 % range.
std::string range(double lo, double med, double hi, int digits) {
  if (!present(med)) return "&#8212;";
  return cell(med, digits) + " <span class=\"r\">(" + cell(lo, digits) + "&#8211;" + cell(hi, digits) + ")</span>";
}

// Where to look in position angle: the strongest mode and the 68 % arc.
std::string where_pa(const RankRecord& r) {
  if (!present(r.pa_arc68_start_deg)) return "&#8212;";
  const double end = std::fmod(r.pa_arc68_start_deg + r.pa_arc68_width_deg, 360.0);
  std::string s = present(r.pa_mode_deg) ? cell(r.pa_mode_deg, 0) + "&#176; " : std::string("any ");
  return s + "<span class=\"r\">(" + cell(r.pa_arc68_start_deg, 0) + "&#176;&#8594;" + cell(end, 0) + "&#176;)</span>";
}

// "A,B" as the range "A-B" (en dash).
std::string dash(std::string s) {
  const auto comma = s.find(',');
  return comma == std::string::npos ? s : s.replace(comma, 1, "\u2013");
}

// Flags for reading: one per line break opportunity.
std::string notes_text(const Notes& notes) {
  std::string s;
  for (const auto& n : notes) s += (s.empty() ? "" : ", ") + n;
  return s;
}

// An SVG document without its XML declaration, to sit inline in HTML.
std::string inline_svg(const std::string& svg) {
  const auto at = svg.find("<svg");
  return at == std::string::npos ? svg : svg.substr(at);
}

const char* kStyle = R"(
body { font-family: "DejaVu Sans", sans-serif; margin: 1.5em; color: #111; max-width: 1500px; }
h1 { font-size: 1.5em; margin-bottom: 0.2em; }
table { border-collapse: collapse; font-size: 0.9em; }
th, td { border-bottom: 1px solid #ccc; padding: 0.25em 0.6em; text-align: right; white-space: nowrap; }
th { background: #eef2f7; position: sticky; top: 0; }
td.id, th.id, td.flags { text-align: left; }
td.flags { white-space: normal; font-size: 0.85em; color: #7a2e00; }
.r { color: #555; font-size: 0.9em; }
table.run td { text-align: left; font-family: monospace; }
section.cand { border-top: 2px solid #08306b; margin-top: 2em; }
.figs { display: flex; flex-wrap: wrap; gap: 1em; }
.figs svg { width: 48%; min-width: 420px; height: auto; }
dl { font-size: 0.9em; } dt { font-weight: bold; } dd { margin: 0 0 0.4em 1.5em; }
)";

}  // namespace

std::string plan_html(const RankRunInfo& info, const std::string& source, long table_stars,
                      const std::vector<PlanCandidate>& candidates) {
  auto field = [&](const std::string& key) {
    const auto it = info.fields.find(key);
    return it == info.fields.end() ? std::string("?") : it->second;
  };
  const bool by_detect = field("rank_by") == "p_detect";
  std::string h = "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>heft imaging plan for " +
                  xml_escape(field("date_yr")) + "</title>\n<style>" + kStyle + "</style>\n</head>\n<body>\n";
  h += "<h1>Imaging plan for " + xml_escape(field("date_yr")) + "</h1>\n";
  h += "<p>" + std::to_string(candidates.size()) + " candidates of " + std::to_string(table_stars) +
       " stars in <code>" + xml_escape(source) + "</code>, in rank order by <b>" + xml_escape(field("rank_by")) +
       "</b>. Working angles " + xml_escape(field("iwa_mas")) + "&#8211;" + xml_escape(field("owa_mas")) +
       " mas; target masses " + xml_escape(dash(field("target_mass_mjup"))) + " MJup; assumed occurrence " +
       xml_escape(field("occurrence")) +
       " (the fraction of stars hosting a companion inside the prior's ranges: an assumption that sets "
       "p_real).</p>\n";
  h += "<details><summary>Run options (every option of the ranking)</summary>\n<table class=\"run\">\n";
  for (const auto& [k, v] : info.fields)
    h += "<tr><td>" + xml_escape(k) + "</td><td>" + xml_escape(v) + "</td></tr>\n";
  h += "</table>\n</details>\n";

  h += "<h2>Candidates</h2>\n<table id=\"candidates\">\n<thead><tr><th>rank</th><th class=\"id\">star</th>"
       "<th>p_real</th><th>score</th><th>p_detect</th><th>&#963; joint</th><th>best date (its value)</th>"
       "<th>mass, MJup (68 %)</th><th>separation, mas (68 %)</th><th>PA mode (68 % arc)</th>"
       "<th class=\"id\">flags</th></tr></thead>\n<tbody>\n";
  for (const auto& c : candidates) {
    const RankRecord& r = c.record;
    h += "<tr><td>" + std::to_string(r.rank) + "</td><td class=\"id\"><a href=\"#c" + std::to_string(r.rank) + "\">" +
         xml_escape(r.id) + "</a></td><td>" + cell(r.p_real, 3) + "</td><td>" + cell(r.score, 3) + "</td><td>" +
         cell(r.p_detect, 3) + "</td><td>" + cell(r.sig_joint, 1) + "</td><td>" +
         (present(r.best_date_yr) ? cell(r.best_date_yr, 2) + " <span class=\"r\">(" + cell(r.best_date_score, 3) + ")</span>"
                                  : std::string("&#8212;")) +
         "</td><td>" + range(r.mass_lo68, r.mass_med, r.mass_hi68, 1) + "</td><td>" +
         range(r.sep_lo68, r.sep_med, r.sep_hi68, 0) + "</td><td>" + where_pa(r) + "</td><td class=\"flags\">" +
         xml_escape(notes_text(r.notes)) + "</td></tr>\n";
  }
  h += "</tbody>\n</table>\n";
  h += "<dl>\n<dt>p_real</dt><dd>probability that the star's anomaly is a companion and not noise: the Bayes "
       "factor of its curve against no companion, at the assumed occurrence.</dd>\n"
       "<dt>score</dt><dd>p_real &#215; P(the companion lies between the working angles at the date with a mass "
       "in the target window).</dd>\n"
       "<dt>p_detect</dt><dd>p_real &#215; P(also brighter than the contrast limit), with a contrast curve and a "
       "mass&#8211;magnitude relation.</dd>\n"
       "<dt>best date</dt><dd>with a date grid: the date of the highest " +
       std::string(by_detect ? "p_detect" : "score") +
       " on it, and that value.</dd>\n"
       "<dt>mass</dt><dd>at the separation of highest posterior weight; a dark companion is assumed.</dd>\n"
       "<dt>separation, PA</dt><dd>predicted at the date: median and 68 % range of the separation; the strongest "
       "mode of the position angle (east of north) and the shortest arc holding 68 %.</dd>\n</dl>\n";

  h += "<h2>Per candidate</h2>\n";
  for (const auto& c : candidates) {
    const RankRecord& r = c.record;
    h += "<section class=\"cand\" id=\"c" + std::to_string(r.rank) + "\">\n<h3>" + std::to_string(r.rank) + ". " +
         xml_escape(r.id) + "</h3>\n<p>p_real " + cell(r.p_real, 3) + ", score " + cell(r.score, 3) +
         (present(r.p_detect) ? ", p_detect " + cell(r.p_detect, 3) : std::string()) + "; look at " +
         range(r.sep_lo68, r.sep_med, r.sep_hi68, 0) + " mas, position angle " + where_pa(r) + ".</p>\n";
    h += "<div class=\"figs\">\n" + inline_svg(c.curve_svg) + inline_svg(c.sky_svg) + "</div>\n</section>\n";
  }
  h += "<p class=\"r\">Written by heft " + xml_escape(field("heft_version")) + ".</p>\n</body>\n</html>\n";
  return h;
}

}  // namespace heft
