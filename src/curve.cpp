#include "heft/curve.hpp"

#include <Eigen/Cholesky>
#include <Eigen/LU>
#include <algorithm>
#include <cmath>
#include <numbers>
#include <numeric>
#include <optional>
#include <span>

#include "heft/angles.hpp"
#include "heft/buffers.hpp"
#include "heft/error.hpp"
#include "heft/expseries.hpp"
#include "heft/io.hpp"
#include "heft/rng.hpp"
#include "heft/stats.hpp"
#include "heft/window.hpp"

namespace heft {

AnomalyData anomaly_data(const StarRecord& star, const AnomalyResult& r, double host_mass_msun,
                         double host_mass_error_msun, bool& ok) {
  AnomalyData d;
  d.dpm << r.dpm_late_mas_yr, r.dpm_early_mas_yr;
  d.cov = r.dpm_cov;
  d.parallax_mas = star.late.parallax_mas;
  d.parallax_error_mas = star.late.parallax_error_mas;
  HostMass host{};
  ok = host_mass_prior(star.mass_msun, star.mass_error_msun, host_mass_msun, host_mass_error_msun, host);
  d.host_mass_msun = host.mass_msun;
  d.host_mass_error_msun = host.error_msun;
  d.sig_joint = r.sig_joint;
  d.early = {star.early.window_start_yr, star.early.window_end_yr, star.early.epoch_yr, {}, {}};
  d.late = {star.late.window_start_yr, star.late.window_end_yr, star.late.epoch_yr, {}, {}};
  return d;
}

bool curve_eccentricity_ok(const Distribution& ecc) {
  return ecc.kind == Distribution::Kind::kBeta || ecc.p1 <= kCurveMaxEcc;
}

void check_curve_eccentricity(const Distribution& ecc, const std::string& option) {
  if (!curve_eccentricity_ok(ecc))
    throw UsageError(option, ecc.str(),
                     "has no eccentricity at or below " + format_double(kCurveMaxEcc) +
                         ", where the Monte Carlo curve's prior is cut");
}

namespace {

// Sky-plane Thiele-Innes constants of a draw at node 0 (x north, y east).
struct Projection {
  double A, B, F, G;
};

// The projection for cos i and omega's cosine c and sine s: at node 0
// A = c, B = s cos i, F = -s, G = c cos i, linear in (c, s).
Projection projection_at(double cos_i, double c, double s) { return {c, s * cos_i, -s, c * cos_i}; }

// (north, east) reflex anomaly vectors per unit s = q a parallax at node 0:
// column 0 late, column 1 early.
template <typename T>
Eigen::Matrix<T, 2, 2> unit_anomalies(const Projection& pr, const WindowBasis<T>& be, const WindowBasis<T>& bl,
                                      const Window& early, const Window& late) {
  auto host = [&](const T& x, const T& y) {  // host side of the relative orbit
    return Eigen::Matrix<T, 2, 1>(-(pr.A * x + pr.F * y), -(pr.B * x + pr.G * y));
  };
  const Eigen::Matrix<T, 2, 1> pos_l = host(bl.x0, bl.y0), pos_e = host(be.x0, be.y0);
  const T inv_baseline(1.0 / (late.ref_epoch_yr - early.ref_epoch_yr));
  const Eigen::Matrix<T, 2, 1> pml = (pos_l - pos_e) * inv_baseline;
  Eigen::Matrix<T, 2, 2> v;
  v.col(0) = host(bl.xs, bl.ys) - pml;
  v.col(1) = host(be.xs, be.ys) - pml;
  return v;
}

template <typename T>
Eigen::Matrix<T, 2, 2> unit_anomalies(const Projection& pr, const Orbit<T>& o, const Window& early,
                                      const Window& late) {
  WindowBasis<T> be, bl;
  window_basis_pair(o, early, late, be, bl);
  return unit_anomalies(pr, be, bl, early, late);
}

// Design matrix per unit scale: observed (late ra, late dec, early ra,
// early dec) = scale K z.
template <typename T>
Eigen::Matrix<T, 4, 2> design(const Eigen::Matrix<T, 2, 2>& v) {
  Eigen::Matrix<T, 4, 2> k;
  for (int c = 0; c < 2; ++c) {
    const T n = v(0, c), e = v(1, c);
    k(2 * c, 0) = e;  // east  = e z1 + n z2
    k(2 * c, 1) = n;
    k(2 * c + 1, 0) = n;  // north = n z1 - e z2
    k(2 * c + 1, 1) = -e;
  }
  return k;
}

using Mat42 = Eigen::Matrix<double, 4, 2>;

// How a draw's last weighing by periods ended, at a neighbouring
// separation or in an earlier round (or its kernel ancestor's): the next
// one starts from it. Only the number of window-model evaluations depends
// on it, within kDriftTolerance.
struct WarmStart {
  double x = 0.0;        ///< the period's fixed point, x = ln P - ln P0
  bool hermite = false;  ///< whether its samples needed PeriodModel's interpolant
};

struct Draw {
  double inc;
  double cos_i;  ///< cos(inc), set with the projection (prepare_draw)
  /// 2 pi u_omega from the prior; from S/N 20 on drawn again each time the
  /// draw is weighed, from its conditional given the rest (choose_omega),
  /// with the uniform deviate u_omega.
  mutable double omega;
  double ecc, m0, m1, plx, u_omega;
  std::size_t dev;  ///< first of its z samples' deviates in DrawSet::dev
  mutable Projection proj;  ///< from inc and omega
  double q_lo, q_hi, log_prior_c;  ///< the mass prior in q for this host mass
  /// How the last weighing of this draw (or of its kernel's ancestor) ended.
  mutable WarmStart warm;
};

// log(1 - |z|), -inf where |z| >= 1.
double log1m_norm(const Eigen::Vector2d& z) {
  const double q = z.norm();
  return q < 1.0 ? std::log1p(-q) : -std::numeric_limits<double>::infinity();
}
// log(1 - q) for q >= 0, -inf where q >= 1, by log_positive and selects
// only, for loops in vector lanes: absolute to 1e-16 where log1p is
// relative, enough for log weights and periods. The argument of the log
// is a positive normal number wherever the result is used.
[[gnu::always_inline]] inline double log1m_lanes(double q) {
  return q < 1.0 ? log_positive(q < 1.0 ? 1.0 - q : 1.0) : -std::numeric_limits<double>::infinity();
}

// The random numbers of one z sample of a draw: standard normal deviates
// for a Gaussian proposal about the best z, and a draw of z from the mass
// prior with its log(1 - |z|). The prior's z depends only on the draw's
// host mass, so it is drawn once for every separation.
struct ZDeviates {
  double n1, n2;
  double z1, z2, log_1mq;
};

// Loops over a draw's z samples take this many at a time in vector lanes.
constexpr int kSampleLanes = 8;

// The host-mass prior is normal, truncated below this mass (Msun).
constexpr double kMinHostMsun = 0.01;

// Rounds of importance sampling at one separation: a first round (prior
// draws, or draws from a neighbour's proposal) and up to three adaptive ones.
constexpr int kMaxAdaptiveRounds = 3, kMaxRounds = kMaxAdaptiveRounds + 1;

// The random numbers of one round that draws from a proposal: prior draws
// for its prior half, kernel deviates, and picks (component, then kernel).
struct ProposalDeviates {
  LargeVector<Draw> prior;
  LargeVector<Eigen::Vector4d> kernel;     // (cos i, omega, M0, e) deviates
  LargeVector<Eigen::Vector2d> angle_cdf;  // Phi of the omega and M0 deviates
  LargeVector<double> pick;
};

// The random numbers of a star's curve, drawn once and shared by every
// separation (common random numbers): prior draws for a first round, and
// fresh deviates for each round that draws from a proposal, so that every
// round's draws are independent of the others' and all can be pooled. The
// proposal rounds' deviates are drawn from the same stream when a
// separation first needs them, always in the same order, so they do not
// depend on when (a star without signal never needs them).
struct DrawSet {
  LargeVector<Draw> first;
  std::vector<ProposalDeviates> proposal;  ///< for the 1st, 2nd ... round from a proposal
  LargeVector<ZDeviates> dev;  ///< per draw, z_samples each
  Rng rng;                  ///< the stream, after the deviates drawn so far
};

// heft's mass prior (prior.hpp) as a density in the z plane (normalised).
struct ZPlanePrior {
  explicit ZPlanePrior(const MassPrior& p)
      : log_uniform(!p.upper_limit()),
        m_lo_msun(p.m_min_mjup * (1.0 / units::kMjupPerMsun)),
        m_hi_msun(p.m_max_mjup * (1.0 / units::kMjupPerMsun)),
        log_range(log_uniform ? std::log(m_hi_msun / m_lo_msun) : 0.0),
        log_log_range(log_uniform ? std::log(log_range) : 0.0) {}
  bool log_uniform;
  double m_lo_msun, m_hi_msun;
  double log_range;      ///< ln(m_hi / m_lo) of the log-uniform prior (else 0)
  double log_log_range;  ///< its log, the log-uniform prior's normalisation
  // The support and the constant of the density for a host of mass m1.
  // Log-uniform m2 with uniform Omega: p(q) = 1 / (q (1 - q) Z); uniform
  // m2: p(q) = m1 / ((1 - q)^2 m_hi); p(z) = p(q) / (2 pi q).
  void prepare(Draw& dr) const {
    dr.q_lo = m_lo_msun / (dr.m1 + m_lo_msun);
    dr.q_hi = m_hi_msun / (dr.m1 + m_hi_msun);
    dr.log_prior_c = log_uniform ? -std::log(std::log(dr.q_hi / (1 - dr.q_hi)) - std::log(dr.q_lo / (1 - dr.q_lo)))
                                 : std::log(dr.m1) - std::log(m_hi_msun);
    dr.log_prior_c -= std::log(units::kTwoPi);
  }
  // log p(z) at |z| = q, given log q and log(1 - q), for a draw's
  // log_prior_c, q_lo and q_hi (prepare); no branch (selects only), for
  // loops over z samples in vector lanes.
  double log_density(double log_prior_c, double q_lo, double q_hi, double q, double log_q, double log_1mq) const {
    const double lu = log_uniform ? 1.0 : 0.0;  // as in log_density_total_over
    const double v = log_prior_c + (-(1.0 + lu) * log_q - (2.0 - lu) * log_1mq);
    return q > q_lo && q < q_hi ? v : -std::numeric_limits<double>::infinity();
  }
  double log_density(const Draw& dr, double q, double log_q, double log_1mq) const {
    return log_density(dr.log_prior_c, dr.q_lo, dr.q_hi, q, log_q, log_1mq);
  }
  // log of (1 - q) p(z | m1) at |z| = q for a host m1 = m_total (1 - q):
  // the prior of z in the coordinates (m_total, z), where m2 = m_total q,
  // with the Jacobian dm1/dm_total = 1 - q. It is p(m2) m_total / (2 pi q):
  // for the log-uniform prior 1 / (2 pi q^2 ln(m_hi / m_lo)), for the
  // uniform one m_total / (2 pi q m_hi).
  double log_density_total(double q, double m_total) const {
    const double m2 = m_total * q;
    if (!(m2 > m_lo_msun && m2 < m_hi_msun && q < 1.0)) return -std::numeric_limits<double>::infinity();
    return log_uniform ? -std::log(units::kTwoPi) - 2.0 * std::log(q) - log_log_range
                       : std::log(m_total / (units::kTwoPi * q * m_hi_msun));
  }
  // log_density_total(q, m_total) - ln d for d > 0, with one logarithm
  // (log_positive) and no branch, for loops over z samples in vector
  // lanes: the logs of both densities' factors and of d in one.
  double log_density_total_over(double q, double m_total, double d) const {
    // a factor of exactly 0 or 1: GCC does not vectorise a select on a
    // bool from outside the loop
    const double lu = log_uniform ? 1.0 : 0.0, m2 = m_total * q;
    const double arg = q * (lu * q + (1.0 - lu)) * d * (lu + (1.0 - lu) * (units::kTwoPi * m_hi_msun / m_total));
    const double v = -lu * (std::log(units::kTwoPi) + log_log_range) - log_positive(arg);
    return m2 > m_lo_msun && m2 < m_hi_msun && q < 1.0 ? v : -std::numeric_limits<double>::infinity();
  }
  // A draw of m2 (Msun) from the prior itself, from a uniform deviate u
  // in (0, 1): m_hi (m_hi / m_lo)^(u - 1) or m_lo + (m_hi - m_lo) u. No
  // branch and no libm call (exp_nonpositive), for loops in vector lanes.
  double draw_m2(double u) const {
    const double lu = log_uniform ? 1.0 : 0.0;
    return lu * (m_hi_msun * exp_nonpositive((u - 1.0) * log_range)) +
           (1.0 - lu) * (m_lo_msun + (m_hi_msun - m_lo_msun) * u);
  }
};

// Sets a draw's omega, with its cos and sin, and its projection.
void set_omega(const Draw& dr, double omega, double cos_omega, double sin_omega) {
  dr.omega = omega;
  dr.proj = projection_at(dr.cos_i, cos_omega, sin_omega);
}
void set_omega(const Draw& dr, double omega) { set_omega(dr, omega, std::cos(omega), std::sin(omega)); }

// Fills the parts of a draw that follow from its angles.
void prepare_angles(Draw& dr) {
  dr.cos_i = std::cos(dr.inc);
  set_omega(dr, dr.omega);
}
// ... and from its host mass.
void prepare_draw(Draw& dr, const ZPlanePrior& prior) {
  prepare_angles(dr);
  prior.prepare(dr);
}

// A draw's z-sample deviates from their uniform deviates, kSampleLanes at
// a time in vector lanes (AVX2 where present; no contraction, so both
// clones give the same numbers): the normal pair by Box-Muller from
// (u_r, u_phi), as Rng::normal draws it, and the prior's z at the node
// 2 pi u_node with m2 from u_q (ZPlanePrior::draw_m2) for the host m1.
// libm's log, sin, cos, pow and log1p per sample were 9 % of a curve at
// S/N 10. The logs are log_positive (log1m_lanes).
struct DeviateLanes {
  std::array<double, kSampleLanes> u_r, u_phi, u_q, u_node;  ///< uniform deviates, in
  std::array<double, kSampleLanes> n1, n2, z1, z2, log_1mq;   ///< out
};
__attribute__((target_clones("arch=x86-64-v3", "default"), optimize("fp-contract=off"))) void deviate_lanes(
    const ZPlanePrior& prior_in, double m1, int n, DeviateLanes& __restrict l) {
  const ZPlanePrior prior = prior_in;
#pragma omp simd
  for (int i = 0; i < n; ++i) {
    const double r = std::sqrt(-2.0 * log_positive(l.u_r[i]));
    const SinCos phi = sincos_turns(l.u_phi[i]), node = sincos_turns(l.u_node[i]);
    const double m2 = prior.draw_m2(l.u_q[i]);
    const double q = m2 / (m1 + m2), z1 = q * node.cos, z2 = q * node.sin, qn = std::sqrt(z1 * z1 + z2 * z2);
    l.n1[i] = r * phi.cos;
    l.n2[i] = r * phi.sin;
    l.z1[i] = z1;
    l.z2[i] = z2;
    l.log_1mq[i] = log1m_lanes(qn);
  }
}

Draw prior_draw(const AnomalyData& d, const CurveOptions& opt, const ZPlanePrior& prior, Rng& rng,
                LargeVector<ZDeviates>& dev) {
  Draw dr;
  dr.inc = std::acos(rng.uniform(-1.0, 1.0));
  dr.u_omega = rng.uniform();
  dr.omega = units::kTwoPi * dr.u_omega;
  // Beyond kCurveMaxEcc a draw has no weight (run_round); a prior with no
  // mass below is computed at it.
  dr.ecc = opt.prior.ecc.draw(rng);
  if (!curve_eccentricity_ok(opt.prior.ecc)) dr.ecc = std::min(dr.ecc, kCurveMaxEcc);
  dr.m0 = units::kTwoPi * rng.uniform();
  do dr.m1 = d.host_mass_msun + d.host_mass_error_msun * rng.normal(); while (!(dr.m1 > kMinHostMsun));
  do dr.plx = d.parallax_mas + d.parallax_error_mas * rng.normal(); while (!(dr.plx > 0));
  dr.dev = dev.size();
  // Each sample takes four uniforms from the stream, in the order that two
  // rng.normal() calls and two uniforms would; a spare normal pending in
  // the stream (after an odd number of normals before, as a beta
  // eccentricity prior's gamma deviates may leave) is left for the next
  // rng.normal().
  DeviateLanes l;
  for (int s0 = 0; s0 < opt.z_samples; s0 += kSampleLanes) {
    const int n = std::min(kSampleLanes, opt.z_samples - s0);
    for (int i = 0; i < n; ++i) {
      l.u_r[i] = rng.uniform_open();
      l.u_phi[i] = rng.uniform();
      l.u_q[i] = rng.uniform_open();
      l.u_node[i] = rng.uniform();
    }
    deviate_lanes(prior, dr.m1, n, l);
    for (int i = 0; i < n; ++i) dev.push_back({l.n1[i], l.n2[i], l.z1[i], l.z2[i], l.log_1mq[i]});
  }
  prepare_draw(dr, prior);
  return dr;
}

DrawSet make_draws(const AnomalyData& d, const CurveOptions& opt, const ZPlanePrior& prior,
                   const std::string& id) {
  DrawSet ds{{}, {}, {}, Rng::for_star(opt.seed, id)};
  ds.proposal.reserve(kMaxRounds);
  // Room for every round's deviates: no reallocation while a round reads them.
  ds.dev.reserve(static_cast<std::size_t>(kMaxRounds + 1) * opt.draws * opt.z_samples);
  ds.first.reserve(opt.draws);
  for (int k = 0; k < opt.draws; ++k) ds.first.push_back(prior_draw(d, opt, prior, ds.rng, ds.dev));
  return ds;
}

// The deviates of the k-th round from a proposal (k < kMaxRounds), drawn
// with those before it if not yet drawn.
const ProposalDeviates& proposal_deviates(DrawSet& ds, std::size_t k, const AnomalyData& d,
                                          const CurveOptions& opt, const ZPlanePrior& prior) {
  while (ds.proposal.size() <= k) {
    ProposalDeviates& pd = ds.proposal.emplace_back();
    pd.prior.reserve(opt.draws);
    pd.kernel.reserve(opt.draws);
    pd.pick.reserve(2 * static_cast<std::size_t>(opt.draws));
    for (int j = 0; j < opt.draws; ++j) pd.prior.push_back(prior_draw(d, opt, prior, ds.rng, ds.dev));
    for (int j = 0; j < opt.draws; ++j)
      pd.kernel.emplace_back(ds.rng.normal(), ds.rng.normal(), ds.rng.normal(), ds.rng.normal());
    pd.angle_cdf.reserve(opt.draws);
    for (const Eigen::Vector4d& n : pd.kernel) pd.angle_cdf.emplace_back(normal_cdf(n(1)), normal_cdf(n(2)));
    for (int j = 0; j < 2 * opt.draws; ++j) pd.pick.push_back(ds.rng.uniform());
  }
  return ds.proposal[k];
}

struct Sample {
  double log_w, m2_mjup, z1, z2;
  double m1_msun;  ///< the sample's host mass
  double omega;    ///< the sample's omega (its draw's, or its own: weigh_samples_own_omega)
};


// Everything a separation needs that does not depend on the draw.
struct Problem {
  const AnomalyData& d;
  const CurveOptions& opt;
  const ZPlanePrior& prior;
  const DrawSet& ds;
  Eigen::Matrix4d cinv;
  double chi2_data;
  double a_au;
  double baseline_yr;
  double snr;  ///< sqrt(chi2_data)
  /// (384 kDriftTolerance / S/N)^(1/4): the Hermite interpolant's largest
  /// node spacing times its rate w (hermite_intervals).
  double hermite_wh_max;
  /// For the nominal host mass: the period at q = 0, the prior's largest q
  /// and x there (x_of).
  double p0_nominal_yr, q_hi_nominal, x_min_nominal;
};

// The design matrix K of a draw from the window fits of its orbit.
Mat42 scaled_design(const Problem& pb, const Draw& dr, const WindowBasis<double>& be, const WindowBasis<double>& bl) {
  return pb.a_au * dr.plx * design(unit_anomalies(dr.proj, be, bl, pb.d.early, pb.d.late));
}

// The model's period dependence. A relative change of the period by
// d ln P moves the model by about the phase drift over the baseline,
// 2 pi (baseline / P + 1) |d ln P|, and chi2 by about drift x S/N. Changes
// with drift x S/N below kDriftTolerance are neglected, and an
// interpolated model is used where its error bound x S/N stays below it.
constexpr double kDriftTolerance = 0.05;
// The mass ratio at which the period's dependence on q is capped (the
// dark-companion model does not hold beyond; keeps ln P finite).
const double kLog1mPeriodQCap = std::log1p(-0.9);

// The scaled design matrix K(x) and dK/dx at x = ln P - ln P0 (P0: the
// period at q = 0), from one evaluation of the window model with its
// derivative (window_basis_pair_dlnp).
struct DesignNode {
  double x;
  Mat42 k, dk;
};


// exp(t) for t <= 0, zero where it underflows (below -745.2, where libm
// also takes its slow path).
double exp_or_zero(double t) { return t > -746.0 ? std::exp(t) : 0.0; }

// The window fits of an orbit (at node 0) and their derivatives with
// respect to ln P (window_basis_pair_dlnp).
struct FitsDlnp {
  WindowBasis<double> be, bl, dbe, dbl;
};
FitsDlnp window_fits_dlnp(const Orbit<double>& o, const Window& early, const Window& late) {
  FitsDlnp f;
  window_basis_pair_dlnp(o, early, late, f.be, f.bl, f.dbe, f.dbl);
  return f;
}

// The unscaled design matrix and its derivative with respect to ln P; the
// design is linear in the window fits.
void design_and_derivative(const Projection& pr, const FitsDlnp& f, const Window& early, const Window& late,
                           Mat42& k, Mat42& dk) {
  k = design(unit_anomalies(pr, f.be, f.bl, early, late));
  dk = design(unit_anomalies(pr, f.dbe, f.dbl, early, late));
}

void design_and_derivative(const Projection& pr, const Orbit<double>& o, const Window& early,
                           const Window& late, Mat42& k, Mat42& dk) {
  design_and_derivative(pr, window_fits_dlnp(o, early, late), early, late, k, dk);
}

// The cells over omega in [0, pi) on which choose_omega tabulates the
// likelihood (omega and omega + pi fit alike, with z and -z), and the
// uniform share of its proposal.
constexpr int kOmegaCells = 16;
constexpr double kOmegaUniformShare = 0.2;

// Whether draws take omega from choose_omega (a function of the star, so
// the same at every separation): below this S/N the likelihood hardly
// depends on omega, and the prior draws' omega is kept (u_omega).
constexpr double kOmegaTableSnr = 20.0;
bool omega_from_table(const Problem& pb) { return pb.snr >= kOmegaTableSnr; }

// From this S/N on, a draw weighed with its total mass fixed
// (weigh_total_batch) gives each of its z samples its own omega from its
// table, for detections. There a draw's z samples are almost one point,
// and with one omega the 95 % bands' ends rested on too few distinct
// orbits: on 1,000 systems at S/N >= 200 they held the truth in 92.4 %,
// with an omega per sample 93.4 %, for 20-33 % more CPU (--draws 16384:
// 93.1 % for 80 %). Below it whole curves covered alike either way and
// the short periods' draws cost 40 % more (docs/performance.md, "Stop 42").
constexpr double kOmegaPerSampleSnr = 200.0;
bool omega_per_sample(const Problem& pb) { return pb.snr >= kOmegaPerSampleSnr; }

// The fit of z as a function of omega. The projection is linear in
// (cos w, sin w) (projection_at), and so is the design matrix, K(w) = cos w K(0) + sin w K(pi / 2); so F = K^T C^-1 K =
// c^2 F_cc + c s (F_cs + F_cs^T) + s^2 F_ss and b = K^T C^-1 dpm =
// c b_c + s b_s (c = cos w, s = sin w), from two design matrices and no
// further window evaluation.
struct OmegaFit {
  double a00, a01, a11, m00, m01, m11, d00, d01, d11;  // F_cc, F_cs + F_cs^T, F_ss
  double bc0, bc1, bs0, bs1;
};
OmegaFit omega_fit(const Problem& pb, const Draw& dr, const WindowBasis<double>& be, const WindowBasis<double>& bl) {
  const double ci = dr.cos_i, scale = pb.a_au * dr.plx;
  const Window &early = pb.d.early, &late = pb.d.late;
  const Mat42 kc = scale * design(unit_anomalies(projection_at(ci, 1.0, 0.0), be, bl, early, late));
  const Mat42 ks = scale * design(unit_anomalies(projection_at(ci, 0.0, 1.0), be, bl, early, late));
  const Eigen::Matrix<double, 2, 4> kc_c = kc.transpose() * pb.cinv, ks_c = ks.transpose() * pb.cinv;
  const Eigen::Matrix2d f_cc = kc_c * kc, f_ss = ks_c * ks, f_cs = kc_c * ks;
  const Eigen::Vector2d b_c = kc_c * pb.d.dpm, b_s = ks_c * pb.d.dpm;
  return {f_cc(0, 0), f_cc(0, 1), f_cc(1, 1), 2.0 * f_cs(0, 0), f_cs(0, 1) + f_cs(1, 0), 2.0 * f_cs(1, 1),
          f_ss(0, 0), f_ss(0, 1), f_ss(1, 1), b_c(0), b_c(1), b_s(0), b_s(1)};
}

// cos and sin of the omega cells' centres.
const std::array<std::array<double, kOmegaCells>, 2>& omega_cell_centres() {
  static const auto t = [] {
    std::array<std::array<double, kOmegaCells>, 2> cs;
    for (int k = 0; k < kOmegaCells; ++k) {
      cs[0][k] = std::cos(units::kPi * (k + 0.5) / kOmegaCells);
      cs[1][k] = std::sin(units::kPi * (k + 0.5) / kOmegaCells);
    }
    return cs;
  }();
  return t;
}

// The fit in cell k: F (f00, f01, f11), b, det F, the best z and
// -chi2_min / 2 up to a constant. Computed in full, also where F is
// singular, so that loops over cells have no branch and vectorise.
struct CellFit {
  double f00, f01, f11, b0, b1, det, z1, z2, half_fit;
};
inline CellFit cell_fit(const OmegaFit& o, double c, double s) {
  CellFit f;
  const double cc = c * c, cs = c * s, ss = s * s;
  f.f00 = cc * o.a00 + cs * o.m00 + ss * o.d00;
  f.f01 = cc * o.a01 + cs * o.m01 + ss * o.d01;
  f.f11 = cc * o.a11 + cs * o.m11 + ss * o.d11;
  f.b0 = c * o.bc0 + s * o.bs0;
  f.b1 = c * o.bc1 + s * o.bs1;
  f.det = f.f00 * f.f11 - f.f01 * f.f01;
  const double inv = 1.0 / f.det;
  f.z1 = (f.f11 * f.b0 - f.f01 * f.b1) * inv;
  f.z2 = (f.f00 * f.b1 - f.f01 * f.b0) * inv;
  f.half_fit = f.det > 0.0 ? 0.5 * (f.z1 * f.b0 + f.z2 * f.b1) : -std::numeric_limits<double>::infinity();
  return f;
}

// |z| of the best fit over the cells: the reference q of weigh_total_batch,
// which must not depend on the omega drawn. In vector lanes as
// omega_table; the best cell's |z|^2 is kept from the loop: with a second
// cell_fit, called out of the AVX2 clone into plain code, the sigma = 50
// bench curve took 25 % longer than with no clone (0.28 against 0.22 s).
__attribute__((target_clones("arch=x86-64-v3", "default"), optimize("fp-contract=off"))) double best_q(
    const OmegaFit& o) {
  const auto& cs = omega_cell_centres();
  std::array<double, kOmegaCells> half_fit, q2;
#pragma omp simd
  for (int k = 0; k < kOmegaCells; ++k) {
    const CellFit f = cell_fit(o, cs[0][k], cs[1][k]);
    half_fit[k] = f.half_fit;
    q2[k] = f.z1 * f.z1 + f.z2 * f.z2;
  }
  const auto best = std::max_element(half_fit.begin(), half_fit.end()) - half_fit.begin();
  return std::sqrt(q2[best]);
}

// A proposal for omega close to its conditional given the rest of the
// orbit, from the fit o at the draw's period: each cell's probability.
// The cells cover omega in [0, pi): omega and omega + pi fit alike, with z
// and -z. Each cell's share is the likelihood marginalised over z at its
// centre, about exp(-chi2_min / 2) / sqrt(det F) times the mass prior at
// the best z, or where that lies outside the prior's support, at the
// nearest z within it times the Gaussian's fall to there along the
// radius, mixed with kOmegaUniformShare of the prior (defensive, as the
// kernels' prior half). Where the data fix z whatever omega (a single
// informative catalogue), the prior is all that tells the cells apart:
// without it the weights of a circular-orbit test star's draws held 71 %
// of their number as effective samples, against all of them.
// The cells in vector lanes (AVX2 where present; no contraction, so both
// clones give the same table), their exponentials by exp_nonpositive.
using OmegaTable = std::array<double, kOmegaCells>;
__attribute__((target_clones("arch=x86-64-v3", "default"), optimize("fp-contract=off"))) OmegaTable
omega_table(const OmegaFit& o, const Draw& dr, bool log_uniform) {
  const auto& cs = omega_cell_centres();
  std::array<double, kOmegaCells> log_fit;
  OmegaTable share;
  const double q_lo = dr.q_lo * (1.0 + 1e-12), q_hi = dr.q_hi * (1.0 - 1e-12);
  // The prior's shape by a factor of exactly 0 or 1: GCC does not vectorise
  // a select on a bool from outside the loop.
  const double lu = log_uniform ? 1.0 : 0.0;
#pragma omp simd
  for (int k = 0; k < kOmegaCells; ++k) {
    const CellFit f = cell_fit(o, cs[0][k], cs[1][k]);
    const double q2 = f.z1 * f.z1 + f.z2 * f.z2, q = std::sqrt(q2), q_c = std::clamp(q, q_lo, q_hi);
    const double radial = (f.z1 * (f.f00 * f.z1 + f.f01 * f.z2) + f.z2 * (f.f01 * f.z1 + f.f11 * f.z2)) / q2;
    log_fit[k] = f.half_fit - (q2 > 0.0 ? 0.5 * radial * (q - q_c) * (q - q_c) : 0.0);
    // ZPlanePrior::log_density's shape: 1 / (q^2 (1 - q)) log-uniform, 1 / (q (1 - q)^2) uniform
    share[k] = std::sqrt(std::max(1.0 / f.det, 0.0)) / (q_c * (1.0 - q_c) * (lu * q_c + (1.0 - lu) * (1.0 - q_c)));
  }
  const double best = *std::max_element(log_fit.begin(), log_fit.end());
  // Cells below exp(-20) of the best hold nothing next to the uniform share.
#pragma omp simd
  for (int k = 0; k < kOmegaCells; ++k) {
    const double t = log_fit[k] - best;
    share[k] = t > -20.0 ? share[k] * exp_nonpositive(t) : 0.0;
  }
  double total = 0.0;
  for (double p : share) total += p;
  const double table = total > 0.0 ? 1.0 - kOmegaUniformShare : 0.0, scale = table > 0.0 ? table / total : 0.0;
  for (double& p : share) p = scale * p + (1.0 - table) / kOmegaCells;
  return share;
}

// An omega drawn from a table: its cell, its value and its cos and sin.
struct OmegaPick {
  int cell;
  double omega, cos_omega, sin_omega;
};

// The table's running sums, added in cell order: cdf[0] = 0 and
// cdf[k + 1] = t[0] + ... + t[k].
using OmegaCdf = std::array<double, kOmegaCells + 1>;
OmegaCdf omega_cdf(const OmegaTable& t) {
  OmegaCdf cdf;
  cdf[0] = 0.0;
  for (int k = 0; k < kOmegaCells; ++k) cdf[k + 1] = cdf[k] + t[k];
  return cdf;
}

// Omega drawn from the table t (its running sums cdf) with the uniform
// deviate u: uniformly within a cell picked in proportion, and within it
// at omega or omega + pi. log(prior / proposal) at the omega drawn is
// omega_log_ratio of its cell. The cell is the count of running sums at or
// below u, without a branch: a scan that stops at the cell mispredicted
// its exit at every z sample (S/N 270). Its cos and sin come from the
// cell's centre by the angle-addition formulas, with those of the offset
// (at most pi / 32) by sincos_small: libm's sincos per z sample was 9 % of
// a curve at S/N 270.
[[gnu::always_inline]] inline OmegaPick omega_cell(const OmegaTable& t, const OmegaCdf& cdf, double u) {
  int k = 0;
  for (int j = 1; j < kOmegaCells; ++j) k += u >= cdf[j];
  const double below = cdf[k];
  const double frac = 2.0 * std::clamp((u - below) / t[k], 0.0, 1.0);
  const int half = frac >= 1.0 ? 1 : 0;
  const double f = std::min(frac - half, 1.0);
  const SinCos d = sincos_small(units::kPi * (f - 0.5) / kOmegaCells);
  const auto& cs = omega_cell_centres();
  const double sign = half ? -1.0 : 1.0;  // omega + pi
  return {k, units::kPi * (half + (k + f) / kOmegaCells), sign * (cs[0][k] * d.cos - cs[1][k] * d.sin),
          sign * (cs[1][k] * d.cos + cs[0][k] * d.sin)};
}
double omega_log_ratio(const OmegaTable& t, int k) { return -std::log(kOmegaCells * t[k]); }

// Draws a draw's omega with its deviate u_omega from its table (omega_table)
// and returns log(prior / proposal) at the omega drawn.
double choose_omega(const OmegaFit& o, const Draw& dr, bool log_uniform) {
  const OmegaTable t = omega_table(o, dr, log_uniform);
  const OmegaPick w = omega_cell(t, omega_cdf(t), dr.u_omega);
  set_omega(dr, w.omega, w.cos_omega, w.sin_omega);
  return omega_log_ratio(t, w.cell);
}

// The node of PeriodModel at x; where log_omega is given, the draw's omega
// is drawn first (choose_omega) from the same window fits, and its log
// ratio stored there.
DesignNode design_node(const Problem& pb, const Draw& dr, double p0, double x, double* log_omega = nullptr) {
  const Orbit<double> o{x == 0.0 ? p0 : p0 * std::exp(x), dr.ecc, dr.inc, dr.omega, 0.0, dr.m0,
                        pb.d.late.ref_epoch_yr};
  const FitsDlnp f = window_fits_dlnp(o, pb.d.early, pb.d.late);
  if (log_omega) *log_omega = choose_omega(omega_fit(pb, dr, f.be, f.bl), dr, pb.prior.log_uniform);
  DesignNode n{x, {}, {}};
  design_and_derivative(dr.proj, f, pb.d.early, pb.d.late, n.k, n.dk);
  const double scale = pb.a_au * dr.plx;
  n.k *= scale;
  n.dk *= scale;
  return n;
}

constexpr int kMaxHermiteIntervals = 2;

// The Hermite intervals over x in [x_min, 0] that keep PeriodModel's
// interpolant within the tolerance, (w h)^4 / 384 x S/N with
// w = (2 pi baseline / P + 2) / (1 - e); 0 where more than
// kMaxHermiteIntervals would be needed (the model is then evaluated exactly
// at each sample's period).
int hermite_intervals(const Problem& pb, double ecc, double p0, double x_min) {
  // Next to periastron the orbit moves faster by up to 1 / (1 - e).
  const double w = (units::kTwoPi * pb.baseline_yr / p0 + 2.0) * (1.0 / (1.0 - ecc));
  const double h_max = pb.hermite_wh_max / w;
  const double intervals = std::ceil(-x_min / h_max);
  return intervals <= kMaxHermiteIntervals ? std::max(1, static_cast<int>(intervals)) : 0;
}

// K(x) of one draw between full evaluations: one node and the linear
// model about it, whose error is about (drift / (1 - e))^2 / 2. Where that is not
// enough and the model is smooth in x over the prior's whole range of q
// (long periods), a cubic Hermite interpolant on a few nodes spanning the
// range replaces it: its error is about (w h)^4 / 384 of the model for node
// spacing h, with w = 2 pi baseline / P + 2 the model's rate of change per
// unit ln P (phase drift, and the P^-1 ... P^-2 scaling of velocity and
// acceleration), times 1 / (1 - e) for the faster motion next to periastron
// (tests/curve_test.cpp, "period correction"). Elsewhere (short periods) the linear model is moved to the
// period of the best z and other periods are evaluated exactly.
class PeriodModel {
 public:
  /// Where log_omega is given, the draw's omega is drawn at the first node
  /// (choose_omega), its log ratio stored there.
  PeriodModel(const Problem& pb, const Draw& dr, double p0, double x_min, double x_first, double* log_omega)
      : pb_(pb), dr_(dr), p0_(p0), x_min_(x_min) {
    drift_rate_ = units::kTwoPi * (pb.baseline_yr / p0 + 1.0) * pb.snr;
    curvature_rate_ = drift_rate_ * (1.0 / (1.0 - dr.ecc));
    hermite_intervals_ = hermite_intervals(pb, dr.ecc, p0, x_min);
    nodes_[0] = design_node(pb, dr, p0, x_first, log_omega);
  }
  int evaluations() const { return n_nodes_ + exact_; }
  bool interpolating() const { return n_nodes_ > 1; }
  // Whether a change of x by dx changes chi2 by less than the tolerance.
  bool negligible(double dx) const { return drift_rate_ * std::abs(dx) < kDriftTolerance; }
  // Makes the model accurate at x: the interpolant where possible, else
  // the linear model moved to x (at most kMaxMoves times).
  void centre(double x) {
    if (accurate(x)) return;
    if (hermite_intervals_ > 0) {
      build_hermite();
    } else if (moves_ < kMaxMoves) {
      nodes_[0] = design_node(pb_, dr_, p0_, x);
      ++moves_;
      ++exact_;
    }
  }
  // K at x: interpolated where accurate, else evaluated exactly.
  Mat42 k_at(double x) {
    Mat42 k;
    if (!interpolated(x, k)) exact(&x, 1, &k);
    return k;
  }
  // K at x into k when the model is accurate there (the interpolant is
  // built if that makes it so); false where x needs an exact evaluation.
  bool interpolated(double x, Mat42& k) {
    if (!accurate(x) && hermite_intervals_ > 0) build_hermite();
    if (!accurate(x)) return false;
    k = at(x);
    return true;
  }
  // K at n <= kMaxBatch values of x, evaluated exactly as one batch
  // (window_basis_pairs).
  static constexpr int kMaxBatch = 8;
  void exact(const double* x, int n, Mat42* k) {
    std::array<Orbit<double>, kMaxBatch> o{};
    std::array<WindowBasis<double>, kMaxBatch> be, bl;
    for (int i = 0; i < n; ++i)
      o[i] = {p0_ * std::exp(x[i]), dr_.ecc, dr_.inc, dr_.omega, 0.0, dr_.m0, pb_.d.late.ref_epoch_yr};
    window_basis_pairs(o.data(), n, pb_.d.early, pb_.d.late, be.data(), bl.data());
    for (int i = 0; i < n; ++i) k[i] = scaled_design(pb_, dr_, be[i], bl[i]);
    exact_ += n;
  }

