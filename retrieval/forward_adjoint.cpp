#include "retrieval/forward_adjoint.h"

#include <algorithm>
#include <cmath>
#include <stdexcept>

#include <omp.h>

#include "retrieval/units.h"

namespace sw {

namespace {

inline std::size_t fft_index(long b, std::size_t n) {
  return static_cast<std::size_t>(b < 0 ? b + static_cast<long>(n) : b);
}

// Cubic Hermite basis on [0, 1] (the one of IrField::at).
struct Hermite {
  double h00, h10, h01, h11;
};
inline Hermite hermite_basis(double s) {
  const double s2 = s * s, s3 = s2 * s;
  return {2 * s3 - 3 * s2 + 1, s3 - 2 * s2 + s, -2 * s3 + 3 * s2, s3 - s2};
}

// Range of I1 over the times the XUV grid can sample (as plan_momentum_blocks probes it).
void i1_range(const IrField& ir, const TimeGrid& g, const std::vector<double>& delay, double* lo,
              double* hi) {
  *lo = 1e300;
  *hi = -1e300;
  const double tmin = g.time(0) + delay.front(), tmax = g.time(g.size() - 1) + delay.back();
  const std::size_t probes = 4 * ir.size() + 16;
  for (std::size_t i = 0; i <= probes; ++i) {
    const double I1 = ir.at(tmin + (tmax - tmin) * static_cast<double>(i) / probes).I1;
    *lo = std::min(*lo, I1);
    *hi = std::max(*hi, I1);
  }
}

}  // namespace

std::vector<double> ir_samples_adjoint(const IrField& ir, std::vector<double> bA,
                                       std::vector<double> bdA, std::vector<double> bI1,
                                       std::vector<double> bI2) {
  const std::size_t n = ir.size();
  if (bA.size() != n || bdA.size() != n || bI1.size() != n || bI2.size() != n)
    throw std::invalid_argument("ir_samples_adjoint: adjoint arrays differ from the IR size");
  const double dt = ir.dt();
  const std::vector<double>& A = ir.vector_potential();
  std::vector<double> dA = ir.electric_field();
  for (double& d : dA) d = -d;
  // I1_i = sum_{k=i}^{n-2} inc_k: the adjoint of inc_k is the prefix sum of bI1 up to k.
  double P = 0.0, Q = 0.0;
  const double c12 = dt * dt / 12.0, c6 = dt * dt / 6.0;
  for (std::size_t k = 0; k + 1 < n; ++k) {
    P += bI1[k];
    Q += bI2[k];
    bA[k] += P * dt / 2 + Q * (dt * A[k] + c6 * dA[k]);
    bA[k + 1] += P * dt / 2 + Q * (dt * A[k + 1] - c6 * dA[k + 1]);
    bdA[k] += P * c12 + Q * c6 * A[k];
    bdA[k + 1] -= P * c12 + Q * c6 * A[k + 1];
  }
  // dA/dt stencils (transpose).
  for (std::size_t i = 2; i + 2 < n; ++i) {
    const double c = bdA[i] / (12 * dt);
    bA[i + 2] -= c;
    bA[i + 1] += 8 * c;
    bA[i - 1] -= 8 * c;
    bA[i - 2] += c;
  }
  {
    const double c1 = bdA[1] / (2 * dt), cm = bdA[n - 2] / (2 * dt);
    bA[2] += c1;
    bA[0] -= c1;
    bA[n - 1] += cm;
    bA[n - 3] -= cm;
    const double c0 = bdA[0] / dt, cl = bdA[n - 1] / dt;
    bA[1] += c0;
    bA[0] -= c0;
    bA[n - 1] += cl;
    bA[n - 2] -= cl;
  }
  return bA;
}

ForwardAdjoint::ForwardAdjoint(double ip, DipoleModel dipole, TimeGrid grid, double carrier,
                               std::vector<double> delay, std::vector<double> energy, int threads)
    : ip_(ip),
      dipole_(dipole),
      grid_(grid),
      carrier_(carrier),
      delay_(std::move(delay)),
      energy_(std::move(energy)),
      threads_(threads) {
  if (delay_.empty() || energy_.empty())
    throw std::invalid_argument("ForwardAdjoint: empty delay or energy axis");
  map_ = map_energy_bins(grid_, carrier_, ip_, energy_);
  if (map_.carrier_shift != 0.0) {
    // As XuvField::with_carrier(carrier + shift): envelope x exp(-i (c - c') t).
    const double d = carrier_ - (carrier_ + map_.carrier_shift);
    shift_phase_t_.resize(grid_.size());
    for (std::size_t i = 0; i < grid_.size(); ++i) shift_phase_t_[i] = -d * grid_.time(i);
  }
}

void ForwardAdjoint::plan_full(const IrField& ir, const ForwardModelOptions& options) {
  plan_ = plan_momentum_blocks(ir, grid_, delay_, energy_, options);
  max_block_phase_ = options.max_block_phase_rad;
  central_ = false;
  planned_ = true;
}

void ForwardAdjoint::plan_central(double p0) {
  plan_ = MomentumBlockPlan{};
  MomentumBlock b;
  b.first = 0;
  b.last = energy_.size();
  b.nodes = {p0};
  b.lagrange = Eigen::MatrixXd::Ones(static_cast<Eigen::Index>(energy_.size()), 1);
  plan_.blocks.push_back(std::move(b));
  central_ = true;
  planned_ = true;
}

bool ForwardAdjoint::plan_covers(const IrField& ir, double slack) const {
  if (central_) return true;
  if (!planned_) return false;
  double lo, hi;
  i1_range(ir, grid_, delay_, &lo, &hi);
  const double excursion = std::max(hi - plan_.i1_mid, plan_.i1_mid - lo);
  for (const MomentumBlock& b : plan_.blocks) {
    const double half_width =
        0.5 * (units::momentum_au(energy_[b.last - 1]) - units::momentum_au(energy_[b.first]));
    if (half_width * excursion > (1.0 + slack) * max_block_phase_) return false;
  }
  return true;
}

Eigen::MatrixXcd ForwardAdjoint::amplitude(const CVec& eps, const IrField& ir) const {
  Eigen::MatrixXcd out;
  run(Mode::kAmplitude, eps, ir, nullptr, nullptr, nullptr, false, &out, nullptr, nullptr, nullptr,
      nullptr);
  return out;
}

void ForwardAdjoint::vjp(const CVec& eps, const IrField& ir, const Eigen::MatrixXcd& a_bar,
                         CVec* eps_bar, std::vector<double>* A_bar) const {
  if (a_bar.rows() != static_cast<Eigen::Index>(delay_.size()) ||
      a_bar.cols() != static_cast<Eigen::Index>(energy_.size()))
    throw std::invalid_argument("ForwardAdjoint::vjp: a_bar is not delays x energies");
  run(Mode::kVjp, eps, ir, &a_bar, nullptr, nullptr, true, nullptr, nullptr, nullptr, eps_bar,
      A_bar);
}

void ForwardAdjoint::scaled_cost(const CVec& eps, const IrField& ir, const Eigen::MatrixXd& M,
                                 const Eigen::MatrixXd& w, bool with_gradient,
                                 ScaledCostParts* out, Eigen::MatrixXd* model) const {
  const auto nd = static_cast<Eigen::Index>(delay_.size());
  const auto ne = static_cast<Eigen::Index>(energy_.size());
  if (M.rows() != nd || M.cols() != ne || w.rows() != nd || w.cols() != ne)
    throw std::invalid_argument("ForwardAdjoint::scaled_cost: measured/weight not delays x energies");
  run(Mode::kScaledCost, eps, ir, nullptr, &M, &w, with_gradient, nullptr, model, out, nullptr,
      nullptr);
}

// Per-thread buffers and accumulators.
struct ForwardAdjoint::Workspace {
  std::vector<VolkovIntegrals> v;
  CVec gate;                       // nodes x n: d(p + A) e^{i phi}
  CVec phase;                      // nodes x n: e^{i phi} (non-constant dipole only)
  std::vector<double> ddip;        // nodes x n: d'(p + A) (non-constant dipole only)
  CVec psi, raw, rawbar, psibar;
  std::vector<cdouble> acc, row_a;
  std::vector<cdouble> row_bar;    // K x ne
  std::vector<double> gA, gI1, gI2;  // K x n adjoints of A, I1, I2 at s + tau
  // Totals over this thread's delays.
  CVec eps_bar;                    // K x n
  std::vector<double> bA, bdA, bI1, bI2;  // K x n_ir
  double c2 = 0, c1 = 0, c0 = 0;
};

void ForwardAdjoint::run(Mode mode, const CVec& eps_in, const IrField& ir,
                         const Eigen::MatrixXcd* a_bar, const Eigen::MatrixXd* M,
                         const Eigen::MatrixXd* w, bool with_gradient, Eigen::MatrixXcd* amp_out,
                         Eigen::MatrixXd* model_out, ScaledCostParts* parts, CVec* eps_bar_out,
                         std::vector<double>* A_bar_out) const {
  if (!planned_) throw std::logic_error("ForwardAdjoint: no momentum plan (call plan_full/central)");
  const std::size_t n = grid_.size();
  if (eps_in.size() != n) throw std::invalid_argument("ForwardAdjoint: envelope size != grid size");
  const std::size_t ne = energy_.size(), nir = ir.size();
  const auto nd = static_cast<long>(delay_.size());
  const int K = mode == Mode::kAmplitude ? 0
                : mode == Mode::kVjp     ? 1
                                         : (with_gradient ? 2 : 0);
  const bool const_dipole = dipole_.kind() == DipoleKind::kConstant;

  // Envelope about the shifted carrier (ForwardModel's with_carrier).
  CVec eps_shifted;
  if (!shift_phase_t_.empty()) {
    eps_shifted.resize(n);
    for (std::size_t s = 0; s < n; ++s) eps_shifted[s] = eps_in[s] * std::polar(1.0, shift_phase_t_[s]);
  }
  const CVec& eps = shift_phase_t_.empty() ? eps_in : eps_shifted;

  // Per-energy constants: bin indices and weights, output phase factor.
  std::vector<std::size_t> ilo(ne), ihi(ne);
  std::vector<cdouble> clo(ne), chi(ne);
  std::vector<double> pj(ne);
  for (std::size_t j = 0; j < ne; ++j) {
    const long b = map_.bin[j];
    ilo[j] = fft_index(b, n);
    ihi[j] = fft_index(b + 1, n);
    clo[j] = grid_.dt() * std::polar(1.0, static_cast<double>(b) * grid_.dw() * grid_.t0());
    chi[j] = grid_.dt() * std::polar(1.0, static_cast<double>(b + 1) * grid_.dw() * grid_.t0());
    pj[j] = units::momentum_au(energy_[j]);
  }
  std::size_t total_nodes = 0;
  for (const MomentumBlock& b : plan_.blocks) total_nodes += b.nodes.size();
  const double i1_mid = plan_.i1_mid;
  const std::vector<double> ts = grid_.times();
  const Fft fft(n);

  if (amp_out) amp_out->resize(nd, static_cast<Eigen::Index>(ne));
  if (model_out) model_out->resize(nd, static_cast<Eigen::Index>(ne));

  const int threads = threads_ > 0 ? threads_ : omp_get_max_threads();
  std::vector<Workspace> ws(static_cast<std::size_t>(std::max(threads, 1)));

#pragma omp parallel num_threads(threads)
  {
    Workspace& W = ws[static_cast<std::size_t>(omp_get_thread_num())];
    W.v.resize(n);
    W.gate.resize(total_nodes * n);
    if (!const_dipole && K > 0) {
      W.phase.resize(total_nodes * n);
      W.ddip.resize(total_nodes * n);
    }
    W.psi.resize(n);
    W.raw.resize(n);
    W.rawbar.resize(n);
    W.psibar.resize(n);
    W.acc.resize(ne);
    W.row_a.resize(ne);
    W.row_bar.resize(static_cast<std::size_t>(K) * ne);
    W.gA.resize(static_cast<std::size_t>(K) * n);
    W.gI1.resize(static_cast<std::size_t>(K) * n);
    W.gI2.resize(static_cast<std::size_t>(K) * n);
    W.eps_bar.assign(static_cast<std::size_t>(K) * n, 0.0);
    W.bA.assign(static_cast<std::size_t>(K) * nir, 0.0);
    W.bdA.assign(static_cast<std::size_t>(K) * nir, 0.0);
    W.bI1.assign(static_cast<std::size_t>(K) * nir, 0.0);
    W.bI2.assign(static_cast<std::size_t>(K) * nir, 0.0);

#pragma omp for schedule(static)
    for (long i = 0; i < nd; ++i) {
      const double tau = delay_[static_cast<std::size_t>(i)];
      for (std::size_t s = 0; s < n; ++s) W.v[s] = ir.at(ts[s] + tau);
      std::fill(W.acc.begin(), W.acc.end(), cdouble(0.0));
      // Forward: gates, one FFT per node, Lagrange sums.
      std::size_t q = 0;
      for (const MomentumBlock& b : plan_.blocks) {
        for (std::size_t m = 0; m < b.nodes.size(); ++m, ++q) {
          const double p = b.nodes[m];
          cdouble* g = &W.gate[q * n];
          for (std::size_t s = 0; s < n; ++s) {
            const cdouble ph = std::polar(1.0, -p * (W.v[s].I1 - i1_mid) - 0.5 * W.v[s].I2);
            g[s] = dipole_(p + W.v[s].A) * ph;
            W.psi[s] = eps[s] * g[s];
            if (!W.phase.empty()) {
              W.phase[q * n + s] = ph;
              W.ddip[q * n + s] = dipole_.derivative(p + W.v[s].A);
            }
          }
          fft.time_to_freq(W.psi, W.raw);
          for (std::size_t j = b.first; j < b.last; ++j) {
            cdouble val = W.raw[ilo[j]] * clo[j];
            const double f = map_.frac[j];
            if (f != 0.0) val = (1.0 - f) * val + f * (W.raw[ihi[j]] * chi[j]);
            W.acc[j] += b.lagrange(static_cast<Eigen::Index>(j - b.first),
                                   static_cast<Eigen::Index>(m)) *
                        val;
          }
        }
      }
      for (std::size_t j = 0; j < ne; ++j) {
        const double theta = (energy_[j] + ip_) * tau - pj[j] * i1_mid;
        W.row_a[j] = cdouble(0, -1) * std::polar(1.0, theta) * W.acc[j];
      }
      const auto ii = static_cast<Eigen::Index>(i);
      if (amp_out)
        for (std::size_t j = 0; j < ne; ++j) (*amp_out)(ii, static_cast<Eigen::Index>(j)) = W.row_a[j];
      if (mode == Mode::kScaledCost) {
        for (std::size_t j = 0; j < ne; ++j) {
          const auto jj = static_cast<Eigen::Index>(j);
          const double mod = std::norm(W.row_a[j]), wij = (*w)(ii, jj), Mij = (*M)(ii, jj);
          W.c2 += wij * mod * mod;
          W.c1 += -2.0 * wij * Mij * mod;
          W.c0 += wij * Mij * Mij;
          if (model_out) (*model_out)(ii, jj) = mod;
          if (K == 2) {
            W.row_bar[j] = 2.0 * wij * mod * W.row_a[j];
            W.row_bar[ne + j] = -2.0 * wij * Mij * W.row_a[j];
          }
        }
      } else if (mode == Mode::kVjp) {
        for (std::size_t j = 0; j < ne; ++j) W.row_bar[j] = (*a_bar)(ii, static_cast<Eigen::Index>(j));
      }
      if (K == 0) continue;

      // Adjoint: a = -i e^{i theta} acc  ->  acc_bar = i e^{-i theta} a_bar.
      for (std::size_t j = 0; j < ne; ++j) {
        const double theta = (energy_[j] + ip_) * tau - pj[j] * i1_mid;
        const cdouble f = cdouble(0, 1) * std::polar(1.0, -theta);
        for (int k = 0; k < K; ++k) W.row_bar[static_cast<std::size_t>(k) * ne + j] *= f;
      }
      std::fill(W.gA.begin(), W.gA.end(), 0.0);
      std::fill(W.gI1.begin(), W.gI1.end(), 0.0);
      std::fill(W.gI2.begin(), W.gI2.end(), 0.0);
      q = 0;
      for (const MomentumBlock& b : plan_.blocks) {
        for (std::size_t m = 0; m < b.nodes.size(); ++m, ++q) {
          const double p = b.nodes[m];
          const cdouble* g = &W.gate[q * n];
          for (int k = 0; k < K; ++k) {
            const cdouble* accbar = &W.row_bar[static_cast<std::size_t>(k) * ne];
            std::fill(W.rawbar.begin(), W.rawbar.end(), cdouble(0.0));
            for (std::size_t j = b.first; j < b.last; ++j) {
              const cdouble val = b.lagrange(static_cast<Eigen::Index>(j - b.first),
                                             static_cast<Eigen::Index>(m)) *
                                  accbar[j];
              const double f = map_.frac[j];
              if (f == 0.0) {
                W.rawbar[ilo[j]] += std::conj(clo[j]) * val;
              } else {
                W.rawbar[ilo[j]] += (1.0 - f) * std::conj(clo[j]) * val;
                W.rawbar[ihi[j]] += f * std::conj(chi[j]) * val;
              }
            }
            fft.freq_to_time(W.rawbar, W.psibar);
            cdouble* eb = &W.eps_bar[static_cast<std::size_t>(k) * n];
            double* gA = &W.gA[static_cast<std::size_t>(k) * n];
            double* gI1 = &W.gI1[static_cast<std::size_t>(k) * n];
            double* gI2 = &W.gI2[static_cast<std::size_t>(k) * n];
            for (std::size_t s = 0; s < n; ++s) {
              const cdouble pb = W.psibar[s];
              eb[s] += pb * std::conj(g[s]);
              const cdouble qv = std::conj(pb) * eps[s];
              const double im = (qv * g[s]).imag();
              gI1[s] += 2.0 * p * im;
              gI2[s] += im;
              if (!W.phase.empty())
                gA[s] += 2.0 * (qv * (W.ddip[q * n + s] * W.phase[q * n + s])).real();
            }
          }
        }
      }
      // Through IrField::at at s + tau onto the stored IR arrays.
      const double t0 = ir.t0(), dt = ir.dt();
      const std::vector<double>& A = ir.vector_potential();
      for (std::size_t s = 0; s < n; ++s) {
        const double x = (ts[s] + tau - t0) / dt;
        if (x >= static_cast<double>(nir - 1)) continue;
        for (int k = 0; k < K; ++k) {
          const std::size_t ko = static_cast<std::size_t>(k) * n, kr = static_cast<std::size_t>(k) * nir;
          const double a_ = W.gA[ko + s], b1 = W.gI1[ko + s], b2 = W.gI2[ko + s];
          if (x <= 0) {
            W.bI1[kr] += b1;
            W.bI2[kr] += b2;
            continue;
          }
          const std::size_t c = static_cast<std::size_t>(x);
          const Hermite h = hermite_basis(x - static_cast<double>(c));
          W.bA[kr + c] += h.h00 * a_ - h.h10 * dt * (b1 + 2.0 * A[c] * b2);
          W.bA[kr + c + 1] += h.h01 * a_ - h.h11 * dt * (b1 + 2.0 * A[c + 1] * b2);
          W.bdA[kr + c] += h.h10 * dt * a_;
          W.bdA[kr + c + 1] += h.h11 * dt * a_;
          W.bI1[kr + c] += h.h00 * b1;
          W.bI1[kr + c + 1] += h.h01 * b1;
          W.bI2[kr + c] += h.h00 * b2;
          W.bI2[kr + c + 1] += h.h01 * b2;
        }
      }
    }
  }

  // Reduce in thread order (deterministic for a fixed thread count).
  if (parts) {
    parts->c2 = parts->c1 = parts->c0 = 0.0;
    for (const Workspace& W : ws) {
      parts->c2 += W.c2;
      parts->c1 += W.c1;
      parts->c0 += W.c0;
    }
  }
  if (K == 0) return;
  std::vector<CVec> eb(static_cast<std::size_t>(K), CVec(n, 0.0));
  std::vector<std::vector<double>> bA(static_cast<std::size_t>(K), std::vector<double>(nir, 0.0));
  std::vector<std::vector<double>> bdA = bA, bI1 = bA, bI2 = bA;
  for (const Workspace& W : ws) {
    if (W.eps_bar.empty()) continue;
    for (int k = 0; k < K; ++k) {
      const auto ku = static_cast<std::size_t>(k);
      for (std::size_t s = 0; s < n; ++s) eb[ku][s] += W.eps_bar[ku * n + s];
      for (std::size_t r = 0; r < nir; ++r) {
        bA[ku][r] += W.bA[ku * nir + r];
        bdA[ku][r] += W.bdA[ku * nir + r];
        bI1[ku][r] += W.bI1[ku * nir + r];
        bI2[ku][r] += W.bI2[ku * nir + r];
      }
    }
  }
  if (!shift_phase_t_.empty())
    for (auto& e : eb)
      for (std::size_t s = 0; s < n; ++s) e[s] *= std::polar(1.0, -shift_phase_t_[s]);
  if (mode == Mode::kVjp) {
    if (eps_bar_out) *eps_bar_out = std::move(eb[0]);
    if (A_bar_out) *A_bar_out = ir_samples_adjoint(ir, bA[0], bdA[0], bI1[0], bI2[0]);
  } else {
    parts->eps_bar2 = std::move(eb[0]);
    parts->eps_bar1 = std::move(eb[1]);
    parts->A_bar2 = ir_samples_adjoint(ir, bA[0], bdA[0], bI1[0], bI2[0]);
    parts->A_bar1 = ir_samples_adjoint(ir, bA[1], bdA[1], bI1[1], bI2[1]);
  }
}

}  // namespace sw
