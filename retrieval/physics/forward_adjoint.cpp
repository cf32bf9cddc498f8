#include "retrieval/physics/forward_adjoint.h"

#include <algorithm>
#include <cmath>
#include <stdexcept>

#include <omp.h>

#include "retrieval/core/hot_loop.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/phase_factors.h"

namespace sw {

namespace {

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
  const std::size_t n = grid_.size(), ne = energy_.size();
  bin_lo_.resize(ne);
  bin_hi_.resize(ne);
  bin_wlo_.resize(ne);
  bin_whi_.resize(ne);
  momentum_.resize(ne);
  for (std::size_t j = 0; j < ne; ++j) {
    const long b = map_.bin[j];
    bin_lo_[j] = fft_index(b, n);
    bin_hi_[j] = fft_index(b + 1, n);
    bin_wlo_[j] = grid_.dt() * std::polar(1.0, static_cast<double>(b) * grid_.dw() * grid_.t0());
    bin_whi_[j] =
        grid_.dt() * std::polar(1.0, static_cast<double>(b + 1) * grid_.dw() * grid_.t0());
    momentum_[j] = units::momentum_au(energy_[j]);
  }
}

void ForwardAdjoint::set_row_phases() {
  const std::size_t nd = delay_.size(), ne = energy_.size();
  row_phase_.resize(nd * ne);
  for (std::size_t i = 0; i < nd; ++i)
    for (std::size_t j = 0; j < ne; ++j) {
      const double theta = (energy_[j] + ip_) * delay_[i] - momentum_[j] * plan_.i1_mid;
      row_phase_[i * ne + j] = cdouble(0, -1) * std::polar(1.0, theta);
    }
}

void ForwardAdjoint::plan_full(const IrField& ir, const ForwardModelOptions& options) {
  plan_ = plan_momentum_blocks(ir, grid_, delay_, energy_, options);
  // The accuracy the plan was made for: the bound of chebyshev_nodes over max_block_phase_rad.
  cover_bound_phase_ = options.max_block_phase_rad;
  cover_bound_nodes_ = options.chebyshev_nodes;
  central_ = false;
  planned_ = true;
  set_row_phases();
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
  set_row_phases();
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
    if (chebyshev_interpolation_bound(half_width * excursion, static_cast<int>(b.nodes.size())) >
        chebyshev_interpolation_bound((1.0 + slack) * cover_bound_phase_, cover_bound_nodes_))
      return false;
  }
  return true;
}

Eigen::MatrixXcd ForwardAdjoint::amplitude(const CVec& eps, const IrField& ir) const {
  Eigen::MatrixXcd out;
  run(Mode::kAmplitude, eps, ir, nullptr, nullptr, nullptr, false, &out, nullptr, nullptr, nullptr,
      nullptr, 0.0, 0.0, nullptr);
  return out;
}

void ForwardAdjoint::vjp(const CVec& eps, const IrField& ir, const Eigen::MatrixXcd& a_bar,
                         CVec* eps_bar, std::vector<double>* A_bar) const {
  if (a_bar.rows() != static_cast<Eigen::Index>(delay_.size()) ||
      a_bar.cols() != static_cast<Eigen::Index>(energy_.size()))
    throw std::invalid_argument("ForwardAdjoint::vjp: a_bar is not delays x energies");
  run(Mode::kVjp, eps, ir, &a_bar, nullptr, nullptr, true, nullptr, nullptr, nullptr, eps_bar,
      A_bar, 0.0, 0.0, nullptr);
}

void ForwardAdjoint::check_cost_inputs(const Eigen::MatrixXd& M, const Eigen::MatrixXd& w,
                                       const char* method) const {
  const auto nd = static_cast<Eigen::Index>(delay_.size());
  const auto ne = static_cast<Eigen::Index>(energy_.size());
  if (M.rows() != nd || M.cols() != ne || w.rows() != nd || w.cols() != ne)
    throw std::invalid_argument(std::string("ForwardAdjoint::") + method +
                                ": measured/weight not delays x energies");
}

void ForwardAdjoint::scaled_cost(const CVec& eps, const IrField& ir, const Eigen::MatrixXd& M,
                                 const Eigen::MatrixXd& w, bool with_gradient, ScaledCostParts* out,
                                 Eigen::MatrixXd* model) const {
  check_cost_inputs(M, w, "scaled_cost");
  run(Mode::kScaledCost, eps, ir, nullptr, &M, &w, with_gradient, nullptr, model, out, nullptr,
      nullptr, 0.0, 0.0, nullptr);
}

void ForwardAdjoint::projected_cost(const CVec& eps, const IrField& ir, const Eigen::MatrixXd& M,
                                    const Eigen::MatrixXd& w, double extra_c2, double extra_c1,
                                    bool with_gradient, ProjectedCostParts* out,
                                    Eigen::MatrixXd* model) const {
  check_cost_inputs(M, w, "projected_cost");
  run(Mode::kProjected, eps, ir, nullptr, &M, &w, with_gradient, nullptr, model, nullptr, nullptr,
      nullptr, extra_c2, extra_c1, out);
}