 private:
  static constexpr int kMaxMoves = 3;
  bool accurate(double x) const {
    if (n_nodes_ > 1) return x >= nodes_[n_nodes_ - 1].x && x <= nodes_[0].x;
    const double dx = x - nodes_[0].x;
    return 0.5 * curvature_rate_ * curvature_rate_ * dx * dx / pb_.snr < kDriftTolerance;
  }
  // Nodes at x = 0 (kept), x_min / n, ..., x_min (descending).
  void build_hermite() {
    if (nodes_[0].x != 0.0) nodes_[0] = design_node(pb_, dr_, p0_, 0.0), ++exact_;
    const int n = hermite_intervals_;
    for (int k = 1; k <= n; ++k) nodes_[k] = design_node(pb_, dr_, p0_, x_min_ * k / n);
    n_nodes_ = n + 1;
    hermite_intervals_ = 0;
  }
  Mat42 at(double x) const {
    if (n_nodes_ == 1) return nodes_[0].k + (x - nodes_[0].x) * nodes_[0].dk;
    int i = 0;  // nodes descend in x
    while (i + 2 < n_nodes_ && x < nodes_[i + 1].x) ++i;
    const DesignNode &a = nodes_[i + 1], &b = nodes_[i];
    const double h = b.x - a.x, t = (x - a.x) / h, t2 = t * t, t3 = t2 * t;
    return (2 * t3 - 3 * t2 + 1) * a.k + (t3 - 2 * t2 + t) * h * a.dk + (-2 * t3 + 3 * t2) * b.k +
           (t3 - t2) * h * b.dk;
  }
  const Problem& pb_;
  const Draw& dr_;
  double p0_, x_min_, drift_rate_, curvature_rate_;
  int hermite_intervals_ = 0, n_nodes_ = 1, exact_ = 0, moves_ = 0;
  std::array<DesignNode, kMaxHermiteIntervals + 1> nodes_;
};

// x = ln P - ln P0 = log1p(-q) / 2 (Kepler's third law, m1 + m2 = m1 / (1 - q));
// the q used for the period is capped at kPeriodQCap.
double x_of(double log_1mq) { return 0.5 * std::max(log_1mq, kLog1mPeriodQCap); }

// log(exp(a) + exp(b)) without overflow or underflow.
double log_add_exp(double a, double b) {
  const double hi = std::max(a, b), lo = std::min(a, b);
  if (!std::isfinite(hi)) return hi;
  return hi + std::log1p(std::exp(lo - hi));
}

// The Gaussian in z used the model at the period of the best z (kmat);
// a sample's own period gives k_s: the log ratio of the exact likelihood
// to the Gaussian one.
double period_correction(const Problem& pb, const Mat42& kmat, const Mat42& k_s, const Eigen::Vector2d& z) {
  const Eigen::Vector4d r_hat = pb.d.dpm - kmat * z, r_s = pb.d.dpm - k_s * z;
  return -0.5 * r_s.dot(pb.cinv * r_s) + 0.5 * r_hat.dot(pb.cinv * r_hat);
}

// Log of the host-mass prior's density at m1_msun, up to its constant,
// for a host of mass mean_msun +- error_msun.
double log_host_density(double m1_msun, double mean_msun, double error_msun) {
  const double t = (m1_msun - mean_msun) / error_msun;
  return m1_msun > kMinHostMsun ? -0.5 * t * t : -std::numeric_limits<double>::infinity();
}
double log_host_density(const AnomalyData& d, double m1_msun) {
  return log_host_density(m1_msun, d.host_mass_msun, d.host_mass_error_msun);
}

// The least host-mass error, as a fraction of the host mass times the
// prior's largest q, for weighing with total mass fixed: a sample whose q
// differs from q_ref by dq has its weight scaled by about
// exp(-(dq / relative error)^2 / 2), so with a smaller error a draw's
// samples count for fewer. Measured at 4,096 draws on two demo stars, the
// 97.5 % mass quantile at the best separation against the weighing by
// periods: at fractions 0.02-0.07 it moved by 5-20 % (KMG-00754 at
// 2 %, q_max 0.33: +14 %, where 16,384 draws of either agreed), at
// 0.13-0.3 by no more than that weighing's own scatter between seeds.
constexpr double kMinHostSpread = 0.12;

// Whether a draw is weighed with its total mass fixed (weigh_total_batch):
// where the period model would need an exact evaluation at every sample's
// own period (hermite_intervals 0 at the nominal host mass: short periods
// or high S/N), and the host mass has a spread to trade against the
// companion's (kMinHostSpread). A function of the draw's orbit angles alone, so that
// either weighing is a valid estimate of the same integral.
bool total_mass_fixed(const Problem& pb, const Draw& dr) {
  return pb.d.host_mass_error_msun >= kMinHostSpread * pb.q_hi_nominal * pb.d.host_mass_msun &&
         hermite_intervals(pb, dr.ecc, pb.p0_nominal_yr, pb.x_min_nominal) == 0;
}

// Of a draw's z samples, how many are drawn from the prior when the others
// come from the Gaussian likelihood, for upper limits: the likelihood is
// Gaussian in z only at one period, and where a larger q moves the period
// onto a zero of the window averaging (short periods), a mode of heavy
// companions that the data allow lies far from the Gaussian. Without
// these samples such modes were never proposed, and 95 % upper limits held
// the truth in 91 % of systems at periods below 5 yr (docs/performance.md). Under
// the detections' log-uniform prior heavy companions weigh less and the
// bands' coverage holds without them.
int defensive_z_samples(const Problem& pb) { return pb.prior.log_uniform ? 0 : std::max(1, pb.opt.z_samples / 4); }

// The exact Gaussian likelihood of z for a design matrix K:
// F = K^T C^-1 K and the best z.
struct GaussianZ {
  Eigen::Matrix2d fisher;
  Eigen::Vector2d z_hat;
};
GaussianZ gaussian_z(const Problem& pb, const Mat42& k) {
  const Eigen::Matrix<double, 2, 4> kc = k.transpose() * pb.cinv;
  GaussianZ g{kc * k, {}};
  g.z_hat = g.fisher.inverse() * (kc * pb.d.dpm);
  return g;
}

// F = [[a, b], [b, c]] as weighing z samples needs it: its Cholesky factor
// L = [[l11, 0], [l21, l22]] (floored where F is singular) to draw
// z ~ N(z_hat, F^-1) as z_hat + L^-T n, and its smaller eigenvalue. In
// closed form for 2 x 2: Eigen's eigensolver here was 8 % of an upper
// limit's CPU. Plain arithmetic, so that loops over z samples vectorise.
struct FisherFactor {
  double lam_min, l11, l21, l22;
};
[[gnu::always_inline]] inline FisherFactor fisher_factor(double a, double b, double c) {
  // The smaller eigenvalue as det / the larger one (no cancellation);
  // it only sets narrow_gaussian, so the root needs no std::hypot (2.4 %
  // of the CPU at S/N 270, where every z sample has its own F).
  const double h = 0.5 * (a - c);
  const double lam_max = 0.5 * (a + c) + std::sqrt(h * h + b * b);
  FisherFactor f;
  f.lam_min = lam_max > 0.0 ? std::max((a * c - b * b) / lam_max, 1e-300) : 1e-300;
  f.l11 = std::sqrt(std::max(a, 1e-300));
  f.l21 = b / f.l11;
  f.l22 = std::sqrt(std::max(c - f.l21 * f.l21, 1e-300));
  return f;
}
// Whether the Gaussian is narrow against the prior's range of q (up to
// q_hi): then z is drawn from it, else from the prior.
[[gnu::always_inline]] inline bool narrow_gaussian(const FisherFactor& f, double q_hi) {
  return 1.0 / std::sqrt(f.lam_min) < 0.3 * q_hi;
}
// L^-T n for the normal deviates (n1, n2): z_hat plus it is a draw of
// z ~ N(z_hat, F^-1).
struct ZPoint {
  double z1, z2;
};
[[gnu::always_inline]] inline ZPoint gaussian_z_offset(const FisherFactor& f, double n1, double n2) {
  const double y2 = n2 / f.l22;
  return {(n1 - f.l21 * y2) / f.l11, y2};
}

// What weighing z samples with that likelihood needs: chi2 at the best z,
// F's factor, and the log of the likelihood's integral over z relative to
// its peak, 2 pi / sqrt(det F).
struct ZSampler {
  ZSampler(const Problem& pb, const GaussianZ& g)
      : g(g),
        chi2_min(pb.chi2_data - g.z_hat.dot(g.fisher * g.z_hat)),
        f(fisher_factor(g.fisher(0, 0), g.fisher(1, 0), g.fisher(1, 1))),
        log_gauss_norm(std::log(units::kTwoPi) - std::log(f.l11 * f.l22)) {}
  bool narrow(double q_hi) const { return narrow_gaussian(f, q_hi); }
  Eigen::Vector2d draw(const ZDeviates& u) const {
    const ZPoint d = gaussian_z_offset(f, u.n1, u.n2);
    return g.z_hat + Eigen::Vector2d(d.z1, d.z2);
  }
  // (z - z_hat)^T F (z - z_hat) / 2
  double half_dist2(const Eigen::Vector2d& z) const {
    const Eigen::Vector2d dz = z - g.z_hat;
    return 0.5 * dz.dot(g.fisher * dz);
  }
  double log_likelihood(const Eigen::Vector2d& z) const { return -0.5 * chi2_min - half_dist2(z); }
  const GaussianZ& g;
  double chi2_min;
  FisherFactor f;
  double log_gauss_norm;
};

// A draw waiting to be weighed: the log weight added to each of its samples
// (prior / proposal of the draw itself) and where the samples go.
struct PendingDraw {
  const Draw* dr;
  double log_extra;
  Sample* out;
};

// For upper limits, a draw weighed with its total mass fixed also weighs
// each of its last defensive_z_samples samples at its own total mass: z is
// the sample's prior z for the draw's host mass m1' and m_total =
// m1' / (1 - |z|), a draw of (m_total, z) from the prior itself. Every
// sample, in either stratum, is weighed against the mixture of the two
// proposals in the proportions of their samples (the balance heuristic of
// multiple importance sampling; Veach & Guibas 1995). Heavy companions
// near a zero of the window averaging need a total mass four host-mass
// errors above m1' / (1 - q_ref), which the first stratum never proposes;
// the prior's samples do, each at its exact period.
struct TotalMassMixture {
  double log_frac_ref, log_frac_prior;  ///< the strata's shares of the samples
  double log_1mq_ref;                   ///< of the draw's reference total mass
  double one_m_q_ref;                   ///< exp(log_1mq_ref)
  // The log weight of a sample z at m_total with host m1: the target
  // p_host(m1) (1 - q) p(z | m1) L(z) over the mixture of the first
  // stratum's density (m_total from the reference, z from the Gaussian zs
  // at m_total where it is narrow, else from the prior) and the joint
  // prior's.
  double log_weight(const Problem& pb, const ZSampler& zs, bool narrow, const Eigen::Vector2d& z, double m_total,
                    double m1) const {
    const double log_prior_z = pb.prior.log_density_total(z.norm(), m_total);
    const double log_prior = log_host_density(pb.d, m1) + log_prior_z;
    const double log_r_ref = narrow ? -zs.half_dist2(z) - zs.log_gauss_norm : log_prior_z;
    return log_prior + zs.log_likelihood(z) -
           log_add_exp(log_frac_ref + log_host_density(pb.d, m_total * one_m_q_ref) + log_1mq_ref + log_r_ref,
                       log_frac_prior + log_prior);
  }
};

// Stores a weighed z sample.
void store_sample(Sample& o, double log_w, double m2_msun, double m1_msun, const Eigen::Vector2d& z, double omega) {
  o.log_w = std::isfinite(log_w) ? log_w : -std::numeric_limits<double>::infinity();
  o.m2_mjup = m2_msun * units::kMjupPerMsun;
  o.m1_msun = m1_msun;
  o.z1 = z.x();
  o.z2 = z.y();
  o.omega = omega;
}

// The z samples [s_begin, s_end) of a draw weighed with total mass m_total,
// from its design matrix K at P(m_total); log_proposal is the log density
// m_total was drawn from (weigh_total_batch), mix the mixture for upper
// limits (null for detections). Inlined into both callers, and
// weigh_total_batch instantiated for either way of taking omega: with one
// call of it not inlined, or the branch in one function, the draws that
// never take the other way cost 4-5 % more (bench/curve_bench at sigma =
// 10 and 50, the same draws).
[[gnu::always_inline]] inline void weigh_samples_total(const Problem& pb, const PendingDraw& pd, const GaussianZ& g,
                                                      double m_total, double log_proposal, int s_begin, int s_end,
                                                      const TotalMassMixture* mix) {
  const AnomalyData& d = pb.d;
  const ZPlanePrior& prior = pb.prior;
  const Draw& dr = *pd.dr;
  const ZSampler zs(pb, g);
  const bool gaussian = zs.narrow(prior.m_hi_msun / m_total);
  const ZDeviates* dev = &pb.ds.dev[dr.dev];
  for (int s = s_begin; s < s_end; ++s) {
    const ZDeviates& u = dev[s];
    Eigen::Vector2d z;
    double log_w;
    if (gaussian) {
      // z ~ N(z_hat, F^-1), the likelihood itself: weight = prior x evidence.
      z = zs.draw(u);
      log_w = prior.log_density_total(z.norm(), m_total) - 0.5 * zs.chi2_min + zs.log_gauss_norm;
    } else {
      // m2 from its prior (the draw's prior z, drawn for its own m1) and
      // q = m2 / m_total: the z density is then the prior's, weight = likelihood.
      const double q_dev = std::hypot(u.z1, u.z2);
      const double f = dr.m1 / ((1.0 - q_dev) * m_total);  // q / q_dev
      z << f * u.z1, f * u.z2;
      log_w = z.norm() < 1.0 ? zs.log_likelihood(z) : -std::numeric_limits<double>::infinity();
    }
    const double q = z.norm(), m1 = m_total * (1.0 - q);
    if (mix) log_w = mix->log_weight(pb, zs, gaussian, z, m_total, m1);
    else log_w = log_w + log_host_density(d, m1) - log_proposal;
    store_sample(pd.out[s], log_w + pd.log_extra, m_total * q, m1, z, dr.omega);
  }
}

// The prior stratum's sample s of a draw (TotalMassMixture), from its
// design matrix K at its own total mass.
void weigh_prior_sample_total(const Problem& pb, const PendingDraw& pd, int s, const Mat42& k, double m_total,
                              const TotalMassMixture& mix) {
  const ZDeviates& u = pb.ds.dev[pd.dr->dev + s];
  const Eigen::Vector2d z(u.z1, u.z2);
  const GaussianZ g = gaussian_z(pb, k);
  const ZSampler zs(pb, g);
  const double log_w = mix.log_weight(pb, zs, zs.narrow(pb.prior.m_hi_msun / m_total), z, m_total, pd.dr->m1);
  store_sample(pd.out[s], log_w + pd.log_extra, m_total * z.norm(), pd.dr->m1, z, pd.dr->omega);
}

// A detection's z samples [0, nz) weighed with total mass m_total as
// weigh_samples_total does, each with its own omega from the draw's table
// (omega_table at P(m_total), from the window fits be, bl), with the
// deviate u_omega + s / nz (mod 1): each uniform, together stratified over
// the table. Each sample's Gaussian in z follows from the same fit
// (cell_fit at its omega). The draw keeps the last sample's omega.
// kSampleLanes samples at a time in vector lanes (own_omega_picks and
// lane_weights); samples whose Gaussian is not narrow are weighed
// after, one by one, by weigh_samples_total. Detections that share one
// omega fill the lanes with one Gaussian (weigh_samples_lanes).
struct SampleLanes {
  std::array<double, kSampleLanes> n1, n2;  ///< the samples' normal deviates, in
  // each sample's omega and cell, its Gaussian (z_hat, F's factor,
  // chi2_min), whether it is narrow (the weight holds only where it is),
  // and l11 l22 times the proposal / prior of its omega
  std::array<double, kSampleLanes> omega, cos_omega, sin_omega, z_hat1, z_hat2, l11, l21, l22, chi2_min, narrow, norm;
  std::array<int, kSampleLanes> cell;
  std::array<double, kSampleLanes> z1, z2, q, log_w;  ///< the samples, out
};
// The samples [s0, s0 + n) of weigh_samples_own_omega in vector lanes
// (AVX2 where present; no contraction, so both clones give the same
// weights), in two loops: the omega picks and Gaussians, then the samples,
// with log_c added to their log weights. The logs of the prior, of the
// Gaussian's norm and of omega's prior / proposal are one log_positive.
// The loops read arrays filled before and locals: with the deviates loaded
// from their records, with reads through pb, without __restrict, or with
// both loops in one function, GCC did not vectorise them.
__attribute__((target_clones("arch=x86-64-v3", "default"), optimize("fp-contract=off"))) void own_omega_picks(
    const Problem& pb, const Draw& dr, const OmegaFit& fit, const OmegaTable& t, const OmegaCdf& cdf, double m_total,
    int s0, int n, SampleLanes& __restrict l) {
  const int nz = pb.opt.z_samples;
  const double chi2_data = pb.chi2_data, q_hi = pb.prior.m_hi_msun / m_total;
  for (int i = 0; i < n; ++i) {
    l.n1[i] = pb.ds.dev[dr.dev + s0 + i].n1;
    l.n2[i] = pb.ds.dev[dr.dev + s0 + i].n2;
  }
#pragma omp simd
  for (int i = 0; i < n; ++i) {
    const double u = dr.u_omega + static_cast<double>(s0 + i) / nz;
    const OmegaPick w = omega_cell(t, cdf, u - std::floor(u));
    const CellFit f = cell_fit(fit, w.cos_omega, w.sin_omega);
    const FisherFactor ff = fisher_factor(f.f00, f.f01, f.f11);
    l.omega[i] = w.omega;
    l.cos_omega[i] = w.cos_omega;
    l.sin_omega[i] = w.sin_omega;
    l.cell[i] = w.cell;
    l.z_hat1[i] = f.z1;
    l.z_hat2[i] = f.z2;
    l.l11[i] = ff.l11;
    l.l21[i] = ff.l21;
    l.l22[i] = ff.l22;
    l.chi2_min[i] = chi2_data - (f.z1 * (f.f00 * f.z1 + f.f01 * f.z2) + f.z2 * (f.f01 * f.z1 + f.f11 * f.z2));
    l.narrow[i] = narrow_gaussian(ff, q_hi) ? 1.0 : 0.0;
    l.norm[i] = ff.l11 * ff.l22 * (kOmegaCells * t[w.cell]);
  }
}
__attribute__((target_clones("arch=x86-64-v3", "default"), optimize("fp-contract=off"))) void lane_weights(
    const Problem& pb, double m_total, double log_c, int n, SampleLanes& __restrict l) {
  const ZPlanePrior prior = pb.prior;
  const double host_msun = pb.d.host_mass_msun, host_error_msun = pb.d.host_mass_error_msun;
#pragma omp simd
  for (int i = 0; i < n; ++i) {
    const ZPoint d = gaussian_z_offset({0.0, l.l11[i], l.l21[i], l.l22[i]}, l.n1[i], l.n2[i]);
    const double z1 = l.z_hat1[i] + d.z1, z2 = l.z_hat2[i] + d.z2, q = std::sqrt(z1 * z1 + z2 * z2);
    // prior x the likelihood's integral over z, 2 pi / (l11 l22)
    // e^(-chi2_min / 2), x prior / proposal of omega
    l.log_w[i] = prior.log_density_total_over(q, m_total, l.norm[i]) - 0.5 * l.chi2_min[i] +
                 log_host_density(m_total * (1.0 - q), host_msun, host_error_msun) + log_c;
    l.z1[i] = z1;
    l.z2[i] = z2;
    l.q[i] = q;
  }
}

void weigh_samples_own_omega(const Problem& pb, const PendingDraw& pd, const WindowBasis<double>& be,
                             const WindowBasis<double>& bl, double m_total, double log_proposal) {
  const Draw& dr = *pd.dr;
  const int nz = pb.opt.z_samples;
  const OmegaFit fit = omega_fit(pb, dr, be, bl);
  const OmegaTable t = omega_table(fit, dr, pb.prior.log_uniform);
  const OmegaCdf cdf = omega_cdf(t);
  // 2 pi of the Gaussian's integral, the draw's prior / proposal and its
  // total mass's proposal
  const double log_c = std::log(units::kTwoPi) - log_proposal + pd.log_extra;
  SampleLanes l;
  int last = 0;
  for (int s0 = 0; s0 < nz; s0 += kSampleLanes) {
    const int n = std::min(kSampleLanes, nz - s0);
    own_omega_picks(pb, dr, fit, t, cdf, m_total, s0, n, l);
    lane_weights(pb, m_total, log_c, n, l);
    for (int i = 0; i < n; ++i) {
      dr.omega = l.omega[i];  // stored with the sample
      const double q = l.q[i];
      if (l.narrow[i] != 0.0) {
        store_sample(pd.out[s0 + i], l.log_w[i], m_total * q, m_total * (1.0 - q), {l.z1[i], l.z2[i]}, dr.omega);
        continue;
      }
      PendingDraw one = pd;
      one.log_extra += omega_log_ratio(t, l.cell[i]);
      const CellFit f = cell_fit(fit, l.cos_omega[i], l.sin_omega[i]);
      GaussianZ g;
      g.fisher << f.f00, f.f01, f.f01, f.f11;
      g.z_hat << f.z1, f.z2;
      weigh_samples_total(pb, one, g, m_total, log_proposal, s0 + i, s0 + i + 1, nullptr);
    }
    last = n - 1;
  }
  set_omega(dr, l.omega[last], l.cos_omega[last], l.sin_omega[last]);
}

// A detection's z samples [0, nz) weighed with total mass m_total as
// weigh_samples_total does, all from one Gaussian: where it is narrow, in
// vector lanes (lane_weights, the logs in one log_positive), else one by
// one.
void weigh_samples_lanes(const Problem& pb, const PendingDraw& pd, const GaussianZ& g, double m_total,
                         double log_proposal) {
  const int nz = pb.opt.z_samples;
  const ZSampler zs(pb, g);
  if (!zs.narrow(pb.prior.m_hi_msun / m_total)) {
    weigh_samples_total(pb, pd, g, m_total, log_proposal, 0, nz, nullptr);
    return;
  }
  const Draw& dr = *pd.dr;
  const double log_c = std::log(units::kTwoPi) - log_proposal + pd.log_extra;
  SampleLanes l;
  for (int s0 = 0; s0 < nz; s0 += kSampleLanes) {
    const int n = std::min(kSampleLanes, nz - s0);
    for (int i = 0; i < n; ++i) {
      l.n1[i] = pb.ds.dev[dr.dev + s0 + i].n1;
      l.n2[i] = pb.ds.dev[dr.dev + s0 + i].n2;
      l.z_hat1[i] = g.z_hat.x();
      l.z_hat2[i] = g.z_hat.y();
      l.l11[i] = zs.f.l11;
      l.l21[i] = zs.f.l21;
      l.l22[i] = zs.f.l22;
      l.chi2_min[i] = zs.chi2_min;
      l.norm[i] = zs.f.l11 * zs.f.l22;
    }
    lane_weights(pb, m_total, log_c, n, l);
    for (int i = 0; i < n; ++i) {
      const double q = l.q[i];
      store_sample(pd.out[s0 + i], l.log_w[i], m_total * q, m_total * (1.0 - q), {l.z1[i], l.z2[i]}, dr.omega);
    }
  }
}

// Draws weighed with total mass fixed at once, at most.
constexpr int kDrawBatch = 8;

// Draws weighed in the coordinates (m_total, z) instead of (m1, z), with
// m1 = m_total (1 - |z|): the period, which depends on m_total alone, is
// the same for all of a draw's z samples, the model is linear in z, and
// the likelihood is exactly Gaussian in z after one evaluation. The density
// of the target gains the Jacobian dm1/dm_total = 1 - q; the draw's host
// mass m1' (drawn from its prior) sets m_total = m1' / (1 - q_ref), with
// q_ref the best |z| of the model at the nominal host mass (a function of
// the orbit angles only), so m_total has the density
// p_host(m_total (1 - q_ref)) (1 - q_ref). Each sample's weight then holds
// p_host(m_total (1 - q)) / that density: near 1 where q is near q_ref,
// and never a bias, only variance, where it is not (docs/method.md,
// "Total mass per draw"). Upper limits add samples of the prior
// (TotalMassMixture).
//
// Two window-model evaluations per draw (and one per prior sample), for
// n <= kDrawBatch draws at once: all their fits at the nominal period,
// then all at their total masses (window_basis_pairs), so that the draws'
// Kepler solves overlap; each draw's result is the same as alone. With
// kOwnOmega each z sample takes its own omega (weigh_samples_own_omega),
// else a draw's samples share one. Returns the number of window-model
// evaluations.
template <bool kOwnOmega>
long weigh_total_batch(const Problem& pb, PendingDraw* p, int n) {
  const AnomalyData& d = pb.d;
  const int nz = pb.opt.z_samples, n_prior = defensive_z_samples(pb);
  const bool table = omega_from_table(pb);
  const double log_frac_ref = std::log(static_cast<double>(nz - n_prior) / nz),
               log_frac_prior = std::log(static_cast<double>(n_prior) / nz);
  std::array<Orbit<double>, kDrawBatch> o{};
  std::array<WindowBasis<double>, kDrawBatch> be, bl;
  std::array<double, kDrawBatch> m_total, log_proposal;
  std::array<TotalMassMixture, kDrawBatch> mix;
  for (int i = 0; i < n; ++i) {
    const Draw& dr = *p[i].dr;
    o[i] = {pb.p0_nominal_yr, dr.ecc, dr.inc, dr.omega, 0.0, dr.m0, d.late.ref_epoch_yr};
  }
  window_basis_pairs(o.data(), n, d.early, d.late, be.data(), bl.data());
  for (int i = 0; i < n; ++i) {
    const Draw& dr = *p[i].dr;
    // Where omega comes from its table (at m_total), q_ref must not depend
    // on the omega drawn: the best fit over the cells.
    const double q_best = table ? best_q(omega_fit(pb, dr, be[i], bl[i]))
                                : gaussian_z(pb, scaled_design(pb, dr, be[i], bl[i])).z_hat.norm();
    const double q_ref = std::min(q_best, pb.q_hi_nominal);
    const double log_1mq_ref = std::log1p(-q_ref);
    m_total[i] = dr.m1 / (1.0 - q_ref);
    log_proposal[i] = log_host_density(d, dr.m1) + log_1mq_ref;
    mix[i] = {log_frac_ref, log_frac_prior, log_1mq_ref, std::exp(log_1mq_ref)};
    dr.warm.x = x_of(log_1mq_ref);  // the period used, for a later weigh_draw_periods
    o[i].period_yr = period_from_a(pb.a_au, m_total[i]);
  }
  window_basis_pairs(o.data(), n, d.early, d.late, be.data(), bl.data());
  if constexpr (!kOwnOmega) {
    if (table)
      for (int i = 0; i < n; ++i)
        p[i].log_extra += choose_omega(omega_fit(pb, *p[i].dr, be[i], bl[i]), *p[i].dr, pb.prior.log_uniform);
    for (int i = 0; i < n; ++i) {
      const GaussianZ g = gaussian_z(pb, scaled_design(pb, *p[i].dr, be[i], bl[i]));
      if (n_prior == 0) weigh_samples_lanes(pb, p[i], g, m_total[i], log_proposal[i]);
      else weigh_samples_total(pb, p[i], g, m_total[i], log_proposal[i], 0, nz - n_prior, &mix[i]);
    }
  } else {
    for (int i = 0; i < n; ++i) weigh_samples_own_omega(pb, p[i], be[i], bl[i], m_total[i], log_proposal[i]);
  }
  // the prior samples, kDrawBatch orbits at a time
  const int n_orbits = n * n_prior;
  for (int begin = 0; begin < n_orbits; begin += kDrawBatch) {
    const int end = std::min(n_orbits, begin + kDrawBatch);
    for (int j = begin; j < end; ++j) {
      const Draw& dr = *p[j / n_prior].dr;
      const ZDeviates& u = pb.ds.dev[dr.dev + nz - n_prior + j % n_prior];
      m_total[j - begin] = dr.m1 / std::exp(u.log_1mq);
      o[j - begin] = {period_from_a(pb.a_au, m_total[j - begin]), dr.ecc, dr.inc, dr.omega, 0.0, dr.m0,
                      d.late.ref_epoch_yr};
    }
    window_basis_pairs(o.data(), end - begin, d.early, d.late, be.data(), bl.data());
    for (int j = begin; j < end; ++j) {
      const int i = j / n_prior;
      weigh_prior_sample_total(pb, p[i], nz - n_prior + j % n_prior,
                               scaled_design(pb, *p[i].dr, be[j - begin], bl[j - begin]), m_total[j - begin], mix[i]);
    }
  }
  return 2L * n + n_orbits;
}

// The z samples of weigh_draw_periods when all come from the draw's narrow
// Gaussian (detections), kSampleLanes at a time in vector lanes (AVX2
// where present, no contraction): z, q, log(1 - q) and the weight
// prior(z) e^(-chi2_min / 2) 2 pi / sqrt(det F), the logs by log_positive.
struct PeriodLanes {
  std::array<double, kSampleLanes> n1, n2;                   ///< the normal deviates, in
  std::array<double, kSampleLanes> z1, z2, q, log_1mq, log_w;  ///< the samples, out
};
__attribute__((target_clones("arch=x86-64-v3", "default"), optimize("fp-contract=off"))) void period_lanes(
    const ZPlanePrior& prior_in, const Draw& dr, const ZSampler& zs, int n, PeriodLanes& __restrict l) {
  const ZPlanePrior prior = prior_in;
  const FisherFactor f = zs.f;
  const double zh1 = zs.g.z_hat.x(), zh2 = zs.g.z_hat.y(), chi2_min = zs.chi2_min, log_norm = zs.log_gauss_norm;
  const double log_prior_c = dr.log_prior_c, q_lo = dr.q_lo, q_hi = dr.q_hi;
#pragma omp simd
  for (int i = 0; i < n; ++i) {
    const ZPoint d = gaussian_z_offset(f, l.n1[i], l.n2[i]);
    const double z1 = zh1 + d.z1, z2 = zh2 + d.z2, q = std::sqrt(z1 * z1 + z2 * z2);
    // log_q's argument a positive normal number wherever it is used
    const double log_1mq = log1m_lanes(q), log_q = log_positive(q > q_lo ? q : 1.0);
    l.z1[i] = z1;
    l.z2[i] = z2;
    l.q[i] = q;
    l.log_1mq[i] = log_1mq;
    l.log_w[i] = prior.log_density(log_prior_c, q_lo, q_hi, q, log_q, log_1mq) - 0.5 * chi2_min + log_norm;
  }
}

// Weighted z samples of one draw of (i, omega, e, M0, m1, parallax), each
// at its own period: z = q (cos Omega, sin Omega) is marginalised through its exact Gaussian
// likelihood and importance-sampled against the mass prior. `log_extra` is
// added to every weight (prior / proposal of the draw itself). Returns the
// number of window-model evaluations.
int weigh_draw_periods(const Problem& pb, const Draw& dr, const ZDeviates* dev, double log_extra, Sample* out) {
  const ZPlanePrior& prior = pb.prior;
  const double p0 = period_from_a(pb.a_au, dr.m1);
  const double x_min = x_of(std::log1p(-dr.q_hi));
  // Fixed point of the period on m1 + m2 (m2 from the best z).
  double x = std::clamp(dr.warm.x, x_min, 0.0);
  // Where the samples are likely to need the interpolant, its first node
  // (x = 0) is evaluated first instead of the warm start, which it would
  // replace: where they needed it last time, and for upper limits, whose
  // defensive samples from the prior span the whole range of q (98 % of
  // the draws at the bench's sigma = 3 star need it).
  const bool hermite_likely = dr.warm.hermite || defensive_z_samples(pb) > 0;
  double log_omega = 0.0;
  PeriodModel model(pb, dr, p0, x_min, hermite_likely ? 0.0 : x, omega_from_table(pb) ? &log_omega : nullptr);
  Mat42 kmat;
  GaussianZ g;
  for (int it = 0; it < 8; ++it) {
    kmat = model.k_at(x);
    g = gaussian_z(pb, kmat);
    // Beyond the prior's largest q no sample has weight: the period there
    // is the one at that q.
    const double x_new = std::max(x_of(std::log1p(-std::min(g.z_hat.norm(), 0.999))), x_min);
    if (model.negligible(x_new - x)) break;
    x = x_new;
    model.centre(x);
  }
  dr.warm.x = x;
  const ZSampler zs(pb, g);
  const bool gaussian = zs.narrow(dr.q_hi);
  // Period corrections that need exact evaluations of the model (half of
  // all evaluations, short periods) run in batches (PeriodModel::exact),
  // so that their Kepler solves overlap; the results are the same.
  constexpr int kBatch = PeriodModel::kMaxBatch;
  std::array<double, kBatch> x_exact{};
  std::array<int, kBatch> s_exact;
  std::array<Mat42, kBatch> k_exact;
  int n_exact = 0;
  auto correct_batch = [&] {
    model.exact(x_exact.data(), n_exact, k_exact.data());
    for (int j = 0; j < n_exact; ++j) {
      Sample& o = out[s_exact[j]];
      o.log_w += period_correction(pb, kmat, k_exact[j], Eigen::Vector2d(o.z1, o.z2));
    }
    n_exact = 0;
  };
  const int nz = pb.opt.z_samples;
  const int n_gauss = gaussian ? nz - defensive_z_samples(pb) : 0;
  const double log_frac_gauss = std::log(static_cast<double>(n_gauss) / nz),
               log_frac_prior = std::log(1.0 - static_cast<double>(n_gauss) / nz);
  // All samples from the Gaussian: weight = prior(z) exp(-chi2_min/2)
  // 2 pi sqrt(det F^-1), in lanes.
  const bool all_gauss = n_gauss == nz;
  PeriodLanes lanes;
  for (int s = 0; s < nz; ++s) {
    const ZDeviates& u = dev[s];
    const int lane = s % kSampleLanes;
    if (all_gauss && lane == 0) {
      const int n = std::min(kSampleLanes, nz - s);
      for (int i = 0; i < n; ++i) {
        lanes.n1[i] = dev[s + i].n1;
        lanes.n2[i] = dev[s + i].n2;
      }
      period_lanes(prior, dr, zs, n, lanes);
    }
    // The first n_gauss samples z ~ N(z_hat, F^-1), the rest from the prior.
    Eigen::Vector2d z;
    double q, log_1mq, log_w;
    if (all_gauss) {
      z << lanes.z1[lane], lanes.z2[lane];
      q = lanes.q[lane];
      log_1mq = lanes.log_1mq[lane];
      log_w = lanes.log_w[lane];
    } else {
      if (s < n_gauss) {
        z = zs.draw(u);
        log_1mq = log1m_norm(z);
      } else {
        z << u.z1, u.z2;
        log_1mq = u.log_1mq;
      }
      q = z.norm();
      if (!gaussian) {
        // z from the prior: weight = likelihood.
        log_w = zs.log_likelihood(z);
      } else {
        // each sample weighed against the mixture of both (defensive mixture)
        const double log_p = prior.log_density(dr, q, std::log(q), log_1mq);
        const double half_d2 = zs.half_dist2(z);
        log_w = std::isfinite(log_p) ? log_p - 0.5 * zs.chi2_min - half_d2 -
                                           log_add_exp(log_frac_gauss - zs.log_gauss_norm - half_d2,
                                                       log_frac_prior + log_p)
                                     : -std::numeric_limits<double>::infinity();
      }
    }
    // The Gaussian used the period of the best z; where this sample's own
    // m1 + m2 moves the period, correct by the exact / Gaussian likelihood.
    const double x_s = x_of(log_1mq);
    Sample& o = out[s];
    o.log_w = log_w;
    o.m2_mjup = dr.m1 * q / (1.0 - std::min(q, 0.999999)) * units::kMjupPerMsun;
    o.m1_msun = dr.m1;
    o.z1 = z.x();
    o.z2 = z.y();
    o.omega = dr.omega;
    if (std::isfinite(log_w) && !model.negligible(x_s - x)) {
      Mat42 k_s;
      if (model.interpolated(x_s, k_s)) {
        o.log_w += period_correction(pb, kmat, k_s, z);
      } else {
        x_exact[n_exact] = x_s;
        s_exact[n_exact++] = s;
        if (n_exact == kBatch) correct_batch();
      }
    }
  }
  correct_batch();
  for (int s = 0; s < nz; ++s) {
    Sample& o = out[s];
    o.log_w += log_extra + log_omega;
    if (!std::isfinite(o.log_w)) o.log_w = -std::numeric_limits<double>::infinity();
  }
  dr.warm.hermite = model.interpolating();
  return model.evaluations();
}

// Weighs draws one at a time by periods (weigh_draw_periods), or, for those
// whose total mass is fixed, in batches of up to kDrawBatch
// (weigh_total_batch) held until flush().
class DrawWeigher {
 public:
  explicit DrawWeigher(const Problem& pb)
      : pb_(pb), own_omega_(omega_per_sample(pb) && defensive_z_samples(pb) == 0) {}
  void add(const Draw& dr, double log_extra, Sample* out) {
    constexpr double kNone = -std::numeric_limits<double>::infinity();
    if (log_extra == kNone) {  // outside the prior: no weight
      for (int s = 0; s < pb_.opt.z_samples; ++s) out[s] = {kNone, 0.0, 0.0, 0.0, 0.0, dr.omega};
      return;
    }
    if (!total_mass_fixed(pb_, dr)) {
      evaluations_ += weigh_draw_periods(pb_, dr, &pb_.ds.dev[dr.dev], log_extra, out);
      return;
    }
    pending_[n_++] = {&dr, log_extra, out};
    if (n_ == kDrawBatch) flush();
  }
  void flush() {
    evaluations_ += own_omega_ ? weigh_total_batch<true>(pb_, pending_.data(), n_)
                               : weigh_total_batch<false>(pb_, pending_.data(), n_);
    n_ = 0;
  }
  long evaluations() const { return evaluations_; }

