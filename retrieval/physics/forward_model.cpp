#include "retrieval/physics/forward_model.h"

#include <algorithm>
#include <cmath>
#include <sstream>
#include <stdexcept>

#include <omp.h>

#include "retrieval/core/units.h"

namespace sw {

const char* to_string(MomentumModel m) { return m == MomentumModel::kFull ? "full" : "cma"; }

std::string ForwardModelOptions::validate() const {
  std::ostringstream s;
  if (momentum == MomentumModel::kCentral && !(central_momentum_au > 0))
    s << "central_momentum_au = " << central_momentum_au << ": must be > 0 for the CMA";
  else if (chebyshev_nodes < 2 || chebyshev_nodes > kMaxChebyshevNodes)
    s << "chebyshev_nodes = " << chebyshev_nodes << ": must be in [2, " << kMaxChebyshevNodes
      << "]";
  else if (!(max_block_phase_rad > 0))
    s << "max_block_phase_rad = " << max_block_phase_rad << ": must be > 0";
  else if (threads < 0)
    s << "threads = " << threads << ": must be >= 0";
  return s.str();
}

ForwardModel::ForwardModel(double ip_au, DipoleModel dipole, ForwardModelOptions options)
    : ip_(ip_au), dipole_(dipole), options_(options) {
  const std::string err = options_.validate();
  if (!err.empty()) throw std::invalid_argument("ForwardModelOptions: " + err);
}

namespace {

// Smooth spectrum value Int ds f(s) e^{i w_b s} from the raw FFT output at signed bin b.
inline cdouble smooth_bin(const CVec& raw, long b, const TimeGrid& g) {
  const double w = static_cast<double>(b) * g.dw();
  return raw[fft_index(b, g.size())] * (g.dt() * std::polar(1.0, w * g.t0()));
}

inline cdouble interpolate(const CVec& raw, const EnergyBinMap& m, std::size_t j,
                           const TimeGrid& g) {
  const cdouble a = smooth_bin(raw, m.bin[j], g);
  if (m.frac[j] == 0.0) return a;
  return (1.0 - m.frac[j]) * a + m.frac[j] * smooth_bin(raw, m.bin[j] + 1, g);
}

}  // namespace

EnergyBinMap map_energy_bins(const TimeGrid& grid, double carrier, double ip,
                             const std::vector<double>& W) {
  EnergyBinMap m;
  const double dw = grid.dw();
  const long half = static_cast<long>(grid.size() / 2);
  bool uniform = W.size() >= 2;
  for (std::size_t j = 1; j < W.size() && uniform; ++j)
    uniform = std::abs((W[j] - W[j - 1]) - dw) < 1e-7 * dw;
  const double w0 = W.front() + ip - carrier;
  if (uniform || W.size() == 1) m.carrier_shift = w0 - std::round(w0 / dw) * dw;
  m.bin.resize(W.size());
  m.frac.resize(W.size());
  for (std::size_t j = 0; j < W.size(); ++j) {
    const double x = (W[j] + ip - carrier - m.carrier_shift) / dw;
    long b = static_cast<long>(std::floor(x + 1e-9));
    double f = x - static_cast<double>(b);
    if (f < 1e-9) f = 0.0;
    if (b < -half || b + (f > 0 ? 1 : 0) > half - 1) {
      std::ostringstream s;
      s << "forward model: energy " << units::au_to_eV(W[j]) << " eV lies outside the XUV grid's "
        << "bandwidth (+-" << units::au_to_eV(half * dw) << " eV about the carrier); use a finer "
        << "time step";
      throw std::invalid_argument(s.str());
    }
    m.bin[j] = b;
    m.frac[j] = f;
  }
  return m;
}

namespace {

// One block of energies [j0, j1) with M Chebyshev nodes spanning their momenta.
MomentumBlock make_block(const std::vector<double>& W, std::size_t j0, std::size_t j1, int M) {
  MomentumBlock b;
  b.first = j0;
  b.last = j1;
  const double pa = units::momentum_au(W[j0]), pb = units::momentum_au(W[j1 - 1]);
  const double mid = 0.5 * (pa + pb), hw = std::max(0.5 * (pb - pa), 1e-9);
  for (int m = 0; m < M; ++m) b.nodes.push_back(mid + hw * std::cos(units::kPi * (m + 0.5) / M));
  b.lagrange.resize(static_cast<Eigen::Index>(j1 - j0), M);
  for (std::size_t j = j0; j < j1; ++j) {
    const double p = units::momentum_au(W[j]);
    for (int m = 0; m < M; ++m) {
      double L = 1.0;
      for (int q = 0; q < M; ++q)
        if (q != m) L *= (p - b.nodes[q]) / (b.nodes[m] - b.nodes[q]);
      b.lagrange(static_cast<Eigen::Index>(j - j0), m) = L;
    }
  }
  return b;
}

}  // namespace

// Bound on the error of interpolating f(x) = exp(i c s x), |s| <= 1, on [-1, 1] at M Chebyshev
// points: the remainder f^(M)(xi) / M! prod (x - x_m), with |f^(M)| <= c^M and
// |prod (x - x_m)| <= 2^(1 - M) at the Chebyshev points (e.g. E. Suli and D. Mayers, An
// Introduction to Numerical Analysis, CUP 2003, ch. 6; from memory), is 2 (c/2)^M / M!.
double chebyshev_interpolation_bound(double c, int M) {
  double r = 2.0;
  for (int k = 1; k <= M; ++k) r *= 0.5 * c / k;
  return r;
}

MomentumBlockPlan plan_momentum_blocks(const IrField& ir, const TimeGrid& g,
                                       const std::vector<double>& delay,
                                       const std::vector<double>& W,
                                       const ForwardModelOptions& options) {
  MomentumBlockPlan plan;
  if (W.empty() || delay.empty()) return plan;
  // Range of I1 over all times the XUV can sample.
  double lo = 1e300, hi = -1e300;
  const double tmin = g.time(0) + delay.front(), tmax = g.time(g.size() - 1) + delay.back();
  const std::size_t probes = 4 * ir.size() + 16;
  for (std::size_t i = 0; i <= probes; ++i) {
    const double I1 = ir.at(tmin + (tmax - tmin) * static_cast<double>(i) / probes).I1;
    lo = std::min(lo, I1);
    hi = std::max(hi, I1);
  }
  plan.i1_lo = lo;
  plan.i1_hi = hi;
  plan.i1_mid = 0.5 * (lo + hi);
  const double half_span = std::max(0.5 * (hi - lo), 1e-12);
  const int M0 = options.chebyshev_nodes;
  const double theta0 = options.max_block_phase_rad;
  const double p_lo = units::momentum_au(W.front()), p_hi = units::momentum_au(W.back());
  const double total = 0.5 * (p_hi - p_lo) * half_span;  // the phase excursion of one block
  if (!options.fewest_nodes || !std::isfinite(total)) {  // (a non-finite IR: the fixed layout)
    // Blocks of width 2 theta0 / half_span in p from the lowest energy, M0 nodes each.
    const double max_dp = 2.0 * theta0 / half_span;
    std::size_t j0 = 0;
    while (j0 < W.size()) {
      const double p_start = units::momentum_au(W[j0]);
      std::size_t j1 = j0 + 1;
      while (j1 < W.size() && units::momentum_au(W[j1]) - p_start <= max_dp) ++j1;
      plan.blocks.push_back(make_block(W, j0, j1, M0));
      j0 = j1;
    }
    plan.block_phase_rad = theta0;
    return plan;
  }
  // The fewest nodes in all: B equal blocks in p, each of phase excursion theta = total / B,
  // with the fewest nodes M whose bound does not exceed that of (theta0, M0).
  const double target = chebyshev_interpolation_bound(theta0, M0);
  // theta <= theta0 (M <= M0 meets the bound) by b_max blocks; no more blocks than energies.
  const int b_max =
      static_cast<int>(std::min(std::ceil(total / theta0) + 1.0, static_cast<double>(W.size())));
  int best_b = b_max, best_m = M0;
  for (int B = 1; B <= b_max && 2 * B < best_b * best_m; ++B) {  // M >= 2: B x 2 nodes at least
    const double theta = total / B;
    int M = 2;
    while (M < kMaxChebyshevNodes && chebyshev_interpolation_bound(theta, M) > target) ++M;
    if (chebyshev_interpolation_bound(theta, M) > target) continue;
    if (B * M < best_b * best_m) {
      best_b = B;
      best_m = M;
    }
  }
  const double dp = (p_hi - p_lo) / best_b;
  std::size_t j0 = 0;
  for (int k = 0; k < best_b && j0 < W.size(); ++k) {
    std::size_t j1 = j0;
    const double edge = k + 1 == best_b ? 1e300 : p_lo + (k + 1) * dp;
    while (j1 < W.size() && units::momentum_au(W[j1]) <= edge) ++j1;
    if (j1 == j0) continue;  // no energy in this slice
    plan.blocks.push_back(make_block(W, j0, j1, best_m));
    j0 = j1;
  }
  plan.block_phase_rad = total / best_b;
  return plan;
}

Eigen::MatrixXcd ForwardModel::amplitude(const XuvField& xuv_in, const IrField& ir,
                                         const std::vector<double>& delay,
                                         const std::vector<double>& W) const {
  if (W.empty() || delay.empty()) return Eigen::MatrixXcd(delay.size(), W.size());
  const TimeGrid& g = xuv_in.grid();
  const std::size_t n = g.size();
  const EnergyBinMap map = map_energy_bins(g, xuv_in.carrier_au(), ip_, W);
  const XuvField xuv = map.carrier_shift != 0.0
                           ? xuv_in.with_carrier(xuv_in.carrier_au() + map.carrier_shift)
                           : xuv_in;
  const std::vector<double> ts = g.times();
  const CVec& eps = xuv.envelope();
  const Fft fft(n);
  const auto nd = static_cast<long>(delay.size());
  Eigen::MatrixXcd out(delay.size(), W.size());

  // Momentum blocks for the full model (none for the CMA).
  std::vector<MomentumBlock> blocks;
  double i1_mid = 0.0;
  if (options_.momentum == MomentumModel::kFull) {
    MomentumBlockPlan plan = plan_momentum_blocks(ir, g, delay, W, options_);
    i1_mid = plan.i1_mid;
    blocks = std::move(plan.blocks);
  }

  const int threads = options_.threads > 0 ? options_.threads : omp_get_max_threads();
#pragma omp parallel num_threads(threads)
  {
    // Per-thread work buffers: no allocation inside the per-delay loop.
    CVec psi(n), raw(n);
    std::vector<VolkovIntegrals> v(n);
    std::vector<CVec> node_raw;
    std::size_t most_nodes = 0;
    for (const MomentumBlock& b : blocks) most_nodes = std::max(most_nodes, b.nodes.size());
    node_raw.assign(most_nodes, CVec(n));
#pragma omp for schedule(static)
    for (long i = 0; i < nd; ++i) {
      const double tau = delay[static_cast<std::size_t>(i)];
      for (std::size_t s = 0; s < n; ++s) v[s] = ir.at(ts[s] + tau);
      if (options_.momentum == MomentumModel::kCentral) {
        const double p0 = options_.central_momentum_au;
        for (std::size_t s = 0; s < n; ++s)
          psi[s] = eps[s] * dipole_(p0 + v[s].A) * std::polar(1.0, -p0 * v[s].I1 + 0.5 * v[s].I2);
        fft.time_to_freq(psi, raw);
        for (std::size_t j = 0; j < W.size(); ++j)
          out(i, static_cast<Eigen::Index>(j)) =
              cdouble(0, -1) * std::polar(1.0, (W[j] + ip_) * tau) * interpolate(raw, map, j, g);
      } else {
        for (const MomentumBlock& b : blocks) {
          for (std::size_t m = 0; m < b.nodes.size(); ++m) {
            const double p = b.nodes[m];
            for (std::size_t s = 0; s < n; ++s)
              psi[s] = eps[s] * dipole_(p + v[s].A) *
                       std::polar(1.0, -p * (v[s].I1 - i1_mid) - 0.5 * v[s].I2);
            fft.time_to_freq(psi, node_raw[m]);
          }
          for (std::size_t j = b.first; j < b.last; ++j) {
            cdouble acc = 0.0;
            for (std::size_t m = 0; m < b.nodes.size(); ++m)
              acc +=
                  b.lagrange(static_cast<Eigen::Index>(j - b.first), static_cast<Eigen::Index>(m)) *
                  interpolate(node_raw[m], map, j, g);
            const double p = units::momentum_au(W[j]);
            out(i, static_cast<Eigen::Index>(j)) =
                cdouble(0, -1) * std::polar(1.0, (W[j] + ip_) * tau - p * i1_mid) * acc;
          }
        }
      }
    }
  }
  // Global phase of the carrier shift: exp(-i delta s) was absorbed into the envelope; the
  // physical amplitude is unchanged because W + Ip - Omega_c is what enters the exponent.
  return out;
}

Eigen::MatrixXd ForwardModel::trace(const XuvField& xuv, const IrField& ir,
                                    const std::vector<double>& delay,
                                    const std::vector<double>& W) const {
  const Eigen::MatrixXcd a = amplitude(xuv, ir, delay, W);
  Eigen::MatrixXd S(a.rows(), a.cols());
  for (Eigen::Index j = 0; j < a.cols(); ++j) {
    const double jac =
        options_.energy_jacobian ? units::momentum_au(W[static_cast<std::size_t>(j)]) : 1.0;
    for (Eigen::Index i = 0; i < a.rows(); ++i) S(i, j) = jac * std::norm(a(i, j));
  }
  return S;
}

}  // namespace sw
