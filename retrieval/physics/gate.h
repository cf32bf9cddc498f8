#pragma once
// The unit-modulus CMA phase gate used by the CMA engines, and the conversions between its
// phase and the IR vector potential.
//
// In the central-momentum approximation (Mairesse and Quere, PRA 71, 011401 (2005)) the
// streaking amplitude is a(W, tau) ~ Int ds eps(s) G(s + tau) exp(i w s) with a unit-modulus
// gate G(t) = exp(i phi(t)). The textbook gate puts p -> p0 in the Volkov phase,
// phi = -p0 I1 - I2/2 (d phi/dt = p0 A + A^2/2). We use instead the delay-adapted form
//     phi(t) = -p0 I1(t) + I2(t)/2,   I1 = Int_t^inf A,  I2 = Int_t^inf A^2,
//     d phi / dt = p0 A - A^2 / 2:
// the electrons seen at delay tau are not at p0 but at p_f = p0 - A(tau) (classical
// streaking, p_f = p_i - A, with p_i ~ p0 the field-free momentum), and their exact phase
// rate p_f A + A^2/2 at t = tau is p0 A - A^2/2. The textbook gate therefore shifts the
// spectrum by -(p0 A + A^2/2) where the data shift by -(p0 A - A^2/2) (= (p0 - A)^2/2 - W0),
// an error of A^2 (1.1 eV, 9 % of the shift, at 5e12 W/cm^2 and 73 eV); a retrieval that
// fits the data with it returns A(t) wrong by -A^2/p0, i.e. the two half-cycles of A
// unequal by ~2 A0/p0 and the peak |A| ~9 % high (measured on direct-quadrature scans of
// synthetic/, docs/validation.md). Inverting on the physical branch (A -> 0 with the rate):
//     A = p0 - sqrt(p0^2 - 2 d phi/dt).
// (The dipole factor d(p0 + A) of retrieval/physics/forward_model.h is taken as constant over the
// streaking range: |G| = 1.)
//
// Storage. The gate is kept as complex samples on a uniform table whose step is the XUV grid
// step dt and which covers every time s_n + tau_j the exit waves need (s_n the XUV grid,
// tau_j the delays), with a margin of one node each side for the cubic stencil. The table's
// origin is tied to the first delay, so delay j starts at table node i_j + frac f_j with
//     i_j + f_j = 1 + (tau_j - tau_0) / dt.
// All samples of one delay share the fraction f_j, so G(s_n + tau_j) is a 4-tap filter of the
// table with the cubic Lagrange weights of f_j (an exact shift when f_j = 0: every delay of a
// uniform axis whose step is an integer multiple of dt). The tables (i_j, weights) are built
// once. The transpose of that filter scatters per-sample updates back onto the table, which
// is then renormalised to |G| = 1 on the touched nodes: for a pointwise update that is exactly
// the phase increment arg(1 + dG/G).
//
// Why complex samples at the XUV step rather than the phase on a coarse grid: evaluating
// exp(i phi) (or arg) per sample and delay costs about five times the two FFTs a delay needs;
// the 4-tap complex filter costs a fraction of one. The table is exp(i phi) of a smooth phase
// after every smooth(), and between two smooth() calls the engines' updates keep |G| = 1.
// Interpolation error of the table (|d phi/dt| <= 0.5 rad/a.u., dt = 16 as): < 3e-4.
//
// Smoothness. The gate is smooth on the IR time scale; smooth() projects the table onto
// exp(i phi_s) with phi_s a cubic B-spline of knot step h (~ T_IR / 32, error ~1e-4 rad for an
// IR phase of 10 rad amplitude): weighted least squares of the unwrapped table phase, weights
// = how strongly the data constrain each node (coverage()), plus a small second-difference
// penalty on the coefficients (1e-3 of the largest per-node weight) that extends the phase
// linearly where the data say nothing. Unwrapping needs |d phi/dt| dt < pi, i.e. a streaking
// shift below half the grid's bandwidth, which any trace the grid can represent satisfies.
// The same spline gives d phi/dt analytically for the vector potential (no finite
// differences, no extra smoothing).

#include <functional>
#include <span>
#include <vector>

#include "retrieval/core/grid.h"
#include "retrieval/physics/ir_field.h"

namespace sw {

/// A cubic B-spline phi(t) = sum_k c_k beta3((t - t0)/h - k + 1) on uniform knots (a.u.).
struct SmoothPhase {
  double t0 = 0.0;  ///< time of knot index 1 (coefficient k peaks at t0 + (k-1) h)
  double h = 1.0;   ///< knot step (a.u.)
  std::vector<double> coef;
  double value(double t) const;       ///< phi(t) (rad); clamped to the spline's range
  double derivative(double t) const;  ///< d phi / dt (rad per a.u. of time)
  double t_first() const { return t0; }
  double t_last() const;  ///< last time the spline covers
};

class PhaseGate {
 public:
  PhaseGate() = default;
  /// Table for the XUV grid `xuv_grid`, the ascending delays, and smooth-phase knots of step
  /// knot_step_au (clamped to >= the grid step). Starts as G = 1.
  PhaseGate(const TimeGrid& xuv_grid, const std::vector<double>& delay_au, double knot_step_au);