 private:
  const Problem& pb_;
  /// Whether the draws weighed with their total mass fixed give each z
  /// sample its own omega (kOmegaPerSampleSnr; detections only).
  bool own_omega_;
  std::array<PendingDraw, kDrawBatch> pending_;
  int n_ = 0;
  long evaluations_ = 0;
};

// The orbit-angle part of a draw in sampling coordinates:
// (cos i, omega, M0, e); angles are periodic.
using Coords = Eigen::Vector4d;
Coords coords_of(const Draw& d) { return {d.cos_i, d.omega, d.m0, d.ecc}; }

// Log density of the prior of the orbit-angle part.
double log_prior_coords(const Coords& c, const Distribution& ecc) {
  if (std::abs(c(0)) > 1.0 || c(3) < 0.0 || c(3) > kCurveMaxEcc) return -std::numeric_limits<double>::infinity();
  return -std::log(2.0) - 2.0 * std::log(units::kTwoPi) + ecc.log_pdf(c(3));
}

// The exponents 0.5 sum_i (c_i - a_i)^2 / w_i^2 of n kernels with centres
// a (one array per coordinate of Coords; omega and M0, the angles, at
// their nearest image: KernelMixture::is_angle) into q, in one pass that
// vectorises (AVX2 where present; without contraction into fused
// multiply-adds, so that both clones give the numbers of the plain
// expression); returns the smallest.
__attribute__((target_clones("arch=x86-64-v3", "default"), optimize("fp-contract=off"))) double
kernel_exponents(const std::array<std::vector<double>, 4>& centre, const Coords& c, const Coords& inv_w2,
                 std::size_t n, double* q) {
  const double* a0 = centre[0].data();
  const double* a1 = centre[1].data();
  const double* a2 = centre[2].data();
  const double* a3 = centre[3].data();
  const double c0 = c(0), c1 = c(1), c2 = c(2), c3 = c(3);
  const double w0 = inv_w2(0), w1 = inv_w2(1), w2 = inv_w2(2), w3 = inv_w2(3);
  constexpr double kPi = units::kPi, kTwoPi = units::kTwoPi;
  for (std::size_t m = 0; m < n; ++m) {
    const double d0 = c0 - a0[m];
    double d1 = c1 - a1[m], d2 = c2 - a2[m];
    d1 = d1 > kPi ? d1 - kTwoPi : (d1 < -kPi ? d1 + kTwoPi : d1);
    d2 = d2 > kPi ? d2 - kTwoPi : (d2 < -kPi ? d2 + kTwoPi : d2);
    const double d3 = c3 - a3[m];
    q[m] = ((0.5 * (d0 * d0 * w0) + 0.5 * (d1 * d1 * w1)) + 0.5 * (d2 * d2 * w2)) + 0.5 * (d3 * d3 * w3);
  }
  // The smallest in four lanes, so that this too vectorises (a floating
  // minimum is not reassociated otherwise).
  constexpr double kInf = std::numeric_limits<double>::infinity();
  double lane[4] = {kInf, kInf, kInf, kInf};
  std::size_t m = 0;
  for (; m + 4 <= n; m += 4)
    for (int k = 0; k < 4; ++k) lane[k] = q[m + k] < lane[k] ? q[m + k] : lane[k];
  for (; m < n; ++m) lane[0] = q[m] < lane[0] ? q[m] : lane[0];
  return std::min(std::min(lane[0], lane[1]), std::min(lane[2], lane[3]));
}

// sum_m count_m exp(q_min - q_m) over the kernels within `cut` of the
// nearest (q_m >= q_min), in four partial sums so that it vectorises
// (AVX2 where present; no contraction, so both clones give the same sum).
__attribute__((target_clones("arch=x86-64-v3", "default"), optimize("fp-contract=off"))) double
kernel_sum(const double* q, const double* count, std::size_t n, double q_min, double cut) {
  double lane[4] = {0.0, 0.0, 0.0, 0.0};
  std::size_t m = 0;
  for (; m + 4 <= n; m += 4)
    for (int k = 0; k < 4; ++k) {
      const double t = q_min - q[m + k];
      lane[k] += t > -cut ? count[m + k] * exp_nonpositive(t) : 0.0;
    }
  for (; m < n; ++m) {
    const double t = q_min - q[m];
    lane[0] += t > -cut ? count[m] * exp_nonpositive(t) : 0.0;
  }
  return (lane[0] + lane[1]) + (lane[2] + lane[3]);
}

// Gaussian kernels in the orbit-angle coordinates around ancestors, with
// per-axis widths; in the angles (in [0, 2 pi)) each kernel is truncated to
// within pi of its centre (kernel_offset), so that its density is the
// Gaussian at the nearest image, renormalised. An ancestor drawn several
// times (systematic resampling of a peaked posterior) is one kernel with
// its count. The mixture's log density skips kernels whose exponent is more
// than kKernelCut below the nearest one (their share is below
// exp(-kKernelCut)).
class KernelMixture {
 public:
  KernelMixture(const std::vector<Coords>& anc, const Coords& width) {
    log_norm_ = std::log(static_cast<double>(anc.size()));
    inv_w2_.setZero();
    for (int i = 0; i < 4; ++i)
      if (width(i) > 0.0) {
        inv_w2_(i) = 1.0 / (width(i) * width(i));
        log_norm_ += std::log(width(i) * std::sqrt(units::kTwoPi));
        if (is_angle(i)) log_norm_ += std::log(std::erf(units::kPi / (width(i) * std::numbers::sqrt2)));
      }
    // Resampling puts copies of an ancestor next to each other.
    for (std::size_t m = 0; m < anc.size(); ++m) {
      if (m > 0 && anc[m] == anc[m - 1]) {
        count_.back() += 1.0;
        continue;
      }
      for (int i = 0; i < 4; ++i) centre_[i].push_back(anc[m](i));
      count_.push_back(1.0);
    }
  }
  double log_density(const Coords& c, std::vector<double>& q) const {
    const std::size_t n = count_.size();
    q.resize(n);
    const double q_min = kernel_exponents(centre_, c, inv_w2_, n, q.data());
    return -q_min + std::log(kernel_sum(q.data(), count_.data(), n, q_min, kKernelCut)) - log_norm_;
  }
  static bool is_angle(int i) { return i == 1 || i == 2; }

