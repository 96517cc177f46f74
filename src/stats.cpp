#include "heft/stats.hpp"

#include <algorithm>
#include <bit>
#include <cstdint>
#include <cmath>
#include <limits>
#include <numbers>
#include <stdexcept>

namespace heft {

double chi2_log_survival(double chi2, int dof) {
  if (dof < 2 || dof % 2 != 0 || dof > 100)
    throw std::invalid_argument("chi2_log_survival: dof must be even, 2..100");
  if (!(chi2 > 0.0)) return 0.0;
  const double x = 0.5 * chi2;
  double term = 1.0, sum = 1.0;
  for (int j = 1; j < dof / 2; ++j) {
    term *= x / j;
    sum += term;
  }
  return -x + std::log(sum);
}

double log_normal_upper_tail(double z) {
  if (z < 8.0) return std::log(normal_cdf(-z));
  // Mills' ratio R(z) = Phi(-z)/phi(z) = 1/(z+ 1/(z+ 2/(z+ 3/(z+ ...)))),
  // evaluated backwards; 60 levels are far more than needed for z >= 8.
  double cf = z;
  for (int k = 60; k >= 1; --k) cf = z + k / cf;
  const double log_phi = -0.5 * z * z - 0.5 * std::log(2.0 * std::numbers::pi);
  return log_phi - std::log(cf);
}

double sigma_from_log_p(double log_p) {
  if (std::isnan(log_p)) return std::numeric_limits<double>::quiet_NaN();
  if (log_p >= 0.0) return 0.0;
  // Down to p ~ 1e-300 the quantile function is direct and exact enough.
  if (log_p > -690.0) return std::max(0.0, -normal_quantile(0.5 * std::exp(log_p)));
  // Further out: Newton on ln Phi(-z) = log_p - ln 2, started from the
  // leading asymptotic term z^2/2 + ln(z sqrt(2 pi)) = -(log_p - ln 2).
  const double target = log_p - std::log(2.0);
  double z = std::sqrt(-2.0 * target);
  for (int k = 0; k < 3; ++k) z = std::sqrt(-2.0 * target - std::log(2.0 * std::numbers::pi * z * z));
  for (int it = 0; it < 50; ++it) {
    const double lt = log_normal_upper_tail(z);
    const double log_phi = -0.5 * z * z - 0.5 * std::log(2.0 * std::numbers::pi);
    // d/dz ln Phi(-z) = -phi(z) / Phi(-z)
    const double step = (lt - target) / std::exp(log_phi - lt);
    z += step;
    if (std::abs(step) <= 1e-15 * z) break;
  }
  return z;
}

double chi2_to_sigma(double chi2, int dof) {
  if (std::isnan(chi2)) return std::numeric_limits<double>::quiet_NaN();
  return sigma_from_log_p(chi2_log_survival(chi2, dof));
}

double normal_cdf(double x) { return 0.5 * std::erfc(-x / std::numbers::sqrt2); }

double normal_quantile(double p) {
  if (!(p > 0.0 && p < 1.0)) {
    if (p == 0.0) return -std::numeric_limits<double>::infinity();
    if (p == 1.0) return std::numeric_limits<double>::infinity();
    return std::numeric_limits<double>::quiet_NaN();
  }
  // P. J. Acklam's rational approximation (relative error 1.15e-9) ...
  static const double a[] = {-3.969683028665376e+01, 2.209460984245205e+02,
                             -2.759285104469687e+02, 1.383577518672690e+02,
                             -3.066479806614716e+01, 2.506628277459239e+00};
  static const double b[] = {-5.447609879822406e+01, 1.615858368580409e+02,
                             -1.556989798598866e+02, 6.680131188771972e+01,
                             -1.328068155288572e+01};
  static const double c[] = {-7.784894002430293e-03, -3.223964580411365e-01,
                             -2.400758277161838e+00, -2.549732539343734e+00,
                             4.374664141464968e+00, 2.938163982698783e+00};
  static const double d[] = {7.784695709041462e-03, 3.224671290700398e-01,
                             2.445134137142996e+00, 3.754408661907416e+00};
  const double plow = 0.02425;
  double x;
  if (p < plow) {
    const double q = std::sqrt(-2 * std::log(p));
    x = (((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) /
        ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1);
  } else if (p <= 1 - plow) {
    const double q = p - 0.5, r = q * q;
    x = (((((a[0] * r + a[1]) * r + a[2]) * r + a[3]) * r + a[4]) * r + a[5]) * q /
        (((((b[0] * r + b[1]) * r + b[2]) * r + b[3]) * r + b[4]) * r + 1);
  } else {
    const double q = std::sqrt(-2 * std::log1p(-p));
    x = -(((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) /
        ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1);
  }
  // ... refined by one Halley step on the exact CDF.
  const double e = normal_cdf(x) - p;
  const double u = e * std::sqrt(2 * std::numbers::pi) * std::exp(0.5 * x * x);
  return x - u / (1 + 0.5 * x * u);
}

double ks_test(std::vector<double>& sample, double (*cdf)(double), double& p_value) {
  std::sort(sample.begin(), sample.end());
  const double n = static_cast<double>(sample.size());
  double d = 0.0;
  for (std::size_t i = 0; i < sample.size(); ++i) {
    const double f = cdf(sample[i]);
    d = std::max({d, (i + 1) / n - f, f - i / n});
  }
  const double sn = std::sqrt(n), lambda = (sn + 0.12 + 0.11 / sn) * d;
  double q = 0.0;
  if (lambda < 0.2) {
    q = 1.0;
  } else {
    for (int k = 1; k <= 100; ++k) q += 2.0 * ((k % 2) ? 1.0 : -1.0) * std::exp(-2.0 * k * k * lambda * lambda);
  }
  p_value = std::clamp(q, 0.0, 1.0);
  return d;
}

double weighted_quantile(const std::vector<std::pair<double, double>>& sorted, double total, double p) {
  double acc = 0.0;
  for (const auto& [v, w] : sorted) {
    acc += w;
    if (acc >= p * total) return v;
  }
  return sorted.empty() ? std::numeric_limits<double>::quiet_NaN() : sorted.back().first;
}

namespace {
using Pairs = std::span<std::pair<double, double>>;

// The quantiles targets[t0, t1) (cumulative weights, ascending) whose
// answers lie in pairs[lo, hi), `below` the weight of the pairs before lo
// (all ordered below them). Each split by selection sends every target to
// the side that holds it, so the work is about linear for few targets.
void select_quantiles(Pairs pairs, std::size_t lo, std::size_t hi, double below, const double* targets,
                      double* out, std::size_t t0, std::size_t t1) {
  const auto at = [&](std::size_t k) { return pairs.begin() + static_cast<std::ptrdiff_t>(k); };
  while (t0 < t1 && hi - lo > 64) {
    const std::size_t mid = lo + (hi - lo) / 2;
    std::nth_element(at(lo), at(mid), at(hi));
    double left = below;
    for (std::size_t k = lo; k < mid; ++k) left += pairs[k].second;
    std::size_t split = t0;  // targets [t0, split) lie left of mid
    while (split < t1 && left >= targets[split]) ++split;
    select_quantiles(pairs, lo, mid, below, targets, out, t0, split);
    lo = mid;
    below = left;
    t0 = split;
  }
  if (t0 == t1) return;
  std::sort(at(lo), at(hi));
  double acc = below;
  std::size_t k = lo;
  for (std::size_t t = t0; t < t1; ++t) {
    // Not reached within [lo, hi) only by rounding: then the answer is the
    // pair at hi (the smallest beyond), or the largest of all.
    double v = hi < pairs.size() ? pairs[hi].first : pairs[hi - 1].first;
    for (; k < hi; ++k) {
      if (acc + pairs[k].second >= targets[t]) {
        v = pairs[k].first;
        break;
      }
      acc += pairs[k].second;
    }
    out[t] = v;
  }
}

// An unsigned key that orders as the double does (IEEE 754 bit patterns:
// negative values reversed below the positive ones).
std::uint64_t order_key(double v) {
  const auto b = std::bit_cast<std::uint64_t>(v);
  return (b >> 63) != 0 ? ~b : b | (std::uint64_t{1} << 63);
}

// Above this many pairs the quantiles are found through buckets of the
// values' keys: one pass sums the weight per bucket, a second gathers the
// few buckets that hold the quantiles, and only those are selected. Below,
// selection alone costs less than the buckets' set-up.
constexpr std::size_t kBucketPairs = 2048;
constexpr int kBucketBits = 11;  // 2048 buckets: about 0.2 % of a value wide for values over 11 octaves

void bucket_quantiles(Pairs pairs, const std::vector<double>& targets, std::vector<double>& out) {
  std::uint64_t k_min = ~std::uint64_t{0}, k_max = 0;
  for (const auto& pr : pairs) {
    const std::uint64_t k = order_key(pr.first);
    k_min = std::min(k_min, k);
    k_max = std::max(k_max, k);
  }
  const int shift = std::max(0, static_cast<int>(std::bit_width(k_max - k_min)) - kBucketBits);
  const auto bucket_of = [&](double v) { return static_cast<std::size_t>((order_key(v) - k_min) >> shift); };
  const std::size_t n_buckets = static_cast<std::size_t>((k_max - k_min) >> shift) + 1;
  std::vector<double> sum(n_buckets, 0.0);
  std::vector<std::uint32_t> count(n_buckets, 0);
  for (const auto& pr : pairs) {
    const std::size_t b = bucket_of(pr.first);
    sum[b] += pr.second;
    ++count[b];
  }
  // Each target's bucket: the first non-empty one where the cumulative
  // weight reaches it, and the weight below it. Not reached only by
  // rounding: then the last non-empty bucket.
  std::vector<std::size_t> bucket(targets.size());
  std::vector<double> below(targets.size());
  std::size_t b = 0, last = n_buckets - 1;
  double acc = 0.0;
  for (std::size_t t = 0; t < targets.size(); ++t) {
    while (b < last && (count[b] == 0 || acc + sum[b] < targets[t])) acc += sum[b++];
    bucket[t] = b;
    below[t] = acc;
  }
  // The pairs of those buckets, then selection within each with the weight
  // below it.
  std::vector<std::size_t> slot(n_buckets, targets.size());
  std::vector<std::vector<std::pair<double, double>>> group;
  for (std::size_t t = 0; t < targets.size(); ++t)
    if (slot[bucket[t]] == targets.size()) {
      slot[bucket[t]] = group.size();
      group.emplace_back();
      group.back().reserve(count[bucket[t]]);
    }
  for (const auto& pr : pairs) {
    const std::size_t g = slot[bucket_of(pr.first)];
    if (g < group.size()) group[g].push_back(pr);
  }
  for (std::size_t t0 = 0; t0 < targets.size();) {
    std::size_t t1 = t0 + 1;
    while (t1 < targets.size() && bucket[t1] == bucket[t0]) ++t1;
    Pairs gp = group[slot[bucket[t0]]];
    select_quantiles(gp, 0, gp.size(), below[t0], targets.data(), out.data(), t0, t1);
    t0 = t1;
  }
}
}  // namespace

std::vector<double> weighted_quantiles(std::span<std::pair<double, double>> pairs, double total,
                                       const std::vector<double>& ps) {
  std::vector<double> out(ps.size(), std::numeric_limits<double>::quiet_NaN());
  if (pairs.empty()) return out;
  std::vector<double> targets(ps.size());
  for (std::size_t t = 0; t < ps.size(); ++t) targets[t] = ps[t] * total;
  if (pairs.size() > kBucketPairs) bucket_quantiles(pairs, targets, out);
  else select_quantiles(pairs, 0, pairs.size(), 0.0, targets.data(), out.data(), 0, ps.size());
  return out;
}

std::vector<double> log_grid(double lo, double hi, int n) {
  std::vector<double> g(n);
  for (int k = 0; k < n; ++k)
    g[k] = n == 1 ? lo : lo * std::pow(hi / lo, static_cast<double>(k) / (n - 1));
  return g;
}

int bin_index(double x, double lo, double width, int n) {
  const double k = std::floor((x - lo) / width);
  if (!(k >= 0.0 && k < static_cast<double>(n))) return -1;  // also false for NaN
  return static_cast<int>(k);
}

double probability_real(double log10_bayes, double occurrence) {
  if (!std::isfinite(log10_bayes)) return std::numeric_limits<double>::quiet_NaN();
  // F B / (F B + 1 - F) as a logistic function of the log posterior odds.
  const double log_odds = std::log(occurrence) - std::log1p(-occurrence) + log10_bayes * std::log(10.0);
  return log_odds > 0 ? 1.0 / (1.0 + std::exp(-log_odds)) : std::exp(log_odds) / (1.0 + std::exp(log_odds));
}

}  // namespace heft
