#pragma once
/// \file stats.hpp
/// Tail probabilities and significance conversions that stay finite far in
/// the tails (chi2 up to 1e4 and beyond), by working with log-probabilities;
/// small statistics (quantiles, effective sizes, the Mahalanobis length
/// under a small covariance).

#include <Eigen/Core>
#include <cmath>
#include <limits>
#include <span>
#include <utility>
#include <vector>

namespace heft {

/// Natural log of the chi-squared survival function Q(dof/2, chi2/2), for an
/// even number of degrees of freedom (2, 4, ...).
/// Given: chi2 >= 0; dof even, 2 <= dof <= 100.
/// Returned: ln P(X > chi2), X ~ chi2(dof); exact closed form
/// Q = exp(-x/2) sum_{j < dof/2} (x/2)^j / j!  (Abramowitz & Stegun 26.4.21).
double chi2_log_survival(double chi2, int dof);

/// Natural log of the upper normal tail, ln Phi(-z) = ln P(Z > z).
/// Uses erfc for z < 8 and the continued fraction of Mills' ratio beyond
/// (Abramowitz & Stegun 26.2.14), so it is accurate to ~1e-14 relative for
/// any z >= 0 (negative z is handled through erfc).
double log_normal_upper_tail(double z);

/// Gaussian-equivalent significance of a two-sided tail probability given as
/// its log: the z >= 0 with 2 Phi(-z) = p, i.e. ln(2 Phi(-z)) = log_p.
double sigma_from_log_p(double log_p);

/// Gaussian-equivalent significance of a chi-squared value with `dof` (even)
/// degrees of freedom: sigma_from_log_p(chi2_log_survival(chi2, dof)).
double chi2_to_sigma(double chi2, int dof);

/// Standard normal distribution function Phi(x) = erfc(-x / sqrt 2) / 2.
double normal_cdf(double x);

/// Standard normal quantile Phi^{-1}(p), 0 < p < 1 (Acklam's rational
/// approximation refined by one Halley step; ~1e-15 relative).
double normal_quantile(double p);

/// Quantile p of weighted values: `sorted` (value, weight) pairs in
/// increasing value, `total` their weight; the first value at which the
/// cumulative weight reaches p total (NaN when empty).
double weighted_quantile(const std::vector<std::pair<double, double>>& sorted, double total, double p);

/// The same quantiles for several p (ascending) of unsorted (value, weight)
/// pairs in expected linear time, no full sort: the weight is summed in
/// buckets of the values and only the buckets holding the quantiles are
/// searched, by selection (small sets by selection alone); `pairs` may be
/// reordered. Equal to weighted_quantile on the sorted pairs up to the
/// rounding of the cumulative sums (NaN when empty).
std::vector<double> weighted_quantiles(std::span<std::pair<double, double>> pairs, double total,
                                       const std::vector<double>& ps);

/// Effective number of samples of weights with sum `sum_w` and sum of
/// squares `sum_w2`: (sum w)^2 / sum w^2 (Kish 1965, Survey Sampling,
/// Sect. 11.7); 0 when there is no weight.
inline double effective_sample_size(double sum_w, double sum_w2) {
  return sum_w2 > 0 ? sum_w * sum_w / sum_w2 : 0.0;
}

/// n points from lo to hi spaced evenly in log (lo, hi > 0; n = 1: lo).
std::vector<double> log_grid(double lo, double hi, int n);

/// Index of the bin holding x among n bins of `width` starting at `lo`
/// (bin k covers [lo + k width, lo + (k + 1) width)), or -1 when x is outside
/// them or not finite. The range is checked in floating point before any
/// conversion to an integer, so an outlier or a NaN cannot overflow it.
int bin_index(double x, double lo, double width, int n);

/// Kolmogorov-Smirnov test of a sample against a continuous CDF.
/// Given: sample (sorted in place), cdf. Returned: the statistic D; `p_value`
/// from the asymptotic Kolmogorov distribution with the small-sample
/// correction lambda = (sqrt n + 0.12 + 0.11 / sqrt n) D (Stephens 1970, as
/// in Numerical Recipes, 3rd ed., Sect. 14.3.3).
double ks_test(std::vector<double>& sample, double (*cdf)(double), double& p_value);

/// Posterior probability of a hypothesis from its Bayes factor B against the
/// alternative (log10 B) and its prior probability F: F B / (F B + 1 - F),
/// as a logistic function of the log odds (no overflow). NaN for a
/// non-finite log10 B. heft rank's p_real (docs/method.md, Sect. 10).
double probability_real(double log10_bayes, double occurrence);

/// Square-root-free Cholesky factorisation C = L D L^T of a small symmetric
/// matrix, in place (Golub & Van Loan, "Matrix Computations", 4th ed.,
/// Sect. 4.1.2). Given: c, of which the lower triangle is read. Returned:
/// false if C is not positive definite (a pivot of D <= 0, or not a
/// number); else true, with D on c's diagonal and the unit lower triangle
/// of L below it (the strict upper triangle is left as it was). For the
/// 2-5 sized covariances of the anomaly and of star validation: Eigen's LLT
/// runs its loop over dynamic blocks (a general matrix-vector call per
/// column), several times the cost at these sizes, and each column's
/// square root would lengthen the chain of dependent steps.
template <int N>
bool ldlt_in_place(Eigen::Matrix<double, N, N>& c) {
  for (int j = 0; j < N; ++j) {
    double ld[N];  // L(j, k) D(k)
    double pivot = c(j, j);
    for (int k = 0; k < j; ++k) {
      ld[k] = c(j, k) * c(k, k);
      pivot -= c(j, k) * ld[k];
    }
    if (!(pivot > 0.0)) return false;
    c(j, j) = pivot;
    const double inv = 1.0 / pivot;
    for (int i = j + 1; i < N; ++i) {
      double s = c(i, j);
      for (int k = 0; k < j; ++k) s -= c(i, k) * ld[k];
      c(i, j) = s * inv;
    }
  }
  return true;
}

/// chi2 = d^T C^-1 d, the squared Mahalanobis length of d under the
/// covariance C, as sum y_i^2 / D_i with L y = d and C = L D L^T
/// (ldlt_in_place). Returned: NaN if C is not positive definite.
template <int N>
double mahalanobis_sq(const Eigen::Matrix<double, N, 1>& d, Eigen::Matrix<double, N, N> c) {
  if (!ldlt_in_place(c)) return std::numeric_limits<double>::quiet_NaN();
  double y[N], sum = 0.0;
  for (int i = 0; i < N; ++i) {
    y[i] = d(i);
    for (int k = 0; k < i; ++k) y[i] -= c(i, k) * y[k];
    sum += y[i] * y[i] / c(i, i);
  }
  return sum;
}

}  // namespace heft