 private:
  static constexpr double kKernelCut = 40.0;
  std::array<std::vector<double>, 4> centre_;  ///< distinct ancestors, one array per coordinate
  std::vector<double> count_;                  ///< how often each was drawn
  Coords inv_w2_;
  double log_norm_;
};

// A defensive importance proposal for the orbit-angle part: half the
// prior, half Gaussian kernels around ancestors (adaptive importance
// sampling, e.g. Cappe et al. 2004, J. Comput. Graph. Stat. 13, 907).
struct Proposal {
  std::vector<Coords> anc;
  std::vector<WarmStart> anc_warm;  ///< the ancestors' Draw::warm
  Coords width = Coords::Zero();
};

// A kernel's width w in an angle, with t = pi / w and Phi(-t), the mass
// its truncation to [-pi, pi] removes from either side (kernel_offset).
struct AngleWidth {
  double w, t, tail;
};
AngleWidth angle_width(double w) {
  const double t = units::kPi / w;
  return {w, t, normal_cdf(-t)};
}

// A kernel's offset in an angle from the standard normal deviate n, with
// u = Phi(n) (computed once per curve: ProposalDeviates::angle_cdf), for the
// width a: the Gaussian truncated to [-pi, pi] by the inverse of its
// distribution function, so that the density KernelMixture gives (the
// nearest image's) is exact. Wrapped instead, a kernel as wide as the
// widths' cap (2 rad) has twice that density at pi from its centre. Where
// the truncation removes less than 1e-15 (w below pi / 8) the deviate is
// used as it is.
double kernel_offset(const AngleWidth& a, double n, double u) {
  if (a.t > 8.0) return a.w * n;
  return a.w * std::clamp(normal_quantile(a.tail + u * (1.0 - 2.0 * a.tail)), -a.t, a.t);
}

// Ancestors by systematic resampling of n weighted draws (nz weights w
// each, one per z sample), and kernel widths from their spread.
Proposal proposal_from(const Draw* src, const double* w, std::size_t n, int nz, const Distribution& ecc,
                       bool omega_from_table) {
  std::vector<double> cw(n);
  double acc = 0;
  for (std::size_t k = 0; k < n; ++k) {
    for (int s = 0; s < nz; ++s) acc += w[k * nz + s];
    cw[k] = acc;
  }
  constexpr int n_anc = 64;
  Proposal p;
  for (int j = 0; j < n_anc; ++j) {
    const double u = (j + 0.5) / n_anc * acc;
    const std::size_t k = std::lower_bound(cw.begin(), cw.end(), u) - cw.begin();
    const Draw& ancestor = src[std::min(k, n - 1)];
    p.anc.push_back(coords_of(ancestor));
    p.anc_warm.push_back(ancestor.warm);
  }
  Coords mean = Coords::Zero(), var = Coords::Zero();
  for (const auto& c : p.anc) mean += c;
  mean /= n_anc;
  for (const auto& c : p.anc) {
    Coords dc = c - mean;
    dc(1) = wrap_pi(c(1) - p.anc[0](1));  // spread of angles about one ancestor
    dc(2) = wrap_pi(c(2) - p.anc[0](2));
    var += dc.cwiseProduct(dc);
  }
  p.width = (var / n_anc).cwiseSqrt() * 0.7;
  const Coords floor_w(0.01, 0.02, 0.02, 0.005), cap_w(1.0, 2.0, 2.0, 0.5);
  p.width = p.width.cwiseMax(floor_w).cwiseMin(cap_w);
  if (ecc.kind == Distribution::Kind::kFixed) p.width(3) = 0.0;
  if (omega_from_table) p.width(1) = 0.0;  // omega is drawn when weighed (choose_omega)
  return p;
}

// Every draw weighed at one separation, round after round, pooled: each
// keeps its weight against its own round's proposal. Each round's weighted
// draws estimate the posterior and the evidence without bias on their own
// and the rounds' random numbers are independent, so the pooled sum does
// too; since every proposal is at least half the prior, no weight exceeds
// twice the likelihood (the defensive mixture's bound; Hesterberg 1995,
// Technometrics 37, 185; ten times where omega's proposal is a table, at
// least a fifth of its prior: choose_omega). No round is dropped: a round
// that found a narrow mode keeps it (docs/method.md, "Rounds pooled"). The
// buffers are reused by the next separation (no page faults per point).
struct Pool {
  LargeVector<Draw> draws;
  /// z samples, nz per draw, weighed against the proposal of the draw's own round.
  LargeVector<Sample> samples;
  /// Per sample exp(log_w - max_log_w), max_log_w the largest log weight so
  /// far, with their sums over all rounds and over the latest round.
  LargeVector<double> w;
  /// Scratch for the quantiles (mass_samples).
  LargeVector<std::pair<double, double>> mass_pairs;
  double max_log_w = -std::numeric_limits<double>::infinity();
  double sum = 0.0, sum2 = 0.0, round_sum = 0.0, round_sum2 = 0.0;
  std::size_t size = 0;
  // Address space for a separation's every round (16,384 draws x 8
  // samples at the defaults), so that growing never copies; the pages are
  // touched only as draws use them.
  void reserve(std::size_t n, int nz) {
    draws.reserve(n);
    samples.reserve(n * nz);
    w.reserve(n * nz);
    mass_pairs.reserve(n * nz);
  }
  // Room for n draws, within the reserve. Grown as blocks need it, so
  // that a curve touches only the memory its draws use: resized for every
  // round at once, a single-separation upper limit wrote 10 MB for the 512
  // draws it needed.
  void grow(std::size_t n, int nz) {
    if (draws.size() >= n) return;
    draws.resize(n);
    samples.resize(n * nz);
    w.resize(n * nz);
  }
  void clear() {
    size = 0;
    max_log_w = -std::numeric_limits<double>::infinity();
    sum = sum2 = round_sum = round_sum2 = 0.0;
  }
  void start_round() { round_sum = round_sum2 = 0.0; }
  // Weighs the samples of draws [begin, end), the latest round's newest:
  // the earlier weights are rescaled when these raise the maximum.
  void add_weights(std::size_t begin, std::size_t end, int nz) {
    double block_max = -std::numeric_limits<double>::infinity();
    for (std::size_t i = begin * nz; i < end * nz; ++i) block_max = std::max(block_max, samples[i].log_w);
    if (block_max > max_log_w) {
      const double f = exp_or_zero(max_log_w - block_max);  // 0 on the first finite block
      for (std::size_t i = 0; i < begin * nz; ++i) w[i] *= f;
      sum *= f;
      sum2 *= f * f;
      round_sum *= f;
      round_sum2 *= f * f;
      max_log_w = block_max;
    }
    for (std::size_t i = begin * nz; i < end * nz; ++i) {
      const double wi = std::isfinite(max_log_w) ? exp_or_zero(samples[i].log_w - max_log_w) : 0.0;
      w[i] = wi;
      sum += wi;
      sum2 += wi * wi;
      round_sum += wi;
      round_sum2 += wi * wi;
    }
  }
  double ess() const { return effective_sample_size(sum, sum2); }
  double round_ess() const { return effective_sample_size(round_sum, round_sum2); }
};

// Draws j in [begin, end) of a round from the proposal (prior draws of `pd`
// moved onto the kernels by its deviates) into the pool after its first
// `offset` draws, weighed against the proposal. Returns the number of
// window-model evaluations.
long weigh_proposal(const Problem& pb, const ProposalDeviates& pd, const Proposal& prop,
                    const KernelMixture& mixture, Pool& pool, std::size_t offset, std::size_t begin,
                    std::size_t end) {
  const CurveOptions& opt = pb.opt;
  const int nz = opt.z_samples;
  const std::size_t n = pd.prior.size(), n_anc = prop.anc.size();
  const bool table = omega_from_table(pb);
  const std::array<AngleWidth, 2> angle = {angle_width(prop.width(1)), angle_width(prop.width(2))};
  long evaluations = 0;
#pragma omp parallel
  {
    std::vector<double> scratch;
#pragma omp for schedule(static) reduction(+ : evaluations)
    for (std::size_t c = begin; c < end; c += kDrawBatch) {
      // A chunk of draws: those with total mass fixed are weighed together.
      const std::size_t c_end = std::min(end, c + kDrawBatch);
      DrawWeigher weigher(pb);
      for (std::size_t j = c; j < c_end; ++j) {
        const std::size_t i = offset + j;
        Draw& dr = pool.draws[i];
        dr = pd.prior[j];
        bool inside = true;  // the kernels' tails beyond |cos i| = 1 have no weight
        if (pd.pick[j] >= 0.5) {  // from a kernel, else from the prior component
          const std::size_t m = static_cast<std::size_t>(pd.pick[j + n] * n_anc) % n_anc;
          const Coords& a = prop.anc[m];
          dr.warm = prop.anc_warm[m];
          if (table) dr.u_omega = pd.angle_cdf[j](0);  // uniform
          Coords cc = a + prop.width.cwiseProduct(pd.kernel[j]);
          for (int k = 1; k <= 2; ++k)
            cc(k) = wrap_2pi(a(k) + kernel_offset(angle[k - 1], pd.kernel[j](k), pd.angle_cdf[j](k - 1)));
          if (opt.prior.ecc.kind == Distribution::Kind::kFixed) cc(3) = dr.ecc;
          inside = std::abs(cc(0)) <= 1.0;
          dr.inc = std::acos(std::clamp(cc(0), -1.0, 1.0));
          dr.omega = cc(1);
          dr.m0 = cc(2);
          dr.ecc = cc(3);
          prepare_angles(dr);  // the host mass and its prior are the prior draw's
        }
        const Coords cd = coords_of(dr);
        const double lp = inside ? log_prior_coords(cd, opt.prior.ecc) : -std::numeric_limits<double>::infinity();
        // Mixture density 0.5 prior + 0.5 kernels; where omega is drawn
        // when weighed, with its own ratio (choose_omega), both are over
        // (cos i, M0, e), the prior's share without omega's 1 / (2 pi).
        // Outside the prior's support no weight.
        const double lp_rest = table ? lp + std::log(units::kTwoPi) : lp;
        const double log_extra =
            std::isfinite(lp) ? lp_rest - (log_add_exp(lp_rest, mixture.log_density(cd, scratch)) - std::log(2.0))
                              : lp;
        weigher.add(dr, log_extra, &pool.samples[i * nz]);
      }
      weigher.flush();
      // A prior draw keeps its own warm start.
      for (std::size_t j = c; j < c_end; ++j)
        if (pd.pick[j] < 0.5) pd.prior[j].warm = pool.draws[offset + j].warm;
      evaluations += weigher.evaluations();
    }
  }
  return evaluations;
}

// From this S/N on, a first round of prior draws that cannot meet the
// target still runs in full, since its draws seed the adaptive proposal:
// stopped where the target was out of reach (like the rounds from a
// proposal), the 95 % bands of 1,000 systems at S/N >= 200 held the truth
// in 92.1 % instead of 93.4 %. Below it, the round stops there: 4 % fewer
// draws on 40 stars at S/N 3-30 and >= 30, the same posterior weight at
// separations below kLowEss, the calibration unchanged (docs/performance.md,
// "Stop 47").
constexpr double kFullPriorRoundSnr = 200.0;

// Effective sample size of z samples a separation aims for: from S/N ~ 10
// about 125 independent orbits, the median to ~5 % of the 68 % band
// (docs/method.md, "Draws in blocks").
constexpr double kTargetEss = 1000.0;
// A round weighs its draws in blocks and stops as soon as the pooled draws
// of all rounds meet the target, or at a block's end where the pool's
// size before the round plus the round's own projected to every block (it
// grows about in proportion to the draws) falls short of the round's
// threshold. Rounds from a proposal take four blocks; rounds of prior
// draws eight, since at low S/N 512 prior draws often meet the target
// (measured: 5 % fewer draws and 8 % less CPU over 20 stars at S/N >= 3,
// -21 % on the bench's sigma = 3 star, the same low-ESS separations, and
// coverage unchanged). Eight blocks for the proposal rounds too stopped
// them on noisier projections: 3x the posterior weight below kLowEss at
// S/N >= 30.
constexpr int kProposalBlocks = 4, kPriorBlocks = 8;
// After a round's first block the target alone is checked every
// kTargetStep draws; the projection is judged at the blocks' ends only,
// where it is less noisy. Measured against checks at the blocks' ends:
// 13, 16, 9 and 2 % fewer draws at sigma = 3, 10, 50 and 270
// (bench/curve_bench); steps of 32 or 128 gave the same. The first block
// stays whole: checked from the first draws on, a detection at S/N 26
// stopped after 256 prior draws in every seed, its 97.5 % quantile resting
// on a few orbits. A precision target (quantile_tolerance) is checked at
// the blocks' ends, since its quantiles cost a pass over the pool.
constexpr std::size_t kTargetStep = 64;

// Monte Carlo standard errors of weighted quantiles x of the samples'
// masses at probabilities ps (Woodruff 1952, J. Am. Stat. Assoc. 47, 635):
// the standard error of the weighted distribution function at each x,
// with the z samples of a draw summed since they share its orbit angles,
// mapped to mass through the quantiles at p -+ that error, half their
// distance (absent where that is zero). `pairs` (the samples' masses and
// weights, `kept` their total weight) is reordered.
std::vector<double> quantile_errors(const Pool& pool, int nz, const std::vector<double>& ps,
                                    const std::vector<double>& x, std::span<std::pair<double, double>> pairs,
                                    double kept) {
  const std::size_t nq = ps.size();
  std::vector<double> var(nq, 0.0), dev(nq);
  for (std::size_t j = 0; j < pool.size; ++j) {
    std::fill(dev.begin(), dev.end(), 0.0);
    for (int s = 0; s < nz; ++s) {
      const double w = pool.w[j * nz + s], m = pool.samples[j * nz + s].m2_mjup;
      for (std::size_t k = 0; k < nq; ++k) dev[k] += w * ((m <= x[k] ? 1.0 : 0.0) - ps[k]);
    }
    for (std::size_t k = 0; k < nq; ++k) var[k] += dev[k] * dev[k];
  }
  std::vector<double> band;
  for (std::size_t k = 0; k < nq; ++k) {
    const double se_f = std::sqrt(var[k]) / pool.sum;
    band.push_back(std::max(ps[k] - se_f, 0.0));
    band.push_back(std::min(ps[k] + se_f, 1.0));
  }
  std::vector<std::size_t> order(band.size());
  std::iota(order.begin(), order.end(), 0);
  std::sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return band[a] < band[b]; });
  std::vector<double> sorted_p(band.size());
  for (std::size_t i = 0; i < order.size(); ++i) sorted_p[i] = band[order[i]];
  const std::vector<double> sorted_x = weighted_quantiles(pairs, kept, sorted_p);
  std::vector<double> at(band.size());
  for (std::size_t i = 0; i < order.size(); ++i) at[order[i]] = sorted_x[i];
  // Where one sample holds more weight than that error the two quantiles
  // are the same sample, and the samples cannot tell the error: absent.
  std::vector<double> err(nq);
  for (std::size_t k = 0; k < nq; ++k) err[k] = at[2 * k + 1] > at[2 * k] ? 0.5 * (at[2 * k + 1] - at[2 * k]) : kAbsent;
  return err;
}