// Per-thread buffers and accumulators (structure-of-arrays so the inner loops vectorise).
struct ForwardAdjoint::Workspace {
  std::vector<double> A, u, v;   // A, I1 - I1_mid, I2/2 at s + tau
  std::vector<double> sn, cs;    // sines/cosines of a pair's phase offset
  std::vector<double> emr, emi;  // exp(i phi) of the block's mid momentum
  struct {
    const double *emr, *emi, *cs, *sn;  // the current block's and pair's factors (above or stored)
  } ph{};
  std::vector<double> r1, i1;          // scratch for the unpaired middle node
  std::vector<double> gre, gim;        // nodes x n: gate d(p + A) exp(i phi)
  std::vector<double> pre, pim, ddip;  // nodes x n: exp(i phi), d'(p + A) (dipole != const)
  CVec psi, psi2, raw, rawbar, psibar, psibar2;
  std::vector<cdouble> acc, row_a;
  std::vector<double> mod, bl, g2, g1;  // ne: |a|^2, blurred model, cost adjoints (resolution)
  std::vector<cdouble> row_bar;         // K x ne
  std::vector<double> gA, gI1, gI2;     // K x n adjoints of A, I1, I2 at s + tau
  // Totals over this thread's delays.
  std::vector<double> ebr, ebi;           // K x n
  std::vector<double> bA, bdA, bI1, bI2;  // K x n_ir
  double c2 = 0, c1 = 0, c0 = 0;
};

