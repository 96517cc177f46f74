#include "heft/ensemble.hpp"

#include <omp.h>

#include <algorithm>
#include <atomic>
#include <cmath>
#include <mutex>
#include <complex>
#include <limits>
#include <unsupported/Eigen/FFT>

#include "heft/rng.hpp"

namespace heft {

namespace {

// Burn-in only: a walker stranded far below the ensemble (stretch moves
// towards the others cross low-density ground and are all rejected) is
// moved onto a random walker of the better half with a small jitter.
template <typename Block>
void rescue_stranded(Block pos, double* lp, int nw, Rng& rng) {
  const int dim = static_cast<int>(pos.rows());
  std::vector<double> sorted(lp, lp + nw);
  std::nth_element(sorted.begin(), sorted.begin() + nw / 2, sorted.end());
  const double median = sorted[nw / 2];
  const Eigen::VectorXd spread =
      ((pos.colwise() - pos.rowwise().mean()).array().square().rowwise().mean()).sqrt().matrix();
  for (int k = 0; k < nw; ++k) {
    if (lp[k] >= median - 2.0 * dim - 10.0) continue;
    int j;
    do j = static_cast<int>(rng.uniform() * nw); while (!(lp[j] >= median));
    for (int d = 0; d < dim; ++d) pos(d, k) = pos(d, j) + 1e-3 * spread[d] * rng.normal();
    lp[k] = lp[j];  // refreshed by the next accepted move; jitter is tiny
  }
}

}  // namespace

EnsembleChain run_ensemble(const std::function<double(const double*)>& log_prob,
                           const Eigen::MatrixXd& start, const EnsembleOptions& opt,
                           const std::function<void(long, long)>& progress) {
  const int dim = static_cast<int>(start.rows()), all = static_cast<int>(start.cols());
  const int chains = std::max(1, opt.chains), nw = all / chains, half = nw / 2;
  Eigen::MatrixXd pos = start;
  std::vector<double> lp(all);
  std::vector<Rng> rng;
  for (int k = 0; k < all; ++k) {
    std::uint64_t s = opt.seed ^ (0x9e3779b97f4a7c15ULL * static_cast<std::uint64_t>(k + 1));
    rng.emplace_back(splitmix64(s));
  }
  const int total = opt.burn + opt.steps;
  const int kept_steps = opt.steps / opt.thin;
  EnsembleChain c;
  c.dim = dim;
  c.walkers = all;
  c.chains = chains;
  c.samples.resize(static_cast<Eigen::Index>(kept_steps) * all, dim);
  c.log_prob.resize(static_cast<std::size_t>(kept_steps) * all);
  std::vector<Eigen::MatrixXd> series(dim, Eigen::MatrixXd(opt.steps, all));
  std::vector<long> accepted(chains, 0);
  const double a = opt.stretch, gamma = 2.38 / std::sqrt(2.0 * dim);
  std::atomic<long> done{0};
  std::mutex report;
  // One task per chain, serial inside: threads meet only at the end, so a
  // loaded machine cannot stall every step (docs/performance.md).
#pragma omp parallel for schedule(dynamic, 1)
  for (int ch = 0; ch < chains; ++ch) {
    const int c0 = ch * nw;
    for (int k = c0; k < c0 + nw; ++k) lp[k] = log_prob(pos.col(k).data());
    for (int step = 0; step < total; ++step) {
      long acc_step = 0;
      for (int s = 0; s < 2; ++s) {
        const int lo = c0 + s * half, other = c0 + (1 - s) * half;
        for (int k = lo; k < lo + half; ++k) {
          Rng& r = rng[k];
          Eigen::VectorXd y;
          double log_jac = 0.0;
          if (r.uniform() < opt.de_fraction) {
            // Differential evolution (ter Braak 2006, Stat. Comput. 16,
            // 239): along the difference of two other walkers, scaled by
            // 2.38 / sqrt(2 dim), and by 1 one time in ten to jump between
            // modes; a symmetric proposal.
            const int i = other + static_cast<int>(r.uniform() * half);
            int j;
            do j = other + static_cast<int>(r.uniform() * half); while (j == i && half > 1);
            const double g = r.uniform() < 0.1 ? 1.0 : gamma * (1.0 + 1e-2 * r.normal());
            y = pos.col(k) + g * (pos.col(i) - pos.col(j));
          } else {
            // Stretch move: z with density 1/sqrt(z) on [1/a, a] by inversion.
            const double z = std::pow((a - 1.0) * r.uniform() + 1.0, 2) / a;
            const int j = other + static_cast<int>(r.uniform() * half);
            y = pos.col(j) + z * (pos.col(k) - pos.col(j));
            log_jac = (dim - 1) * std::log(z);
          }
          const double lpy = log_prob(y.data());
          if (std::isfinite(lpy) && std::log(r.uniform_open()) < log_jac + lpy - lp[k]) {
            pos.col(k) = y;
            lp[k] = lpy;
            ++acc_step;
          }
        }
      }
      if (progress && (step + 1) % 256 == 0) {
        const long d = done += 256;
        const std::lock_guard<std::mutex> lock(report);
        progress(d, static_cast<long>(total) * chains);
      }
      if (step < opt.burn) {
        if (opt.rescue && (step + 1) % std::max(1, opt.burn / 4) == 0)
          rescue_stranded(pos.middleCols(c0, nw), lp.data() + c0, nw, rng[c0]);
        continue;
      }
      accepted[ch] += acc_step;
      const int t = step - opt.burn;
      for (int d = 0; d < dim; ++d) series[d].block(t, c0, 1, nw) = pos.block(d, c0, 1, nw);
      if (t % opt.thin == 0 && t / opt.thin < kept_steps) {
        const int row0 = (t / opt.thin) * all + c0;
        for (int k = 0; k < nw; ++k) {
          c.samples.row(row0 + k) = pos.col(c0 + k).transpose();
          c.log_prob[row0 + k] = lp[c0 + k];
        }
      }
    }
  }
  long acc = 0;
  for (long x : accepted) acc += x;
  c.acceptance = opt.steps > 0 ? static_cast<double>(acc) / (static_cast<double>(opt.steps) * all) : 0.0;
  for (int d = 0; d < dim; ++d) {
    c.iat_steps.push_back(integrated_autocorr_time(series[d]));
    if (chains >= 2) {
      std::vector<Eigen::MatrixXd> per;
      for (int ch = 0; ch < chains; ++ch) per.push_back(series[d].middleCols(ch * nw, nw));
      c.rhat.push_back(gelman_rubin(per));
    }
  }
  return c;
}

double gelman_rubin(const std::vector<Eigen::MatrixXd>& chains) {
  const double m = static_cast<double>(chains.size());
  if (m < 2) return std::numeric_limits<double>::quiet_NaN();
  double w = 0.0, mean_all = 0.0;
  std::vector<double> means;
  double n = 0.0;
  for (const auto& ch : chains) {
    n = static_cast<double>(ch.size());
    const double mu = ch.mean();
    means.push_back(mu);
    mean_all += mu / m;
    w += (ch.array() - mu).square().sum() / (n - 1.0) / m;
  }
  double b_over_n = 0.0;
  for (double mu : means) b_over_n += (mu - mean_all) * (mu - mean_all) / (m - 1.0);
  if (!(w > 0)) return b_over_n > 0 ? std::numeric_limits<double>::infinity() : 1.0;
  return std::sqrt(((n - 1.0) / n * w + b_over_n) / w);
}

double integrated_autocorr_time(const Eigen::MatrixXd& series) {
  const int n = static_cast<int>(series.rows()), nw = static_cast<int>(series.cols());
  if (n < 4) return std::numeric_limits<double>::quiet_NaN();
  int nfft = 1;
  while (nfft < 2 * n) nfft *= 2;
  Eigen::FFT<double> fft;
  std::vector<double> acf(n, 0.0);
  for (int k = 0; k < nw; ++k) {
    std::vector<double> x(nfft, 0.0);
    const double mean = series.col(k).mean();
    for (int t = 0; t < n; ++t) x[t] = series(t, k) - mean;
    std::vector<std::complex<double>> f;
    fft.fwd(f, x);
    for (auto& v : f) v = std::norm(v);
    std::vector<double> r;
    fft.inv(r, f);
    if (!(r[0] > 0)) continue;  // a walker that never moved adds nothing
    for (int t = 0; t < n; ++t) acf[t] += r[t] / r[0];
  }
  if (!(acf[0] > 0)) return std::numeric_limits<double>::infinity();
  double tau = 1.0;
  for (int m = 1; m < n; ++m) {
    tau += 2.0 * acf[m] / acf[0];
    if (m >= 5.0 * tau) return tau;
  }
  return tau;  // window never closed: the chain is too short for tau
}

}  // namespace heft