// The samples' masses and weights for the quantiles, in the pool's
// buffer: those below 1e-12 of the largest weight hold at most 1.3e-7 of
// the total together (131,072 samples at most) and are left out.
struct MassSamples {
  std::span<std::pair<double, double>> pairs;
  double kept = 0.0;  ///< their total weight
};
MassSamples mass_samples(Pool& pool, int nz) {
  constexpr double kNegligibleWeight = 1e-12;
  MassSamples m;
  const std::size_t n = pool.size * nz;
  pool.mass_pairs.clear();
  pool.mass_pairs.reserve(n);
  for (std::size_t i = 0; i < n; ++i)
    if (pool.w[i] > kNegligibleWeight) {
      pool.mass_pairs.emplace_back(pool.samples[i].m2_mjup, pool.w[i]);
      m.kept += pool.w[i];
    }
  m.pairs = pool.mass_pairs;
  return m;
}

// Whether the outermost quantiles of a point (an upper limit's 95 %, a
// detection's 2.5 and 97.5 %) have Monte Carlo errors of at most `tol` of
// their values (CurveOptions::quantile_tolerance).
bool quantiles_precise(Pool& pool, int nz, bool upper, double tol) {
  if (!(pool.sum > 0)) return false;
  MassSamples m = mass_samples(pool, nz);
  const std::vector<double> ps = upper ? std::vector<double>{0.95} : std::vector<double>{0.025, 0.975};
  const std::vector<double> q = weighted_quantiles(m.pairs, m.kept, ps);
  const std::vector<double> e = quantile_errors(pool, nz, ps, q, m.pairs, m.kept);
  for (std::size_t k = 0; k < ps.size(); ++k)
    if (!(e[k] <= tol * q[k])) return false;
  return true;
}