namespace {

// The element-wise kernels below are compiled for the baseline and for x86-64-v3 (SW_HOT_LOOP,
// retrieval/core/hot_loop.h); only FMA rounding differs between the clones.

// psi = eps * gate (interleaved complex output).
SW_HOT_LOOP void gate_times_envelope(const double* __restrict__ er, const double* __restrict__ ei,
                                     const double* __restrict__ gr, const double* __restrict__ gi,
                                     double* __restrict__ psi, std::size_t n) {
  for (std::size_t k = 0; k < n; ++k) {
    psi[2 * k] = er[k] * gr[k] - ei[k] * gi[k];
    psi[2 * k + 1] = er[k] * gi[k] + ei[k] * gr[k];
  }
}

// Adjoint of psi = eps * gate for one node: eps_bar += psi_bar conj(g);
// Im(conj(psi_bar) psi) -> I1_bar += 2 p Im, I2_bar += Im.
SW_HOT_LOOP void node_adjoint(const double* __restrict__ pb, const double* __restrict__ er,
                              const double* __restrict__ ei, const double* __restrict__ gr,
                              const double* __restrict__ gi, double two_p, double i2_sign,
                              double* __restrict__ ebr, double* __restrict__ ebi,
                              double* __restrict__ gI1, double* __restrict__ gI2, std::size_t n) {
  for (std::size_t s = 0; s < n; ++s) {
    const double br = pb[2 * s], bi = pb[2 * s + 1];
    ebr[s] += br * gr[s] + bi * gi[s];
    ebi[s] += bi * gr[s] - br * gi[s];
    const double sr = er[s] * gr[s] - ei[s] * gi[s];
    const double si = er[s] * gi[s] + ei[s] * gr[s];
    const double im = br * si - bi * sr;
    gI1[s] += two_p * im;
    gI2[s] += i2_sign * im;
  }
}

// Exit waves eps * exp(i phi) of a node pair (interleaved complex p1, p2), the gates formed as
// in pair_phases and multiplied as in gate_times_envelope.
SW_HOT_LOOP void pair_exit_waves(const double* __restrict__ a, const double* __restrict__ b,
                                 const double* __restrict__ c, const double* __restrict__ d,
                                 const double* __restrict__ er, const double* __restrict__ ei,
                                 double* __restrict__ p1, double* __restrict__ p2, std::size_t n) {
  for (std::size_t s = 0; s < n; ++s) {
    const double r1 = a[s] * c[s] - b[s] * d[s], i1 = a[s] * d[s] + b[s] * c[s];
    const double r2 = a[s] * c[s] + b[s] * d[s], i2 = b[s] * c[s] - a[s] * d[s];
    p1[2 * s] = er[s] * r1 - ei[s] * i1;
    p1[2 * s + 1] = er[s] * i1 + ei[s] * r1;
    p2[2 * s] = er[s] * r2 - ei[s] * i2;
    p2[2 * s + 1] = er[s] * i2 + ei[s] * r2;
  }
}

// node_adjoint for both nodes of a pair at once (psi_bar p1, p2; momenta 2p in tp1, tp2), the
// gates formed on the fly as in pair_phases.
SW_HOT_LOOP void pair_adjoint(const double* __restrict__ a, const double* __restrict__ b,
                              const double* __restrict__ c, const double* __restrict__ d,
                              const double* __restrict__ er, const double* __restrict__ ei,
                              const double* __restrict__ p1, const double* __restrict__ p2,
                              double tp1, double tp2, double i2_sign, double* __restrict__ ebr,
                              double* __restrict__ ebi, double* __restrict__ gI1,
                              double* __restrict__ gI2, std::size_t n) {
  for (std::size_t s = 0; s < n; ++s) {
    const double r1 = a[s] * c[s] - b[s] * d[s], i1 = a[s] * d[s] + b[s] * c[s];
    const double r2 = a[s] * c[s] + b[s] * d[s], i2 = b[s] * c[s] - a[s] * d[s];
    const double b1r = p1[2 * s], b1i = p1[2 * s + 1], b2r = p2[2 * s], b2i = p2[2 * s + 1];
    ebr[s] += (b1r * r1 + b1i * i1) + (b2r * r2 + b2i * i2);
    ebi[s] += (b1i * r1 - b1r * i1) + (b2i * r2 - b2r * i2);
    const double s1r = er[s] * r1 - ei[s] * i1, s1i = er[s] * i1 + ei[s] * r1;
    const double s2r = er[s] * r2 - ei[s] * i2, s2i = er[s] * i2 + ei[s] * r2;
    const double im1 = b1r * s1i - b1i * s1r, im2 = b2r * s2i - b2i * s2r;
    gI1[s] += tp1 * im1 + tp2 * im2;
    gI2[s] += i2_sign * (im1 + im2);
  }
}

// exp(i phi) of a node pair from exp(i phi_mid) (a, b) and exp(i delta phase) (c, d).
SW_HOT_LOOP void pair_phases(const double* __restrict__ a, const double* __restrict__ b,
                             const double* __restrict__ c, const double* __restrict__ d,
                             double* __restrict__ r1, double* __restrict__ i1,
                             double* __restrict__ r2, double* __restrict__ i2, std::size_t n) {
  for (std::size_t s = 0; s < n; ++s) {
    r1[s] = a[s] * c[s] - b[s] * d[s];  // e_mid e_pair
    i1[s] = a[s] * d[s] + b[s] * c[s];
    r2[s] = a[s] * c[s] + b[s] * d[s];  // e_mid conj(e_pair)
    i2[s] = b[s] * c[s] - a[s] * d[s];
  }
}

// Adjoints of the IR samples A_i, dA/dt_i, I1_i, I2_i.
struct IrSampleAdjoints {
  double *A, *dA, *I1, *I2;
};

// Adjoint of IrField::at at the ascending times t[s] + tau: gA, gI1, gI2 (adjoints of A, I1, I2
// there; gA unused for a constant dipole, whose gate does not depend on A) added onto the
// samples' adjoints `out`. Every sample receives its additions in the order of the times; the
// two samples of the current IR interval are held in registers while the times stay in it
// (several XUV samples per IR interval), so the sums are those of a plain loop.
void hermite_adjoint(const IrField& ir, const double* t, std::size_t n, double tau,
                     bool const_dipole, const double* gA, const double* gI1, const double* gI2,
                     IrSampleAdjoints out) {
  const double t0 = ir.t0(), dt = ir.dt();
  const double* A = ir.vector_potential().data();
  const std::size_t nir = ir.size(), none = nir;
  const double last = static_cast<double>(nir - 1);
  std::size_t s = 0;
  // Before the first sample IrField::at returns I1_0 and I2_0 (and A = 0).
  for (; s < n; ++s) {
    const double x = (t[s] + tau - t0) / dt;
    if (x >= last || !(x <= 0)) break;
    out.I1[0] += gI1[s];
    out.I2[0] += gI2[s];
  }
  std::size_t c0 = none;  // the interval held in lo (sample c0) and hi (sample c0 + 1)
  struct Held {
    double A, dA, I1, I2;
  } lo{}, hi{};
  auto load = [&](std::size_t i) { return Held{out.A[i], out.dA[i], out.I1[i], out.I2[i]}; };
  auto store = [&](std::size_t i, const Held& h) {
    out.A[i] = h.A;
    out.dA[i] = h.dA;
    out.I1[i] = h.I1;
    out.I2[i] = h.I2;
  };
  for (; s < n; ++s) {
    const double x = (t[s] + tau - t0) / dt;
    // Beyond the last sample (and every later time): A = I1 = I2 = 0; a time that is not a
    // number reads no sample either.
    if (!(x < last)) break;
    const std::size_t c = static_cast<std::size_t>(x);
    if (c != c0) {
      if (c0 != none && c == c0 + 1) {
        store(c0, lo);
        lo = hi;
      } else {
        if (c0 != none) {
          store(c0, lo);
          store(c0 + 1, hi);
        }
        lo = load(c);
      }
      hi = load(c + 1);
      c0 = c;
    }
    const Hermite h = hermite_basis(x - static_cast<double>(c));
    const double a_ = gA[s], b1 = gI1[s], b2 = gI2[s];
    if (const_dipole) {
      lo.A -= h.h10 * dt * (b1 + 2.0 * A[c] * b2);
      hi.A -= h.h11 * dt * (b1 + 2.0 * A[c + 1] * b2);
    } else {
      lo.A += h.h00 * a_ - h.h10 * dt * (b1 + 2.0 * A[c] * b2);
      hi.A += h.h01 * a_ - h.h11 * dt * (b1 + 2.0 * A[c + 1] * b2);
      lo.dA += h.h10 * dt * a_;
      hi.dA += h.h11 * dt * a_;
    }
    lo.I1 += h.h00 * b1;
    hi.I1 += h.h01 * b1;
    lo.I2 += h.h00 * b2;
    hi.I2 += h.h01 * b2;
  }
  if (c0 != none) {
    store(c0, lo);
    store(c0 + 1, hi);
  }
}

}  // namespace