  std::size_t size() const { return table_.size(); }
  std::size_t samples() const { return n_; }  ///< XUV grid size N
  std::size_t num_delays() const { return first_.size(); }
  double dt() const { return dt_; }
  double time(std::size_t m) const { return t0_ + static_cast<double>(m) * dt_; }
  double knot_step() const { return h_; }
  /// True when every delay is an exact shift of the table (all f_j = 0).
  bool exact_shifts() const { return exact_all_; }
  bool exact_shift(std::size_t j) const { return exact_[j] != 0; }
  /// Table node of G(s_0 + tau_j) for an exact shift (else the node left of it).
  std::size_t first_node(std::size_t j) const { return first_[j]; }
  const CVec& table() const { return table_; }
  CVec& table() { return table_; }

  /// g[n] = G(s_n + tau_j), n = 0..N-1.
  void sample(std::size_t j, cdouble* g) const;
  /// Pointer to the N table samples of delay j when it is an exact shift (no copy), else null.
  const cdouble* exact_samples(std::size_t j) const {
    return exact_[j] ? table_.data() + first_[j] : nullptr;
  }
  /// The exit wave psi[n] = eps[n] G(s_n + tau_j) in one pass; returns the gate samples used
  /// (the table itself for an exact shift, else `g` filled with them). With a support
  /// [lo, hi) the cubic interpolation is used there and linear interpolation elsewhere, where
  /// the caller's eps is weak (CmaProblem::support: |eps| < 1 % of its peak); the linear
  /// gate's error (dt^2/8) |G''| < 2e-2 then changes psi by < 2e-4 of the peak amplitude.
  /// The same samples are returned, so forward and transpose stay consistent.
  const cdouble* sample_product(std::size_t j, const cdouble* eps, cdouble* g, cdouble* psi,
                                std::size_t lo = 0,
                                std::size_t hi = static_cast<std::size_t>(-1)) const;
  /// acc[m] += (S_j^T u)[m]: the transpose of sample(j) applied to u (acc has size()),
  /// restricted to the samples n in [lo, hi) (default: all).
  void scatter(std::size_t j, const cdouble* u, cdouble* acc, std::size_t lo = 0,
               std::size_t hi = static_cast<std::size_t>(-1)) const;
  /// table += S_j^T u over the samples [lo, hi), then |G| = 1 on the nodes that touched.
  void update(std::size_t j, const cdouble* u, std::size_t lo = 0,
              std::size_t hi = static_cast<std::size_t>(-1));
  /// |G| = 1 on nodes [first, last).
  void normalize(std::size_t first, std::size_t last);
  void normalize() { normalize(0, size()); }
  /// Multiplies the gate by exp(i a) (global-phase bookkeeping).
  void rotate(double a);

  /// table[m] = exp(i phi(time(m))).
  void set_phase(const std::function<double(double)>& phi);
  /// The table node nearest G(s_0 + tau_j) (the middle pair of the cubic stencil for a delay
  /// between nodes): where delay j's samples start in coverage().
  std::size_t nearest_node(std::size_t j) const {
    return exact_[j] ? first_[j] : first_[j] + (weights_[4 * j + 2] > weights_[4 * j + 1] ? 2 : 1);
  }
  /// w[m] = sum_j |eps(time(m) - tau_j)|^2 (nearest node, the delays summed in order): how
  /// strongly node m is probed. Accumulated node block by node block in registers.
  void coverage(const CVec& eps, std::vector<double>& w) const;
  /// Weighted least-squares cubic B-spline fit of the unwrapped table phase (see header).
  SmoothPhase fit_phase(const std::vector<double>& weight) const;
  /// fit_phase of each of `gates` with one weight, the same numbers: the gates must share
  /// their geometry (size, time(0), dt, knot step; throws std::invalid_argument otherwise), so
  /// that the normal matrix, which depends on the weights alone, is assembled and factored
  /// once (the momentum nodes' gates of the banded CMA, every iteration).
  static std::vector<SmoothPhase> fit_phases(std::span<const PhaseGate> gates,
                                             const std::vector<double>& weight);
  /// table = exp(i phi_s) with phi_s = fit_phase(weight).
  SmoothPhase smooth(const std::vector<double>& weight);

 private:
  std::size_t n_ = 0;
  double dt_ = 1.0, t0_ = 0.0, h_ = 1.0;
  CVec table_;
  std::vector<std::size_t> first_;  // i_j - 1 (first node of the 4-tap stencil) or i_j if exact
  std::vector<double> weights_;     // 4 per delay (cubic Lagrange)
  std::vector<double> frac_;        // f_j (linear interpolation off the support)
  std::vector<unsigned char> exact_;
  bool exact_all_ = true;
};

/// v[i] <- v[i] / |v[i]| (vectorised; a sample is never exactly zero here: the gate is a unit
/// number plus a small update).
void normalize_to_unit(cdouble* v, std::size_t n);

/// A(t) from the gate-phase rate: A = p0 - sqrt(p0^2 - 2 rate) (rate > p0^2/2 gives p0).
double vector_potential_from_phase_rate(double rate, double p0_au);
/// The (delay-adapted) CMA gate phase -p0 I1(t) + I2(t)/2 of an IR field at time t.
double cma_gate_phase(const IrField& ir, double p0_au, double t_au);
/// IR field sampled from a smooth gate phase on [t_first, t_last] with step dt (a.u.).
IrField ir_from_gate_phase(const SmoothPhase& phase, double p0_au, double t_first_au,
                           double t_last_au, double dt_au);

}  // namespace sw
