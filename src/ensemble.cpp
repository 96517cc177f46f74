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
// Returns the (moved, onto) pairs of walker indices.
template <typename Block>
std::vector<std::pair<int, int>> rescue_stranded(Block pos, const double* lp, int nw, Rng& rng) {
  const int dim = static_cast<int>(pos.rows());
  std::vector<double> sorted(lp, lp + nw);
  std::nth_element(sorted.begin(), sorted.begin() + nw / 2, sorted.end());
  const double median = sorted[nw / 2];
  const Eigen::VectorXd spread =
      ((pos.colwise() - pos.rowwise().mean()).array().square().rowwise().mean()).sqrt().matrix();
  std::vector<std::pair<int, int>> moved;
  for (int k = 0; k < nw; ++k) {
    if (lp[k] >= median - 2.0 * dim - 10.0) continue;
    int j;
    do j = static_cast<int>(rng.uniform() * nw); while (!(lp[j] >= median));
    for (int d = 0; d < dim; ++d) pos(d, k) = pos(d, j) + 1e-3 * spread[d] * rng.normal();
    moved.emplace_back(k, j);  // its density: that of j, refreshed by the next accepted move; jitter is tiny
  }
  return moved;
}

}  // namespace

EnsembleChain run_ensemble(const LogDensity& log_density, const Eigen::MatrixXd& start, const EnsembleOptions& opt,
                           const std::function<void(long, long)>& progress) {
  const int dim = static_cast<int>(start.rows()), all = static_cast<int>(start.cols());
  const int chains = std::max(1, opt.chains), nw = all / chains, half = nw / 2;
  const int levels = std::max(1, opt.temperatures);
  std::vector<double> beta(levels, 1.0);
  for (int l = 1; l < levels; ++l) beta[l] = std::pow(opt.t_max, -static_cast<double>(l) / (levels - 1));
  // Column l * all + k holds walker k of level l; level 0 (beta = 1) first.
  Eigen::MatrixXd pos = start.replicate(1, levels);
  std::vector<double> lp(static_cast<std::size_t>(levels) * all), ll(lp.size());
  std::vector<Rng> rng;
  for (int k = 0; k < levels * all + chains; ++k) {
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
  std::vector<std::vector<long>> swaps(chains, std::vector<long>(levels, 0));
  const double a = opt.stretch, gamma = 2.38 / std::sqrt(2.0 * dim);
  // Tempered log density of a column: ln prior + beta ln L = lp - (1 - beta) ll.
  auto tempered = [&](int l, double lpx, double llx) { return l == 0 ? lpx : lpx - (1.0 - beta[l]) * llx; };
  std::atomic<long> done{0};
  std::mutex report;
  // One task per chain, serial inside: threads meet only at the end, so a
  // loaded machine cannot stall every step (docs/performance.md).
#pragma omp parallel for schedule(dynamic, 1)
  for (int ch = 0; ch < chains; ++ch) {
    const int c0 = ch * nw;
    for (int l = 0; l < levels; ++l)
      for (int k = l * all + c0; k < l * all + c0 + nw; ++k) lp[k] = log_density(pos.col(k).data(), ll[k]);
    Rng& swap_rng = rng[levels * all + ch];
    std::vector<int> partner(nw);
    for (int step = 0; step < total; ++step) {
      long acc_step = 0;
      for (int l = 0; l < levels; ++l)
        for (int s = 0; s < 2; ++s) {
          const int lo = l * all + c0 + s * half, other = l * all + c0 + (1 - s) * half;
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
            double lly = 0.0;
            const double lpy = log_density(y.data(), lly);
            if (std::isfinite(lpy) &&
                std::log(r.uniform_open()) < log_jac + tempered(l, lpy, lly) - tempered(l, lp[k], ll[k])) {
              pos.col(k) = y;
              lp[k] = lpy;
              ll[k] = lly;
              acc_step += l == 0;
            }
          }
        }
      // Swaps, hottest pair first: walker k of level l - 1 with a random
      // walker of level l.
      for (int l = levels - 1; l > 0; --l) {
        for (int k = 0; k < nw; ++k) partner[k] = k;
        for (int k = nw - 1; k > 0; --k) std::swap(partner[k], partner[static_cast<int>(swap_rng.uniform() * (k + 1))]);
        for (int k = 0; k < nw; ++k) {
          const int cold = (l - 1) * all + c0 + k, hot = l * all + c0 + partner[k];
          if (std::log(swap_rng.uniform_open()) < (beta[l - 1] - beta[l]) * (ll[hot] - ll[cold])) {
            pos.col(cold).swap(pos.col(hot));
            std::swap(lp[cold], lp[hot]);
            std::swap(ll[cold], ll[hot]);
            if (step >= opt.burn) ++swaps[ch][l - 1];
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
          for (int l = 0; l < levels; ++l) {
            // Stranded is judged on the level's own tempered density.
            std::vector<double> t(nw);
            const int base = l * all + c0;
            for (int k = 0; k < nw; ++k) t[k] = tempered(l, lp[base + k], ll[base + k]);
            const auto moved = rescue_stranded(pos.middleCols(base, nw), t.data(), nw, rng[base]);
            for (const auto& [to, from] : moved) {
              lp[base + to] = lp[base + from];
              ll[base + to] = ll[base + from];
            }
          }
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
  if (levels > 1) {
    c.beta = beta;
    for (int l = 0; l + 1 < levels; ++l) {
      long n = 0;
      for (const auto& x : swaps) n += x[l];
      c.swap_acceptance.push_back(opt.steps > 0 ? static_cast<double>(n) / (static_cast<double>(opt.steps) * all) : 0.0);
    }
  }
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

EnsembleChain run_ensemble(const std::function<double(const double*)>& log_prob, const Eigen::MatrixXd& start,
                           const EnsembleOptions& opt, const std::function<void(long, long)>& progress) {
  return run_ensemble(
      [&log_prob](const double* x, double& log_like) { return log_like = log_prob(x); }, start, opt, progress);
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