void ForwardAdjoint::run(Mode mode, const CVec& eps_in, const IrField& ir,
                         const Eigen::MatrixXcd* a_bar, const Eigen::MatrixXd* M,
                         const Eigen::MatrixXd* w, bool with_gradient, Eigen::MatrixXcd* amp_out,
                         Eigen::MatrixXd* model_out, ScaledCostParts* parts, CVec* eps_bar_out,
                         std::vector<double>* A_bar_out, double extra_c2, double extra_c1,
                         ProjectedCostParts* projected) const {
  if (!planned_)
    throw std::logic_error("ForwardAdjoint: no momentum plan (call plan_full/central)");
  const std::size_t n = grid_.size();
  if (eps_in.size() != n) throw std::invalid_argument("ForwardAdjoint: envelope size != grid size");
  const std::size_t ne = energy_.size(), nir = ir.size();
  const auto nd = static_cast<long>(delay_.size());
  const bool two_pass = mode == Mode::kProjected && with_gradient;
  // Adjoint passes per delay: vjp 1, scaled cost 2 (c2 and c1 apart), projected 1 (combined).
  const int K = mode == Mode::kAmplitude    ? 0
                : mode == Mode::kVjp        ? 1
                : mode == Mode::kScaledCost ? (with_gradient ? 2 : 0)
                                            : (with_gradient ? 1 : 0);
  const auto Ku = static_cast<std::size_t>(K);
  const bool const_dipole = dipole_.kind() == DipoleKind::kConstant;
  const bool cost_mode = mode == Mode::kScaledCost || mode == Mode::kProjected;
  // Resolution kernel K (set_energy_resolution), applied per row by blur_row / blur_row_transpose.
  const bool blurred = !blur_first_.empty();

  // Envelope about the shifted carrier (ForwardModel's with_carrier), split into re/im.
  std::vector<double> er(n), ei(n);
  for (std::size_t s = 0; s < n; ++s) {
    const cdouble e =
        shift_phase_t_.empty() ? eps_in[s] : eps_in[s] * std::polar(1.0, shift_phase_t_[s]);
    er[s] = e.real();
    ei[s] = e.imag();
  }

  // Per-energy constants (constructor): bin indices and weights.
  const std::vector<std::size_t>&ilo = bin_lo_, &ihi = bin_hi_;
  const std::vector<cdouble>&clo = bin_wlo_, &chi = bin_whi_;
  std::size_t total_nodes = 0;
  for (const MomentumBlock& b : plan_.blocks) total_nodes += b.nodes.size();
  const double i1_mid = plan_.i1_mid;
  const double i2_sign = central_ ? -1.0 : 1.0;  // sign of the I2/2 term subtracted in phi
  const std::vector<double> ts = grid_.times();
  const Fft fft(n);

  if (amp_out) amp_out->resize(nd, static_cast<Eigen::Index>(ne));
  if (model_out) model_out->resize(nd, static_cast<Eigen::Index>(ne));

  // Two-pass projected cost: the forward pass keeps every delay's amplitudes.
  const std::size_t per_delay = total_nodes * n;  // doubles per gate array
  Eigen::MatrixXcd amp_keep;
  if (two_pass) amp_keep.resize(nd, static_cast<Eigen::Index>(ne));
  double mu = 0.0;

  // Phase store (set_phase_store_limit): the forward pass of the two-pass projected cost keeps
  // the first store_delays delays' phase factors, so the adjoint pass need not form them again
  // (constant dipole: the factors are all its gates need).
  enum class StoreUse { kNone, kFill, kReuse };
  std::size_t phase_arrays = 0;  // sine/cosine pairs per delay
  for (const MomentumBlock& b : plan_.blocks) phase_arrays += 1 + (b.nodes.size() + 1) / 2;
  const std::size_t slot_doubles = 2 * phase_arrays * n;
  std::size_t store_delays = 0;
  std::unique_lock<std::mutex> store_lock(store_.busy, std::defer_lock);
  if (two_pass && const_dipole && store_lock.try_lock()) {
    store_delays = std::min(static_cast<std::size_t>(nd),
                            store_limit_bytes_ / (slot_doubles * sizeof(double)));
    if (store_.size < store_delays * slot_doubles) {
      // The old buffer first (its contents are never reused); the size says 0 until the new
      // one exists, so a failed allocation leaves an empty store, not a size without a buffer.
      store_.size = 0;
      store_.values.reset();
      store_.values.reset(new double[store_delays * slot_doubles]);
      store_.size = store_delays * slot_doubles;
    }
  }

  const int threads = threads_ > 0 ? threads_ : omp_get_max_threads();
  std::vector<Workspace> ws(static_cast<std::size_t>(std::max(threads, 1)));

#pragma omp parallel num_threads(threads)
  {
    Workspace& W = ws[static_cast<std::size_t>(omp_get_thread_num())];
    for (auto* b : {&W.A, &W.u, &W.v, &W.sn, &W.cs, &W.emr, &W.emi, &W.r1, &W.i1}) b->resize(n);
    W.gre.resize(const_dipole ? n : per_delay);  // constant dipole: scratch only
    W.gim.resize(const_dipole ? n : per_delay);
    if (!const_dipole) {
      W.pre.resize(per_delay);
      W.pim.resize(per_delay);
      if (K > 0) W.ddip.resize(per_delay);
    }
    W.psi.resize(n);
    W.psi2.resize(n);
    W.raw.resize(n);
    W.rawbar.resize(n);
    W.psibar.resize(n);
    W.psibar2.resize(n);
    W.acc.resize(ne);
    W.row_a.resize(ne);
    for (auto* b : {&W.mod, &W.bl, &W.g2, &W.g1}) b->resize(ne);
    W.row_bar.resize(Ku * ne);
    W.gA.resize(Ku * n);
    W.gI1.resize(Ku * n);
    W.gI2.resize(Ku * n);
    W.ebr.assign(Ku * n, 0.0);
    W.ebi.assign(Ku * n, 0.0);
    W.bA.assign(Ku * nir, 0.0);
    W.bdA.assign(Ku * nir, 0.0);
    W.bI1.assign(Ku * nir, 0.0);
    W.bI2.assign(Ku * nir, 0.0);

    struct Gates {
      double *re, *im, *pre, *pim, *ddip;
    };
    const Gates gates{W.gre.data(), W.gim.data(), W.pre.data(), W.pim.data(), W.ddip.data()};

    // Gates of every node at delay i: exp(i phi) of Chebyshev node pairs mid +- delta as
    // exp(i phi_mid) exp(-+i delta u), one sine/cosine array per pair plus one per block,
    // written straight into the node slots; times d(p + A) for a non-constant dipole.
    // A, u = I1 - I1_mid and v = +-I2/2 at s + tau_i; returns bounds of |u| and |v|.
    auto load_ir = [&](long i, double* umax, double* vmax) {
      const double tau = delay_[static_cast<std::size_t>(i)];
      double um = 0.0, vm = 0.0;
      ir.sample(ts.data(), n, tau, W.A.data(), W.u.data(), W.v.data());  // A, I1, I2
      for (std::size_t s = 0; s < n; ++s) {
        W.u[s] = W.u[s] - i1_mid;
        // Exact model: phase -p I1 - I2/2; the CMA variant uses the delay-adapted gate
        // -p0 I1 + I2/2 of retrieval/physics/gate.h.
        W.v[s] = i2_sign * 0.5 * W.v[s];
        um = std::max(um, std::abs(W.u[s]));
        vm = std::max(vm, std::abs(W.v[s]));
      }
      if (!std::isfinite(um) || !std::isfinite(vm)) um = vm = 1e300;  // NaN: libm path
      *umax = um;
      *vmax = vm;
    };

    // Loads the IR of delay i, then for each node pair (m, m2 = nb - 1 - m; m2 == m for the
    // middle node of an odd block) of each block points W.ph at exp(-i phi_mid) and
    // exp(-+i delta u) and calls visit(block, first slot of the block, m, m2). The factors are
    // formed in the work arrays, or, for a delay that has a slot in the phase store, in that
    // slot (kFill: the forward pass) or read back from it (kReuse: the adjoint pass, no IR load).
    auto for_each_node_pair = [&](long i, StoreUse use, auto&& visit) {
      double* slot = use != StoreUse::kNone && static_cast<std::size_t>(i) < store_delays
                         ? store_.values.get() + static_cast<std::size_t>(i) * slot_doubles
                         : nullptr;
      const bool form = slot == nullptr || use == StoreUse::kFill;
      double umax = 0.0, vmax = 0.0;
      if (form) load_ir(i, &umax, &vmax);
      // Next pair of arrays (cosines, sines): a store slot's, else the work arrays `re`, `im`.
      auto arrays = [&](std::vector<double>& re, std::vector<double>& im, double** c, double** sn) {
        *c = slot ? slot : re.data();
        *sn = slot ? slot + n : im.data();
        if (slot) slot += 2 * n;
      };
      std::size_t q0 = 0;
      for (const MomentumBlock& b : plan_.blocks) {
        const std::size_t nb = b.nodes.size();
        const double mid = 0.5 * (b.nodes.front() + b.nodes.back());
        double *emr, *emi;
        arrays(W.emr, W.emi, &emr, &emi);
        if (form)
          detail::sincos_affine(W.u.data(), W.v.data(), -mid, -1.0, std::abs(mid) * umax + vmax,
                                emi, emr, n);
        W.ph.emr = emr;
        W.ph.emi = emi;
        for (std::size_t m = 0; m < (nb + 1) / 2; ++m) {
          const double delta = b.nodes[m] - mid;
          double *cs, *sn;
          arrays(W.cs, W.sn, &cs, &sn);
          if (form)
            detail::sincos_affine(W.u.data(), W.v.data(), -delta, 0.0, std::abs(delta) * umax, sn,
                                  cs, n);
          W.ph.cs = cs;
          W.ph.sn = sn;
          visit(b, q0, m, nb - 1 - m);
        }
        q0 += nb;
      }
    };

    auto compute_gates = [&](long i, const Gates& G) {
      double* cre = const_dipole ? G.re : G.pre;  // exp(i phi) of each node
      double* cim = const_dipole ? G.im : G.pim;
      for_each_node_pair(i, StoreUse::kNone,
                         [&](const MomentumBlock&, std::size_t q0, std::size_t m, std::size_t m2) {
                           double* r2 = m2 != m ? cre + (q0 + m2) * n : W.r1.data();
                           double* i2 = m2 != m ? cim + (q0 + m2) * n : W.i1.data();
                           pair_phases(W.ph.emr, W.ph.emi, W.ph.cs, W.ph.sn, cre + (q0 + m) * n,
                                       cim + (q0 + m) * n, r2, i2, n);
                         });
      if (const_dipole) return;
      std::size_t q = 0;  // times d(p + A) of each node (W.A holds delay i)
      for (const MomentumBlock& b : plan_.blocks)
        for (std::size_t m = 0; m < b.nodes.size(); ++m, ++q) {
          const double p = b.nodes[m];
          const std::size_t o = q * n;
          for (std::size_t k = 0; k < n; ++k) {
            const double d = dipole_(p + W.A[k]);
            G.re[o + k] = d * G.pre[o + k];
            G.im[o + k] = d * G.pim[o + k];
            if (K > 0) G.ddip[o + k] = dipole_.derivative(p + W.A[k]);
          }
        }
    };

    // FFT of psi; its bins' share (Lagrange weight of node m) added to the block's energies.
    auto transform_node = [&](const MomentumBlock& b, std::size_t m, CVec& psi) {
      fft.time_to_freq(psi, W.raw);
      for (std::size_t j = b.first; j < b.last; ++j) {
        cdouble val = W.raw[ilo[j]] * clo[j];
        const double f = map_.frac[j];
        if (f != 0.0) val = (1.0 - f) * val + f * (W.raw[ihi[j]] * chi[j]);
        W.acc[j] +=
            b.lagrange(static_cast<Eigen::Index>(j - b.first), static_cast<Eigen::Index>(m)) * val;
      }
    };
    auto finish_row = [&](long i) {
      const cdouble* rot = &row_phase_[static_cast<std::size_t>(i) * ne];
      for (std::size_t j = 0; j < ne; ++j) W.row_a[j] = rot[j] * W.acc[j];
    };

    // psi = eps * gate; FFT; bins and Lagrange sums, node order m, nb - 1 - m, ... per block.
    auto forward_amplitudes = [&](long i, const Gates& G) {
      std::fill(W.acc.begin(), W.acc.end(), cdouble(0.0));
      std::size_t q0 = 0;
      for (const MomentumBlock& b : plan_.blocks) {
        const std::size_t nb = b.nodes.size();
        for (std::size_t r = 0; r < nb; ++r) {
          const std::size_t m = r % 2 == 0 ? r / 2 : nb - 1 - r / 2;
          const std::size_t o = (q0 + m) * n;
          gate_times_envelope(er.data(), ei.data(), G.re + o, G.im + o,
                              reinterpret_cast<double*>(W.psi.data()), n);
          transform_node(b, m, W.psi);
        }
        q0 += nb;
      }
      finish_row(i);
    };

    // The same for a constant dipole (no gate arrays: the adjoint forms them again): each pair's
    // two exit waves straight from exp(i phi_mid) and exp(-+i delta u), no gate arrays (the
    // same products in the same order, so the same numbers).
    auto forward_direct = [&](long i, StoreUse use) {
      std::fill(W.acc.begin(), W.acc.end(), cdouble(0.0));
      for_each_node_pair(i, use,
                         [&](const MomentumBlock& b, std::size_t, std::size_t m, std::size_t m2) {
                           pair_exit_waves(W.ph.emr, W.ph.emi, W.ph.cs, W.ph.sn, er.data(),
                                           ei.data(), reinterpret_cast<double*>(W.psi.data()),
                                           reinterpret_cast<double*>(W.psi2.data()), n);
                           transform_node(b, m, W.psi);
                           if (m2 != m) transform_node(b, m2, W.psi2);
                         });
      finish_row(i);
    };

    // Adjoint of delay i for the Ku rows of W.row_bar (adjoints of a), accumulated into this
    // thread's totals.
    // psi_bar of node m of block b for the acc adjoints accbar: bins, then the inverse FFT.
    auto node_psibar = [&](const MomentumBlock& b, std::size_t m, const cdouble* accbar,
                           CVec& out) {
      // W.rawbar is zero outside this block's bins (cleared again after the FFT, which
      // leaves its input unchanged: out of place).
      for (std::size_t j = b.first; j < b.last; ++j) {
        const cdouble val =
            b.lagrange(static_cast<Eigen::Index>(j - b.first), static_cast<Eigen::Index>(m)) *
            accbar[j];
        const double f = map_.frac[j];
        if (f == 0.0) {
          W.rawbar[ilo[j]] += std::conj(clo[j]) * val;
        } else {
          W.rawbar[ilo[j]] += (1.0 - f) * std::conj(clo[j]) * val;
          W.rawbar[ihi[j]] += f * std::conj(chi[j]) * val;
        }
      }
      fft.freq_to_time(W.rawbar, out);
      for (std::size_t j = b.first; j < b.last; ++j) {
        W.rawbar[ilo[j]] = 0.0;
        W.rawbar[ihi[j]] = 0.0;
      }
    };

    // Adjoint of delay i. With gate arrays G (from compute_gates), or, when `direct` (constant
    // dipole), with each pair's gates formed on the fly from the phase factors (load_ir first).
    auto adjoint = [&](long i, const Gates& G, bool direct, StoreUse use) {
      const double tau = delay_[static_cast<std::size_t>(i)];
      // a = -i e^{i theta} acc  ->  acc_bar = i e^{-i theta} a_bar = conj(-i e^{i theta}) a_bar.
      const cdouble* rot = &row_phase_[static_cast<std::size_t>(i) * ne];
      for (std::size_t j = 0; j < ne; ++j) {
        const cdouble f = std::conj(rot[j]);
        for (std::size_t k = 0; k < Ku; ++k) W.row_bar[k * ne + j] *= f;
      }
      std::fill(W.gA.begin(), W.gA.end(), 0.0);
      std::fill(W.gI1.begin(), W.gI1.end(), 0.0);
      std::fill(W.gI2.begin(), W.gI2.end(), 0.0);
      if (direct) {
        for_each_node_pair(
            i, use, [&](const MomentumBlock& b, std::size_t, std::size_t m, std::size_t m2) {
              if (m2 == m)  // the unpaired middle node: its gate into scratch
                pair_phases(W.ph.emr, W.ph.emi, W.ph.cs, W.ph.sn, W.r1.data(), W.i1.data(),
                            W.gre.data(), W.gim.data(), n);
              for (std::size_t k = 0; k < Ku; ++k) {
                const cdouble* accbar = &W.row_bar[k * ne];
                node_psibar(b, m, accbar, W.psibar);
                const double* pb = reinterpret_cast<const double*>(W.psibar.data());
                if (m2 == m) {
                  node_adjoint(pb, er.data(), ei.data(), W.r1.data(), W.i1.data(), 2.0 * b.nodes[m],
                               i2_sign, &W.ebr[k * n], &W.ebi[k * n], &W.gI1[k * n], &W.gI2[k * n],
                               n);
                } else {
                  node_psibar(b, m2, accbar, W.psibar2);
                  pair_adjoint(W.ph.emr, W.ph.emi, W.ph.cs, W.ph.sn, er.data(), ei.data(), pb,
                               reinterpret_cast<const double*>(W.psibar2.data()), 2.0 * b.nodes[m],
                               2.0 * b.nodes[m2], i2_sign, &W.ebr[k * n], &W.ebi[k * n],
                               &W.gI1[k * n], &W.gI2[k * n], n);
                }
              }
            });
      }
      std::size_t q = 0;
      for (const MomentumBlock& b : plan_.blocks) {
        if (direct) break;
        for (std::size_t m = 0; m < b.nodes.size(); ++m, ++q) {
          const double p = b.nodes[m];
          const double* gr = G.re + q * n;
          const double* gi = G.im + q * n;
          for (std::size_t k = 0; k < Ku; ++k) {
            node_psibar(b, m, &W.row_bar[k * ne], W.psibar);
            const double* pb = reinterpret_cast<const double*>(W.psibar.data());
            node_adjoint(pb, er.data(), ei.data(), gr, gi, 2.0 * p, i2_sign, &W.ebr[k * n],
                         &W.ebi[k * n], &W.gI1[k * n], &W.gI2[k * n], n);
            if (!const_dipole) {
              double* gA = &W.gA[k * n];
              const double* c = G.pre + q * n;
              const double* sn = G.pim + q * n;
              const double* dd = G.ddip + q * n;
              for (std::size_t s = 0; s < n; ++s) {
                // 2 Re(conj(psi_bar) eps d' e^{i phi})
                const double zr = er[s] * c[s] - ei[s] * sn[s];
                const double zi = er[s] * sn[s] + ei[s] * c[s];
                gA[s] += 2.0 * dd[s] * (pb[2 * s] * zr + pb[2 * s + 1] * zi);
              }
            }
          }
        }
      }
      // Through IrField::at at s + tau onto the stored IR arrays.
      for (std::size_t k = 0; k < Ku; ++k) {
        const std::size_t ko = k * n, kr = k * nir;
        hermite_adjoint(ir, ts.data(), n, tau, const_dipole, &W.gA[ko], &W.gI1[ko], &W.gI2[ko],
                        {&W.bA[kr], &W.bdA[kr], &W.bI1[kr], &W.bI2[kr]});
      }
    };

    // The cost terms (and for scaled_cost their a_bar rows, for vjp the given a_bar) of delay
    // i from its amplitudes in W.row_a, added to this thread's sums.
    auto cost_row = [&](long i) {
      const auto ii = static_cast<Eigen::Index>(i);
      if (cost_mode && blurred) {
        // m = K |a|^2; the adjoints of c2, c1 w.r.t. m go back through K^T onto |a|^2.
        for (std::size_t j = 0; j < ne; ++j) W.mod[j] = std::norm(W.row_a[j]);
        blur_row(W.mod.data(), W.bl.data());
        for (std::size_t j = 0; j < ne; ++j) {
          const auto jj = static_cast<Eigen::Index>(j);
          const double m = W.bl[j], wij = (*w)(ii, jj), Mij = (*M)(ii, jj);
          W.c2 += wij * m * m;
          W.c1 += -2.0 * wij * Mij * m;
          W.c0 += wij * Mij * Mij;
          if (model_out) (*model_out)(ii, jj) = m;
          W.g2[j] = 2.0 * wij * m;
          W.g1[j] = -2.0 * wij * Mij;
        }
        if (K == 2) {
          blur_row_transpose(W.g2.data(), W.mod.data());
          for (std::size_t j = 0; j < ne; ++j) W.row_bar[j] = W.mod[j] * W.row_a[j];
          blur_row_transpose(W.g1.data(), W.mod.data());
          for (std::size_t j = 0; j < ne; ++j) W.row_bar[ne + j] = W.mod[j] * W.row_a[j];
        }
      } else if (cost_mode) {
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
        for (std::size_t j = 0; j < ne; ++j)
          W.row_bar[j] = (*a_bar)(ii, static_cast<Eigen::Index>(j));
      }
    };

    // Two-pass projected cost: the forward pass runs over the delays in descending order, so
    // that the adjoint pass (ascending) starts on the phase factors stored last, still in the
    // cache; its cost sums are taken afterwards in ascending order (the order of one pass, so
    // the same numbers).
#pragma omp for schedule(static)
    for (long r = 0; r < nd; ++r) {
      const long i = two_pass ? nd - 1 - r : r;
      if (const_dipole) {
        forward_direct(i, two_pass ? StoreUse::kFill : StoreUse::kNone);
      } else {
        compute_gates(i, gates);
        forward_amplitudes(i, gates);
      }
      const auto ii = static_cast<Eigen::Index>(i);
      if (amp_out)
        for (std::size_t j = 0; j < ne; ++j)
          (*amp_out)(ii, static_cast<Eigen::Index>(j)) = W.row_a[j];
      if (two_pass) {
        for (std::size_t j = 0; j < ne; ++j)
          amp_keep(ii, static_cast<Eigen::Index>(j)) = W.row_a[j];
        continue;
      }
      cost_row(i);
      if (K == 0) continue;
      adjoint(i, gates, const_dipole, StoreUse::kNone);
    }

    if (two_pass) {
#pragma omp for schedule(static)
      for (long i = 0; i < nd; ++i) {
        for (std::size_t j = 0; j < ne; ++j)
          W.row_a[j] = amp_keep(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j));
        cost_row(i);
      }
      // mu* from the totals, reduced in thread order (deterministic for a thread count).
#pragma omp single
      {
        double c2 = extra_c2, c1 = extra_c1;
        for (const Workspace& V : ws) {
          c2 += V.c2;
          c1 += V.c1;
        }
        mu = c2 > 0 ? -c1 / (2.0 * c2) : 0.0;
      }
      // Adjoint of mu^2 c2 + mu c1 at fixed mu: a_bar = mu^2 2 w |a|^2 a - mu 2 w M a.
#pragma omp for schedule(static)
      for (long i = 0; i < nd; ++i) {
        if (!const_dipole) compute_gates(i, gates);
        const auto ii = static_cast<Eigen::Index>(i);
        if (blurred) {
          for (std::size_t j = 0; j < ne; ++j)
            W.mod[j] = std::norm(amp_keep(ii, static_cast<Eigen::Index>(j)));
          blur_row(W.mod.data(), W.bl.data());
          for (std::size_t j = 0; j < ne; ++j) {
            const auto jj = static_cast<Eigen::Index>(j);
            const double wij = (*w)(ii, jj);
            W.g2[j] = mu * mu * 2.0 * wij * W.bl[j] - mu * 2.0 * wij * (*M)(ii, jj);
          }
          blur_row_transpose(W.g2.data(), W.mod.data());
          for (std::size_t j = 0; j < ne; ++j)
            W.row_bar[j] = W.mod[j] * amp_keep(ii, static_cast<Eigen::Index>(j));
        } else {
          for (std::size_t j = 0; j < ne; ++j) {
            const auto jj = static_cast<Eigen::Index>(j);
            const cdouble a = amp_keep(ii, jj);
            const double wij = (*w)(ii, jj);
            W.row_bar[j] = (mu * mu * 2.0 * wij * std::norm(a) - mu * 2.0 * wij * (*M)(ii, jj)) * a;
          }
        }
        adjoint(i, gates, const_dipole, StoreUse::kReuse);
      }
    }
  }

  // Reduce in thread order (deterministic for a fixed thread count).
  double c2 = 0.0, c1 = 0.0, c0 = 0.0;
  for (const Workspace& W : ws) {
    c2 += W.c2;
    c1 += W.c1;
    c0 += W.c0;
  }
  if (parts) {
    parts->c2 = c2;
    parts->c1 = c1;
    parts->c0 = c0;
  }
  if (projected) {
    projected->c2 = c2;
    projected->c1 = c1;
    projected->c0 = c0;
    if (!two_pass) mu = c2 + extra_c2 > 0 ? -(c1 + extra_c1) / (2.0 * (c2 + extra_c2)) : 0.0;
    projected->mu = mu;
    projected->eps_bar.clear();
    projected->A_bar.clear();
  }
  if (K == 0) return;
  std::vector<CVec> eb(Ku, CVec(n, 0.0));
  std::vector<std::vector<double>> bA(Ku, std::vector<double>(nir, 0.0));
  std::vector<std::vector<double>> bdA = bA, bI1 = bA, bI2 = bA;
  for (const Workspace& W : ws) {
    if (W.ebr.empty()) continue;
    for (std::size_t k = 0; k < Ku; ++k) {
      for (std::size_t s = 0; s < n; ++s) eb[k][s] += cdouble(W.ebr[k * n + s], W.ebi[k * n + s]);
      for (std::size_t r = 0; r < nir; ++r) {
        bA[k][r] += W.bA[k * nir + r];
        bdA[k][r] += W.bdA[k * nir + r];
        bI1[k][r] += W.bI1[k * nir + r];
        bI2[k][r] += W.bI2[k * nir + r];
      }
    }
  }
  if (!shift_phase_t_.empty())
    for (auto& e : eb)
      for (std::size_t s = 0; s < n; ++s) e[s] *= std::polar(1.0, -shift_phase_t_[s]);
  if (mode == Mode::kVjp) {
    if (eps_bar_out) *eps_bar_out = std::move(eb[0]);
    if (A_bar_out) *A_bar_out = ir_samples_adjoint(ir, bA[0], bdA[0], bI1[0], bI2[0]);
  } else if (mode == Mode::kProjected) {
    projected->eps_bar = std::move(eb[0]);
    projected->A_bar = ir_samples_adjoint(ir, bA[0], bdA[0], bI1[0], bI2[0]);
  } else {
    parts->eps_bar2 = std::move(eb[0]);
    parts->eps_bar1 = std::move(eb[1]);
    parts->A_bar2 = ir_samples_adjoint(ir, bA[0], bdA[0], bI1[0], bI2[0]);
    parts->A_bar1 = ir_samples_adjoint(ir, bA[1], bdA[1], bI1[1], bI2[1]);
  }
}

}  // namespace sw