// Whether a point has what it needs: the target effective sample size and,
// where asked for, precise outermost quantiles.
bool point_done(Pool& pool, const Problem& pb) {
  if (pool.ess() < kTargetEss) return false;
  return pb.opt.quantile_tolerance <= 0.0 || quantiles_precise(pool, pb.opt.z_samples, !pb.prior.log_uniform,
                                                               pb.opt.quantile_tolerance);
}

struct RoundResult {
  std::size_t used = 0;  ///< draws weighed (a prefix of the round's draws)
  long evaluations = 0;
};

// One round of importance sampling into the pool: the prior draws (`prop`
// null) or draws from `prop` with the deviates `pd`, in blocks, stopping
// short where the pool's size before this round plus the round's own
// projected size falls below `min_projected_ess`.
RoundResult run_round(const Problem& pb, const Proposal* prop, const ProposalDeviates* pd, Pool& pool,
                      double min_projected_ess) {
  const int nz = pb.opt.z_samples;
  const LargeVector<Draw>& first = pb.ds.first;
  const std::size_t blocks = prop ? kProposalBlocks : kPriorBlocks;
  const std::size_t n = first.size(), block = (n + blocks - 1) / blocks, offset = pool.size;
  std::optional<KernelMixture> mixture;
  if (prop) mixture.emplace(prop->anc, prop->width);
  RoundResult r;
  const double ess_before = pool.ess();
  pool.start_round();
  const std::size_t fine = pb.opt.quantile_tolerance > 0.0 ? block : std::min<std::size_t>(block, kTargetStep);
  for (std::size_t begin = 0; begin < n; begin = r.used) {
    const std::size_t end = std::min({n, begin + (begin == 0 ? block : fine), (begin / block + 1) * block});
    pool.grow(offset + end, nz);
    if (prop) {
      r.evaluations += weigh_proposal(pb, *pd, *prop, *mixture, pool, offset, begin, end);
    } else {
      long evaluations = 0;
#pragma omp parallel for schedule(static) reduction(+ : evaluations)
      for (std::size_t c = begin; c < end; c += kDrawBatch) {
        const std::size_t c_end = std::min(end, c + kDrawBatch);
        DrawWeigher weigher(pb);
        for (std::size_t k = c; k < c_end; ++k)
          weigher.add(first[k], first[k].ecc <= kCurveMaxEcc ? 0.0 : -std::numeric_limits<double>::infinity(),
                      &pool.samples[(offset + k) * nz]);
        weigher.flush();
        for (std::size_t k = c; k < c_end; ++k) pool.draws[offset + k] = first[k];  // with their warm starts
        evaluations += weigher.evaluations();
      }
      r.evaluations += evaluations;
    }
    pool.add_weights(offset + begin, offset + end, nz);
    r.used = end;
    pool.size = offset + end;
    if (!pb.opt.plain_sampler && point_done(pool, pb)) break;
    if ((end % block == 0 || end == n) &&
        ess_before + pool.round_ess() * static_cast<double>(n) / static_cast<double>(end) < min_projected_ess)
      break;
  }
  return r;
}

