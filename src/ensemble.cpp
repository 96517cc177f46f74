#include "heft/ensemble.hpp"

#include <omp.h>

#include <cmath>
#include <complex>
#include <limits>
#include <unsupported/Eigen/FFT>

#include "heft/rng.hpp"

namespace heft {

namespace {

// Burn-in only: a walker stranded far below the ensemble (stretch moves
// towards the others cross low-density ground and are all rejected) is
// moved onto a random walker of the better half with a small jitter.
void rescue_stranded(Eigen::MatrixXd& pos, std::vector<double>& lp, Rng& rng) {
  const int dim = static_cast<int>(pos.rows()), nw = static_cast<int>(pos.cols());
  std::vector<double> sorted = lp;
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
                           const Eigen::MatrixXd& start, const EnsembleOptions& opt) {
  const int dim = static_cast<int>(start.rows()), nw = static_cast<int>(start.cols());
  Eigen::MatrixXd pos = start;
  std::vector<double> lp(nw);
  std::vector<Rng> rng;
  for (int k = 0; k < nw; ++k) {
    lp[k] = log_prob(pos.col(k).data());
    std::uint64_t s = opt.seed ^ (0x9e3779b97f4a7c15ULL * static_cast<std::uint64_t>(k + 1));
    rng.emplace_back(splitmix64(s));
  }
  const int total = opt.burn + opt.steps;
  const int kept_steps = opt.steps / opt.thin;
  EnsembleChain c;
  c.dim = dim;
  c.walkers = nw;
  c.samples.resize(static_cast<Eigen::Index>(kept_steps) * nw, dim);
  c.log_prob.resize(static_cast<std::size_t>(kept_steps) * nw);
  std::vector<Eigen::MatrixXd> series(dim, Eigen::MatrixXd(opt.steps, nw));
  long accepted = 0;
  const int half = nw / 2;
  const double a = opt.stretch;
  for (int step = 0; step < total; ++step) {
    long acc_step = 0;
    for (int s = 0; s < 2; ++s) {
      const int lo = s * half, other = (1 - s) * half;
#pragma omp parallel for schedule(static) reduction(+ : acc_step)
      for (int k = lo; k < lo + half; ++k) {
        Rng& r = rng[k];
        // z with density 1/sqrt(z) on [1/a, a] by inversion.
        const double u = r.uniform();
        const double z = std::pow((a - 1.0) * u + 1.0, 2) / a;
        const int j = other + static_cast<int>(r.uniform() * half);
        const Eigen::VectorXd y = pos.col(j) + z * (pos.col(k) - pos.col(j));
        const double lpy = log_prob(y.data());
        const double log_accept = (dim - 1) * std::log(z) + lpy - lp[k];
        if (std::isfinite(lpy) && std::log(r.uniform_open()) < log_accept) {
          pos.col(k) = y;
          lp[k] = lpy;
          ++acc_step;
        }
      }
    }
    if (step < opt.burn) {
      if (opt.rescue && (step + 1) % std::max(1, opt.burn / 4) == 0) rescue_stranded(pos, lp, rng[0]);
      continue;
    }
    accepted += acc_step;
    const int t = step - opt.burn;
    for (int d = 0; d < dim; ++d) series[d].row(t) = pos.row(d);
    if (t % opt.thin == 0 && t / opt.thin < kept_steps) {
      const int row0 = (t / opt.thin) * nw;
      for (int k = 0; k < nw; ++k) {
        c.samples.row(row0 + k) = pos.col(k).transpose();
        c.log_prob[row0 + k] = lp[k];
      }
    }
  }
  c.acceptance = opt.steps > 0 ? static_cast<double>(accepted) / (static_cast<double>(opt.steps) * nw) : 0.0;
  for (int d = 0; d < dim; ++d) c.iat_steps.push_back(integrated_autocorr_time(series[d]));
  return c;
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
