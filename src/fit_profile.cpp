#include "heft/fit_profile.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include "heft/fit_optimize.hpp"

namespace heft {

Curve profile_curve(const FitModel& m, const std::vector<double>& a_au, const FitOptions& opt,
                    const std::string& rng_id) {
  Curve c;
  c.upper_limit = m.upper_limit();
  Rng rng = Rng::for_star(opt.seed, rng_id);
  std::vector<double> best(a_au.size(), std::numeric_limits<double>::infinity());
  const int n_starts = std::max(4, opt.starts / 4);
  // Continuation: every a also starts from the global best and from the
  // previous a's best, so that the profile follows its valley.
  const auto global = find_minima(m, Pinned{}, draw_starts(m, opt.starts, rng));
  Eigen::VectorXd previous = global.empty() ? m.prior_draw(rng) : global.front().p;
  for (std::size_t ia = 0; ia < a_au.size(); ++ia) {
    const double lna = std::log(a_au[ia]);
    // Best mass at this a: minimise over everything but a.
    const Pinned at_a{{kLnA}, {lna}};
    std::vector<Eigen::VectorXd> starts = draw_starts(m, n_starts, rng);
    starts.push_back(previous);
    if (!global.empty()) starts.push_back(global.front().p);
    const auto mins = find_minima(m, at_a, starts);
    if (!mins.empty()) previous = mins.front().p;
    CurvePoint pt{};
    pt.a_au = a_au[ia];
    pt.mass_lo95 = pt.mass_lo68 = pt.mass_med = pt.mass_hi68 = pt.mass_hi95 = kAbsent;
    pt.ess = kAbsent;
    if (!mins.empty()) {
      const FitMinimum& b = mins.front();
      double m2lnl_best = b.m2lnl;
      best[ia] = m2lnl_best;
      const OrbitDraw o = m.orbit(b.p.data());
      pt.sep_mas = a_au[ia] * o.parallax_mas;
      pt.period_yr = o.period_yr;
      pt.mass_med = o.mass_mjup;
      // Walk out in ln mass from the best, warm-started, until -2 ln L has
      // risen by 3.84 or the prior bound is reached; crossings by linear
      // interpolation in ln mass.
      for (int dir : {-1, 1}) {
        const double step = 0.1 * dir;
        const double bound = dir < 0 ? std::log(m.mass_floor_mjup()) : std::log(m.mass_prior().m_max_mjup);
        double x_prev = std::log(o.mass_mjup), d_prev = 0.0;
        Eigen::VectorXd warm = b.p;
        double cross68 = kAbsent, cross95 = kAbsent;
        for (int it = 0; it < 200; ++it) {
          double x = x_prev + step;
          if ((x - bound) * dir > 0) x = bound;
          const Pinned pin{{kLnA, kLnMass}, {lna, x}};
          std::vector<Eigen::VectorXd> st = {warm};
          for (int k = 0; k < 3; ++k) st.push_back(m.prior_draw(rng));
          const auto mm = find_minima(m, pin, st);
          if (mm.empty()) break;
          const double dchi = mm.front().m2lnl - m2lnl_best;
          warm = mm.front().p;
          auto cross = [&](double level, double& out) {
            if (present(out) || !(dchi >= level)) return;
            out = std::exp(x_prev + (x - x_prev) * (level - d_prev) / (dchi - d_prev));
          };
          cross(1.0, cross68);
          cross(3.84, cross95);
          x_prev = x;
          d_prev = std::max(dchi, d_prev);
          if (present(cross95) || x == bound) break;
        }
        (dir < 0 ? pt.mass_lo68 : pt.mass_hi68) = cross68;
        (dir < 0 ? pt.mass_lo95 : pt.mass_hi95) = cross95;
      }
    }
    c.points.push_back(pt);
  }
  const double mn = *std::min_element(best.begin(), best.end());
  double sw = 0.0;
  for (std::size_t k = 0; k < best.size(); ++k) sw += std::isfinite(best[k]) ? std::exp(-0.5 * (best[k] - mn)) : 0.0;
  for (std::size_t k = 0; k < best.size(); ++k)
    c.points[k].weight = std::isfinite(best[k]) && sw > 0 ? std::exp(-0.5 * (best[k] - mn)) / sw : 0.0;
  return c;
}

}  // namespace heft