struct PointResult {
  CurvePoint point;
  double log_evidence;
  std::vector<OrbitDraw> draws;
  /// For the Monte Carlo error of the evidence (set_bayes_factor): each
  /// draw's share of the separation's summed weight, in pool order, and per
  /// round the key of its first draw and its number of draws (the j-th draw
  /// of a round has key first + j).
  std::vector<float> share;
  std::vector<std::pair<std::uint32_t, std::uint32_t>> rounds;
  long window_evaluations = 0;
  Proposal proposal;  ///< the last proposal used (empty without the adaptive stage)
};

// One separation. `seed`: the final proposal of a neighbouring separation
// that needed the adaptive stage (the posterior of the orbit angles changes
// slowly with a), or null to start from the prior.
PointResult evaluate_a(const AnomalyData& d, const CurveOptions& opt, DrawSet& ds,
                       const ZPlanePrior& prior, bool upper, double a_au, const Proposal* seed, Pool& pool) {
  Eigen::LLT<Eigen::Matrix4d> cllt(d.cov);
  const double chi2_data = d.dpm.dot(cllt.solve(d.dpm));
  const double q_hi_nominal = prior.m_hi_msun / (d.host_mass_msun + prior.m_hi_msun);
  const Problem pb{d,
                   opt,
                   prior,
                   ds,
                   cllt.solve(Eigen::Matrix4d::Identity()),
                   chi2_data,
                   a_au,
                   d.late.ref_epoch_yr - d.early.ref_epoch_yr,
                   std::sqrt(chi2_data),
                   std::pow(384.0 * kDriftTolerance / std::max(std::sqrt(chi2_data), 1e-3), 0.25),
                   period_from_a(a_au, d.host_mass_msun),
                   q_hi_nominal,
                   x_of(std::log1p(-q_hi_nominal))};
  const int nz = opt.z_samples;
  pool.clear();
  PointResult r;
  if (seed) r.proposal = *seed;
  // Up to three adaptive rounds when the draws degenerate (high S/N), each
  // proposing around the weighted draws of all rounds so far, with the same
  // deviates for every a. From S/N kFullPriorRoundSnr on, a first round of
  // prior draws runs in full unless it meets the target (its draws seed the
  // proposal); below, it stops short as the rounds after it do. A round that
  // draws from a proposal (a neighbour's, or an adaptive one) stops short when
  // the target is out of reach and another round can follow (measured: more
  // rounds for the same draws give fewer separations below kLowEss, and a
  // neighbour's proposal run in full cost 11-27 % more draws at S/N >= 10
  // and left no less posterior weight below kLowEss), the last one when
  // even kLowEss is (the band is flagged either way). All rounds are pooled.
  int proposal_rounds = 0;  // rounds so far that drew from a proposal
  long evaluations = 0;
  auto run = [&](const Proposal* prop, double min_projected_ess) {
    // Keys: j for the first round's prior draws, (k + 1) n + j for the k-th
    // round from a proposal.
    const auto key_base = static_cast<std::uint32_t>((prop ? proposal_rounds + 1 : 0) * ds.first.size());
    const ProposalDeviates* pd = prop ? &proposal_deviates(ds, proposal_rounds++, d, opt, prior) : nullptr;
    const RoundResult round = run_round(pb, prop, pd, pool, min_projected_ess);
    r.rounds.emplace_back(key_base, static_cast<std::uint32_t>(round.used));
    evaluations += round.evaluations;
    r.point.draws += static_cast<long>(round.used);
  };
  run(seed, seed || pb.snr < kFullPriorRoundSnr ? kTargetEss : 0.0);
  // Where one sample still holds nearly all the weight after an adaptive
  // round, the kernels around it found nothing better, and the later
  // rounds did not either (40 stars at S/N >= 3 and >= 30: the same
  // separations ended below kLowEss with the same posterior weight, and
  // 4-6 % fewer draws were weighed): the rounds end there.
  constexpr double kDegenerateEss = 1.5;
  int rounds = 0;
  while (!opt.plain_sampler && rounds < kMaxAdaptiveRounds && !point_done(pool, pb) &&
         !(rounds >= 1 && pool.ess() < kDegenerateEss)) {
    r.proposal = proposal_from(pool.draws.data(), pool.w.data(), pool.size, nz, opt.prior.ecc, omega_from_table(pb));
    run(&r.proposal, ++rounds < kMaxAdaptiveRounds ? kTargetEss : kLowEss);
  }
  const std::size_t n_samples = pool.size * nz;
  // A neighbour's proposal is passed on only while the posterior stays
  // where its kernels are: when the kernels' draws hold less than half the
  // weight here, the posterior is broad again, and the next separation
  // starts from the prior draws.
  if (seed && rounds == 0 && pool.sum > 0) {
    double kernel_w = 0.0;
    for (std::size_t j = 0; j < pool.size; ++j)
      if (ds.proposal[0].pick[j] >= 0.5)
        for (int s = 0; s < nz; ++s) kernel_w += pool.w[j * nz + s];
    if (kernel_w < 0.5 * pool.sum) r.proposal = Proposal{};
  }
  r.window_evaluations = evaluations;

  // Reduce in a fixed order: results do not depend on the thread count.
  const double sw = pool.sum;
  CurvePoint& p = r.point;
  p.a_au = a_au;
  p.sep_mas = a_au * d.parallax_mas;
  p.period_yr = period_from_a(a_au, d.host_mass_msun);
  p.ess = pool.ess();
  p.rounds = static_cast<int>(r.rounds.size());
  // The mean weight estimates the marginal likelihood. The z samples of a
  // draw share its orbit angles, so its error is taken over draws, and so
  // is the effective number of orbits.
  if (sw > 0) {
    r.share.resize(pool.size);
    double sum_draw_w2 = 0.0;
    for (std::size_t j = 0; j < pool.size; ++j) {
      double wj = 0.0;
      for (int s = 0; s < nz; ++s) wj += pool.w[j * nz + s];
      r.share[j] = static_cast<float>(wj / sw);
      sum_draw_w2 += wj * wj;
    }
    p.ess_orbits = effective_sample_size(sw, sum_draw_w2);
  }
  r.log_evidence = std::isfinite(pool.max_log_w) && sw > 0
                       ? pool.max_log_w + std::log(sw) - std::log(static_cast<double>(n_samples))
                       : -std::numeric_limits<double>::infinity();
  p.mass_lo95 = p.mass_lo68 = p.mass_med = p.mass_hi68 = p.mass_hi95 = kAbsent;
  if (sw > 0) {
    MassSamples m = mass_samples(pool, nz);
    const std::vector<double> ps = upper ? std::vector<double>{0.68, 0.95}
                                         : std::vector<double>{0.025, 0.16, 0.5, 0.84, 0.975};
    const std::vector<double> q = weighted_quantiles(m.pairs, m.kept, ps);
    const std::size_t first = upper ? 3 : 0;  // upper limits fill hi68 and hi95
    double* column[5] = {&p.mass_lo95, &p.mass_lo68, &p.mass_med, &p.mass_hi68, &p.mass_hi95};
    for (std::size_t k = 0; k < ps.size(); ++k) *column[first + k] = q[k];
    if (opt.quantile_errors && p.ess >= kLowEss) {  // below it the band itself is noise
      const std::vector<double> e = quantile_errors(pool, nz, ps, q, m.pairs, m.kept);
      std::copy(e.begin(), e.end(), p.mass_error.begin() + first);
    }
  }
  if (opt.keep_draws && sw > 0) {
    // Systematic resampling to at most 256 equal-weight draws per separation.
    const std::size_t keep = 256;
    double acc = 0, next = 0.5 * sw / keep;
    for (std::size_t i = 0; i < n_samples && r.draws.size() < keep; ++i) {
      acc += pool.w[i];
      while (acc >= next && r.draws.size() < keep) {
        const Draw& dr = pool.draws[i / nz];
        const Sample& s = pool.samples[i];
        const double m2_msun = s.m2_mjup / units::kMjupPerMsun;
        r.draws.push_back({a_au, s.m2_mjup, dr.ecc, units::rad_to_deg(dr.inc),
                           units::rad_to_deg(s.omega),
                           units::rad_to_deg(wrap_2pi(std::atan2(s.z2, s.z1))),
                           units::rad_to_deg(dr.m0), d.late.ref_epoch_yr,
                           period_from_a(a_au, s.m1_msun + m2_msun), dr.plx, s.m1_msun, 1.0});
        next += sw / keep;
      }
    }
  }
  return r;
}

// Whether two neighbouring 68 % bands do not overlap; a band from fewer than
// kLowEss effective samples is noise, and its mismatch is no feature to
// resolve.
bool bands_disjoint(const CurvePoint& a, const CurvePoint& b) {
  if (!present(a.mass_lo68) || !present(b.mass_lo68)) return false;
  if (a.ess < kLowEss || b.ess < kLowEss) return false;
  return a.mass_hi68 < b.mass_lo68 || b.mass_hi68 < a.mass_lo68;
}

// The separations' evidences weighted by the prior on a: each point owns
// the bin in ln a between the geometric midpoints to its neighbours (a
// log-uniform prior over the grid). term[k] = exp(log_evidence_k - max_le)
// times its bin width; all zero when no evidence is finite.
struct EvidenceTerms {
  double max_le = -std::numeric_limits<double>::infinity(), total_width = 0.0;
  std::vector<double> term;
};

EvidenceTerms evidence_terms(const std::vector<PointResult>& pts) {
  const std::size_t n = pts.size();
  EvidenceTerms e;
  e.term.assign(n, 0.0);
  for (const auto& p : pts) e.max_le = std::max(e.max_le, p.log_evidence);
  for (std::size_t k = 0; k < n; ++k) {
    double width = 1.0;
    if (n > 1) {
      const double la = std::log(pts[k].point.a_au);
      const double lo = k > 0 ? 0.5 * (la + std::log(pts[k - 1].point.a_au)) : la;
      const double hi = k + 1 < n ? 0.5 * (la + std::log(pts[k + 1].point.a_au)) : la;
      width = hi - lo;
    }
    e.total_width += width;
    if (std::isfinite(e.max_le)) e.term[k] = std::exp(pts[k].log_evidence - e.max_le) * width;
  }
  return e;
}

// Turns log evidences into bin weights under a log-uniform prior on a.
void set_weights(std::vector<PointResult>& pts) {
  const EvidenceTerms e = evidence_terms(pts);
  double total = 0;
  for (double t : e.term) total += t;
  for (std::size_t k = 0; k < pts.size(); ++k) pts[k].point.weight = total > 0 ? e.term[k] / total : 0.0;
}

