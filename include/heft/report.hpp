#pragma once
/// \file report.hpp
/// The imaging plan as one self-contained HTML page (`heft report`): a run
/// header with every option of the ranking, the candidates in rank order
/// with where to look, and per candidate its curve and sky map as inline
/// SVG. No script, no network.

#include <string>
#include <vector>

#include "heft/rank.hpp"

namespace heft {

/// One listed candidate: its ranked record and its two figures (SVG documents).
struct PlanCandidate {
  RankRecord record;
  std::string curve_svg, sky_svg;
};

/// The page. `source` names the ranked file; `table_stars` is the number
/// of stars in it (all statuses), for the header.
std::string plan_html(const RankRunInfo& info, const std::string& source, long table_stars,
                      const std::vector<PlanCandidate>& candidates);

}  // namespace heft