// log10 of the Bayes factor companion / no companion and its Monte Carlo
// error: the evidence is the prior-weighted mean of the separations'
// marginal likelihoods, the no-companion likelihood exp(-chi2_data / 2)
// (the Gaussian normalisation is common to both).
//
// The separations share their random numbers (the same prior draws and
// deviates at every a), so their errors are correlated: the draws' errors
// summed in quadrature gave 1.1-2.5x less than the scatter between seeds,
// summed linearly 2-4x more. The estimate sum_k term_k is a
// sum over keys i of T_i = sum_k term_k share_ki, independent between
// keys; its variance is estimated as sum_i (T_i - E T_i)^2 with
// E share_ki = 1 / N_k (N_k the draws at separation k). For one
// separation this is the usual sum W^2 / (sum W)^2 - 1 / N over draws.
void set_bayes_factor(const std::vector<PointResult>& pts, double chi2_data, Curve& c) {
  const EvidenceTerms e = evidence_terms(pts);
  if (!std::isfinite(e.max_le)) return;
  double z = 0.0;
  std::vector<double> dev;  // T_i - E T_i by key
  for (std::size_t k = 0; k < pts.size(); ++k) {
    z += e.term[k];
    const std::vector<float>& share = pts[k].share;
    if (share.empty() || e.term[k] == 0.0) continue;
    const double mean = 1.0 / static_cast<double>(share.size());
    std::size_t j = 0;
    for (const auto& [first, count] : pts[k].rounds) {
      if (first + count > dev.size()) dev.resize(first + count, 0.0);
      for (std::uint32_t i = 0; i < count; ++i, ++j) dev[first + i] += e.term[k] * (share[j] - mean);
    }
  }
  double var = 0.0;
  for (const double t : dev) var += t * t;
  c.log10_bayes = (e.max_le + std::log(z / e.total_width) + 0.5 * chi2_data) / std::log(10.0);
  c.log10_bayes_error = std::sqrt(var) / z / std::log(10.0);
}

}  // namespace

namespace {
Projection projection_of(const Orbit<double>& o) {
  return projection_at(std::cos(o.inc_rad), std::cos(o.arg_peri_rad), std::sin(o.arg_peri_rad));
}
Eigen::Vector2d z_of(const Orbit<double>& o, double q) {
  return {q * std::cos(o.node_rad), q * std::sin(o.node_rad)};
}
}  // namespace

Eigen::Vector4d model_anomaly(const Orbit<double>& o, double a_au, double q, double parallax_mas,
                              const Window& early, const Window& late) {
  return a_au * parallax_mas * design(unit_anomalies(projection_of(o), o, early, late)) * z_of(o, q);
}

Eigen::Vector4d model_anomaly_dlnp(const Orbit<double>& o, double a_au, double q, double parallax_mas,
                                   const Window& early, const Window& late) {
  Mat42 k, dk;
  design_and_derivative(projection_of(o), o, early, late, k, dk);
  return a_au * parallax_mas * dk * z_of(o, q);
}

Curve montecarlo_curve(const AnomalyData& d, const CurveOptions& opt, const std::string& rng_id) {
  Curve c;
  c.upper_limit = opt.prior.upper_limit(d.sig_joint);
  const ZPlanePrior prior(opt.prior.mass_prior(c.upper_limit));
  DrawSet draws = make_draws(d, opt, prior, rng_id);
  Pool pool;
  pool.reserve(static_cast<std::size_t>(kMaxRounds) * opt.draws, opt.z_samples);
  std::vector<PointResult> pts;
  // Each separation starts from its left neighbour's proposal when that one
  // needed the adaptive stage (in grid order, so results do not depend on
  // threads).
  auto seed_of = [](const PointResult& p) { return p.proposal.anc.empty() ? nullptr : &p.proposal; };
  for (double a : opt.a_au)
    pts.push_back(evaluate_a(d, opt, draws, prior, c.upper_limit, a, pts.empty() ? nullptr : seed_of(pts.back()),
                             pool));
  // Adaptive refinement where neighbouring bands do not overlap or the
  // posterior weight jumps by more than a factor 3.
  for (int round = 0; round < opt.refine_rounds; ++round) {
    set_weights(pts);
    std::vector<PointResult> refined;
    bool changed = false;
    for (std::size_t k = 0; k < pts.size(); ++k) {
      std::optional<PointResult> mid;
      if (k + 1 < pts.size()) {
        const CurvePoint &p = pts[k].point, &q = pts[k + 1].point;
        const double wmax = std::max(p.weight, q.weight), wmin = std::min(p.weight, q.weight);
        const bool jump = wmax > 1e-3 && wmin < wmax / 3.0;
        if (bands_disjoint(p, q) || jump) {
          const Proposal* seed = seed_of(pts[k]) ? seed_of(pts[k]) : seed_of(pts[k + 1]);
          mid = evaluate_a(d, opt, draws, prior, c.upper_limit, std::sqrt(p.a_au * q.a_au), seed, pool);
        }
      }
      refined.push_back(std::move(pts[k]));
      if (mid) {
        refined.push_back(std::move(*mid));
        changed = true;
      }
    }
    pts.swap(refined);
    if (!changed) break;
  }
  set_weights(pts);
  set_bayes_factor(pts, d.dpm.dot(d.cov.llt().solve(d.dpm)), c);
  c.min_ess = std::numeric_limits<double>::infinity();
  std::size_t n_draws = 0;
  for (const auto& p : pts) n_draws += p.draws.size();
  c.draws.reserve(n_draws);
  c.points.reserve(pts.size());
  for (auto& p : pts) {
    c.points.push_back(p.point);
    c.min_ess = std::min(c.min_ess, p.point.ess);
    c.draws_weighed += p.point.draws;
    c.window_evaluations += p.window_evaluations;
    const double per = p.draws.empty() ? 0.0 : p.point.weight / p.draws.size();
    for (auto& dr : p.draws) {
      dr.weight = per;
      c.draws.push_back(dr);
    }
  }
  return c;
}

double projection_factor_quantile(double p) {
  static const std::vector<double> sorted = [] {
    Rng rng(0x5eed);
    std::vector<double> f(1 << 18);
    for (auto& v : f) {
      const double ci = rng.uniform(-1.0, 1.0), u = units::kTwoPi * rng.uniform();
      const double s = std::sin(u), c = std::cos(u);
      v = std::sqrt(s * s + c * c * ci * ci);
    }
    std::sort(f.begin(), f.end());
    return f;
  }();
  const std::size_t i = std::min(sorted.size() - 1, static_cast<std::size_t>(p * sorted.size()));
  return sorted[i];
}

double analytic_anomaly_mas_yr(const AnomalyData& d, double a_au, double q, double f) {
  const double w_late = d.late.end_yr - d.late.start_yr;
  const double baseline = d.late.ref_epoch_yr - d.early.ref_epoch_yr;
  const double period = period_from_a(a_au, d.host_mass_msun / (1.0 - q));
  const double g = circular_window_efficiency(w_late / period);
  const double xb = units::kPi * baseline / period;
  const double s = std::sin(xb) / xb;
  // Late-epoch anomaly of a circular face-on orbit: window-smeared velocity
  // minus the mean velocity over the baseline (lagging by xb).
  const double eta = std::sqrt(std::max(g * g + s * s - 2.0 * g * s * std::cos(xb), 0.0));
  return f * eta * units::kTwoPi * a_au * d.parallax_mas * q / period;
}

Curve analytic_curve(const AnomalyData& d, const CurveOptions& opt) {
  Curve c;
  c.upper_limit = opt.prior.upper_limit(d.sig_joint);
  const Eigen::Vector2d dl = d.dpm.head<2>();
  const double amp = dl.norm();
  const Eigen::Vector2d u = amp > 0 ? Eigen::Vector2d(dl / amp) : Eigen::Vector2d(1.0, 0.0);
  const double sigma = std::sqrt(u.dot(d.cov.block<2, 2>(0, 0) * u));
  // The host is the heavier body (q <= 1/2): beyond, the dark-companion
  // model (photocentre = host) does not apply.
  const double q_lo = 1e-12, q_hi = 0.5;
  std::vector<double> qs(kAnalyticGridPoints), base(kAnalyticGridPoints);
  for (int k = 0; k < kAnalyticGridPoints; ++k)
    qs[k] = q_lo * std::pow(q_hi / q_lo, static_cast<double>(k) / (kAnalyticGridPoints - 1));
  auto to_mjup = [&](double q) { return d.host_mass_msun * q / (1.0 - q) * units::kMjupPerMsun; };
  for (double a : opt.a_au) {
    // No posterior over a: the analytic curve has no weight.
    CurvePoint p{a, a * d.parallax_mas, period_from_a(a, d.host_mass_msun), kAbsent,
                 kAbsent, kAbsent, kAbsent, kAbsent, kAbsent, kAbsent, {}, {}};
    // The relation is linear in f: bracket f = 1 once per separation.
    for (int k = 0; k < kAnalyticGridPoints; ++k) base[k] = analytic_anomaly_mas_yr(d, a, qs[k], 1.0);
    // Every q in (q_lo, q_hi) with f base(q) = speed, ascending.
    auto roots = [&](double speed, double f) {
      std::vector<double> out;
      for (int k = 0; k + 1 < kAnalyticGridPoints; ++k) {
        const double r0 = f * base[k] - speed, r1 = f * base[k + 1] - speed;
        if (r0 == 0.0) out.push_back(qs[k]);
        if (!(r0 < 0.0 && r1 > 0.0) && !(r0 > 0.0 && r1 < 0.0)) continue;
        double lo = qs[k], hi = qs[k + 1];
        for (int it = 0; it < 200 && hi - lo > 1e-15 * hi; ++it) {
          const double mid = 0.5 * (lo + hi);
          ((analytic_anomaly_mas_yr(d, a, mid, f) - speed > 0.0) == (r0 > 0.0) ? lo : hi) = mid;
        }
        out.push_back(0.5 * (lo + hi));
      }
      return out;
    };
    double* cols[5] = {&p.mass_lo95, &p.mass_lo68, &p.mass_med, &p.mass_hi68, &p.mass_hi95};
    // Per column: the speed to match and the projection factor. Detections
    // spread over orientation only (a small projection factor means a large
    // mass); upper limits at the median projection.
    std::array<std::pair<double, double>, 5> targets;
    bool used[5] = {true, true, true, true, true};
    if (c.upper_limit) {
      used[0] = used[1] = used[2] = false;
      targets[3] = {amp + sigma, projection_factor_quantile(0.5)};
      targets[4] = {amp + 2.0 * sigma, projection_factor_quantile(0.5)};
    } else {
      const double fq[5] = {0.975, 0.84, 0.5, 0.16, 0.025};
      for (int k = 0; k < 5; ++k) targets[k] = {amp, projection_factor_quantile(fq[k])};
    }
    bool multiple = false, none = false;
    for (int k = 0; k < 5; ++k) {
      if (!used[k]) continue;
      for (double q : roots(targets[k].first, targets[k].second)) p.roots_mjup[k].push_back(to_mjup(q));
      if (p.roots_mjup[k].empty()) none = true;
      else *cols[k] = p.roots_mjup[k].front();
      multiple = multiple || p.roots_mjup[k].size() > 1;
    }
    if (multiple) p.notes.push_back("multiple_solutions");
    if (none) p.notes.push_back("not_converged");
    // The relation ignores the mass prior: say where it goes beyond it.
    for (double* col : cols)
      if (present(*col) && *col > opt.prior.m_max_mjup) {
        p.notes.push_back("above_prior_max");
        break;
      }
    p.ess = kAbsent;
    c.points.push_back(p);
  }
  c.min_ess = kAbsent;
  return c;
}

std::vector<CurvePoint> read_curve_table(std::istream& in, const std::string& name, std::string& id) {
  static const std::vector<std::string> cols = {"id", "a_au", "sep_mas", "mass_lo95", "mass_lo68", "mass_med",
                                                "mass_hi68", "mass_hi95"};
  ColumnTable t(in, name, cols);
  std::vector<int> idx;
  for (const auto& c : cols) idx.push_back(t.index(c));
  const int iw = t.index("weight");  // optional
  std::vector<CurvePoint> rows;
  while (t.next()) {
    if (id.empty()) id = std::string(t.text(idx[0]));
    if (t.text(idx[0]) != id) continue;
    double v[7];
    for (int k = 1; k < 8; ++k) v[k - 1] = t.text(idx[k]).empty() ? kAbsent : t.number(idx[k]);
    if (!(v[0] > 0 && v[1] > 0)) t.fail(idx[1], "a_au and sep_mas must be positive");
    CurvePoint p{};
    p.a_au = v[0];
    p.sep_mas = v[1];
    p.period_yr = p.ess = kAbsent;
    p.weight = iw < 0 || t.text(iw).empty() ? kAbsent : t.number(iw);
    if (present(p.weight) && !(p.weight >= 0.0 && p.weight <= 1.0)) t.fail(iw, "weight must be in [0, 1]");
    p.mass_lo95 = v[2];
    p.mass_lo68 = v[3];
    p.mass_med = v[4];
    p.mass_hi68 = v[5];
    p.mass_hi95 = v[6];
    rows.push_back(std::move(p));
  }
  if (rows.empty()) throw InputError(name, 0, 0, id.empty() ? "no curve rows" : "no rows for star '" + id + "'");
  std::sort(rows.begin(), rows.end(), [](const CurvePoint& a, const CurvePoint& b) { return a.a_au < b.a_au; });
  return rows;
}

const std::vector<ColumnUnit>& curve_column_units() {
  static const std::vector<ColumnUnit> cols = {
      {"id", ""},              {"a_au", "AU"},          {"sep_mas", "mas"},       {"period_yr", "yr"},
      {"weight", ""},          {"mass_lo95", "Mjup"},   {"mass_lo68", "Mjup"},    {"mass_med", "Mjup"},
      {"mass_hi68", "Mjup"},   {"mass_hi95", "Mjup"},   {"notes", ""}};
  return cols;
}

std::string curve_header() { return header_line(curve_column_units()); }

void append_curve_rows(std::string& out, const std::string& id, const Curve& c) {
  for (const auto& p : c.points) {
    append_csv_field(out, id);
    for (double v : {p.a_au, p.sep_mas, p.period_yr, p.weight, p.mass_lo95, p.mass_lo68,
                     p.mass_med, p.mass_hi68, p.mass_hi95}) {
      out += ',';
      append_double(out, v);
    }
    out += ',';
    append_csv_field(out, join_notes(p.notes));
    out += '\n';
  }
}

nlohmann::ordered_json curve_point_json(const CurvePoint& p, bool upper_limit, bool errors) {
  // The columns lo95 ... hi95 are the 2.5 ... 97.5 % quantiles; an upper
  // limit fills only hi68 and hi95, its 68 % and 95 % quantiles.
  static const double kPercent[5] = {2.5, 16, 50, 84, 97.5};
  auto by_quantile = [&](const std::array<double, 5>& v) {
    return upper_limit ? quantiles_json({{68, v[3]}, {95, v[4]}})
                       : quantiles_json({{2.5, v[0]}, {16, v[1]}, {50, v[2]}, {84, v[3]}, {97.5, v[4]}});
  };
  nlohmann::ordered_json j = {{"a_au", p.a_au},
                              {"sep_mas", p.sep_mas},
                              {"period_yr", p.period_yr},
                              {"weight", json_number(p.weight)}};
  j["mass_mjup"] = by_quantile({p.mass_lo95, p.mass_lo68, p.mass_med, p.mass_hi68, p.mass_hi95});
  if (errors) j["mass_mjup_error"] = by_quantile(p.mass_error);
  j["ess"] = json_number(p.ess);
  j["ess_orbits"] = json_number(p.ess_orbits);
  if (p.rounds > 0) {
    j["draws"] = p.draws;
    j["rounds"] = p.rounds;
  } else {
    j["draws"] = j["rounds"] = nullptr;
  }
  j["notes"] = p.notes;
  if (has_note(p.notes, "multiple_solutions")) {
    nlohmann::ordered_json roots;
    for (int k = 0; k < 5; ++k) roots["q" + format_double(kPercent[k])] = p.roots_mjup[k];
    j["roots_mjup"] = roots;
  }
  return j;
}

}  // namespace heft
