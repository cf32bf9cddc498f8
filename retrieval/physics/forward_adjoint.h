#pragma once
// The SFA streaking forward model of retrieval/physics/forward_model.h together with its adjoint
// (reverse-mode derivative written by hand), for gradient-based reconstruction.
//
// Forward (identical arithmetic to sw::ForwardModel for the same momentum-block plan):
//   a(W_j, tau_i) = -i exp(i (W_j + Ip) tau_i - i p_j I1_mid)
//                   x sum_m L_jm  FFT_s[ eps(s) d(p_m + A) exp(-i p_m (I1 - I1_mid) - i I2/2)
//                   ](w_j)
// with A, I1, I2 evaluated at s + tau_i by IrField::at (cubic Hermite between the IR samples),
// L_jm the Chebyshev-Lagrange weights of the block holding energy j (MomentumBlockPlan), and
// the FFT scaled to Int ds (.) exp(i w s) (retrieval/core/grid.h). The CMA is the plan with one
// node p0 for every energy and I1_mid = 0 (Mairesse and Quere, PRA 71, 011401 (2005)).
//
// Adjoint convention. For a real function C of the complex amplitudes, the adjoint ("bar") of
// a complex quantity z is defined by  dC = 2 Re sum conj(z_bar) dz  (z_bar = dC/d conj(z)), and
// of a real quantity x by dC = sum x_bar dx. Given a_bar, vjp() returns eps_bar (the adjoint of
// the XUV envelope samples) and A_bar (the adjoint of the IR vector-potential samples A_i of the
// IrField). The chain runs backwards through: the Lagrange sums and bin weights, one inverse
// FFT per node and delay (the conjugate transpose of the forward FFT), the gate
//   dG/dA = d'(p + A) e^{i phi},  dG/dI1 = -i p G,  dG/dI2 = -i G / 2,
// the Hermite interpolation of IrField::at at s + tau (linear in the stored samples A_i,
// dA/dt_i, I1_i, I2_i; I2's Hermite slopes are -A_i^2), IrField's cumulative integrals
// I1_i = sum_{k >= i} increments (reverse cumulative sum: its adjoint is a forward prefix sum;
// I2's increments are quadratic in A), and the fourth-order finite-difference derivative
// dA/dt_i (a fixed linear stencil). These are the exact linear maps of ir_field.cpp: a gradient
// test against central differences of sw::ForwardModel guards the correspondence.
//
// The fitting objective of the full-model engine is evaluated in one fused pass:
//   C(mu) = sum_ij w_ij (mu |a_ij|^2 - M_ij)^2 = c2 mu^2 + c1 mu + c0,
// whose coefficients c2 = sum w |a|^4 and c1 = -2 sum w M |a|^2 (and their gradients) are sums
// over delays; the optimal scale mu* = -c1 / (2 c2) is then eliminated (variable projection,
// G. H. Golub and V. Pereyra, SIAM J. Numer. Anal. 10, 413 (1973)). Because dC/dmu = 0 at mu*,
// the gradient of the projected cost C(mu*(theta), theta) equals the partial gradient at fixed
// mu*: grad C = mu*^2 grad c2 + mu* grad c1. The engine may add further terms quadratic in mu
// before eliminating it.
//
// Spectrometer resolution (set_energy_resolution): the model counts of each delay row are
// convolved along energy with a normalised Gaussian, m_ij = sum_k K_jk |a_ik|^2, before they
// enter the cost; the adjoint applies K^T (a_bar_ik = (K^T dC/dm)_k a_ik). Without it the
// model's spectral fringes are sharper than the measured ones, and a fit compensates with
// weaker satellites (a held-out validation scan with 17 % satellites at dE = 1 eV came out at
// 6 %; docs/validation.md).
//
// Threads: delays are split over OpenMP threads; each thread has its own work buffers
// (allocated once per call, none inside the per-delay loop) and accumulators, reduced in a
// fixed order, so results are deterministic for a given thread count.

#include <cstddef>
#include <memory>
#include <mutex>
#include <vector>

#include <Eigen/Core>

#include "retrieval/core/grid.h"
#include "retrieval/physics/dipole.h"
#include "retrieval/physics/forward_model.h"
#include "retrieval/physics/ir_field.h"

namespace sw {

/// Coefficients of C(mu) = c2 mu^2 + c1 mu + c0 and the adjoints of c2 and c1.
struct ScaledCostParts {
  double c2 = 0.0;                     ///< sum w |a|^4
  double c1 = 0.0;                     ///< -2 sum w M |a|^2
  double c0 = 0.0;                     ///< sum w M^2 (independent of the fields)
  CVec eps_bar2, eps_bar1;             ///< adjoints of c2, c1 w.r.t. the XUV envelope
  std::vector<double> A_bar2, A_bar1;  ///< adjoints of c2, c1 w.r.t. the IR samples A_i
};

/// The data part of the cost with the scale eliminated (ForwardAdjoint::projected_cost).
struct ProjectedCostParts {
  double c2 = 0.0;  ///< sum w |a|^4 (data part only)
  double c1 = 0.0;  ///< -2 sum w M |a|^2
  double c0 = 0.0;  ///< sum w M^2
  double mu = 0.0;  ///< mu* = -(c1 + extra_c1) / (2 (c2 + extra_c2)); 0 when that c2 <= 0
  CVec eps_bar;     ///< adjoint of mu*^2 c2 + mu* c1 (mu* held fixed) w.r.t. the XUV envelope
  std::vector<double> A_bar;  ///< the same w.r.t. the IR samples A_i
};

class ForwardAdjoint {
 public:
  /// Model for fixed axes: XUV grid and carrier (a.u.), delays (ascending) and energies (a.u.).
  /// threads: OpenMP threads over delays (0 = OpenMP default). Throws std::invalid_argument
  /// when an energy lies outside the grid's band (as ForwardModel does).
  ForwardAdjoint(double ionization_energy_au, DipoleModel dipole, TimeGrid grid, double carrier_au,
                 std::vector<double> delay_au, std::vector<double> energy_au, int threads = 0);

  /// Full-model momentum blocks exactly as sw::ForwardModel (kFull, same options) builds them
  /// for this IR field. The plan stays fixed until set again, so the model is one smooth
  /// function of the fields between plan updates.
  void plan_full(const IrField& ir, const ForwardModelOptions& options);
  /// The CMA: one node p0 for every energy, I1_mid = 0 (what ForwardModel kCentral computes).
  void plan_central(double p0_au);
  const MomentumBlockPlan& plan() const { return plan_; }
  bool is_central() const { return central_; }
  /// True when, for this IR field, the interpolation bound of every block of the current
  /// full-model plan (chebyshev_interpolation_bound of its phase excursion
  /// |(p - p_mid)(I1 - I1_mid)| and node count) stays within that of the plan's
  /// chebyshev_nodes over (1 + slack) x max_block_phase_rad: the accuracy the blocks were sized
  /// for, loosened by the slack (for blocks of max_block_phase_rad with chebyshev_nodes each,
  /// the excursion below (1 + slack) x max_block_phase_rad). Always true for the CMA plan.
  bool plan_covers(const IrField& ir, double slack) const;

  const TimeGrid& grid() const { return grid_; }
  double carrier_au() const { return carrier_; }
  const std::vector<double>& delays() const { return delay_; }
  const std::vector<double>& energies() const { return energy_; }
  /// Signed FFT bin (about the carrier, after the carrier shift) of energy j when the energy
  /// axis falls exactly on bins, else the lower bin.
  const EnergyBinMap& energy_bins() const { return map_; }

  /// Spectrometer resolution: Gaussian FWHM (a.u., >= 0) applied to the model counts of the
  /// cost modes (scaled_cost, projected_cost and their `model` output); 0 = none. A FWHM
  /// below a third of the energy step changes nothing and is ignored. amplitude() and vjp()
  /// are unaffected (amplitudes are coherent; the resolution acts on counts).
  void set_energy_resolution(double fwhm_au);
  double energy_resolution_au() const { return resolution_fwhm_; }

  /// Memory (bytes) that projected_cost may keep between its forward and adjoint pass for
  /// the gate phase factors of a constant dipole (one sine and cosine array per node pair and
  /// block per delay), so that the adjoint pass reads them instead of evaluating them again.
  /// Delays beyond the limit are recomputed; 0 = recompute all (same numbers either way).
  /// The buffer is kept between calls (no allocation per evaluation).
  void set_phase_store_limit(std::size_t bytes) { store_limit_bytes_ = bytes; }
  std::size_t phase_store_limit() const { return store_limit_bytes_; }
  /// Applies the resolution kernel to every row of counts (delays x energies), in place.
  void blur_counts(Eigen::MatrixXd& counts) const;
  /// The transpose K^T on every row, in place (adjoints of blurred counts -> of |a|^2).
  void blur_counts_transpose(Eigen::MatrixXd& counts) const;

  /// a(W_j, tau_i) for envelope eps (grid samples about carrier_au) and IR field ir.
  Eigen::MatrixXcd amplitude(const CVec& eps, const IrField& ir) const;

  /// Vector-Jacobian product: eps_bar (grid size) and A_bar (ir.size()) such that
  /// 2 Re sum_ij conj(a_bar_ij) da_ij = 2 Re sum_s conj(eps_bar_s) d eps_s + sum_k A_bar_k dA_k.
  void vjp(const CVec& eps, const IrField& ir, const Eigen::MatrixXcd& a_bar, CVec* eps_bar,
           std::vector<double>* A_bar) const;

  /// Fused evaluation of the weighted, scaled least-squares parts (see the header comment):
  /// measured M and weights w (delays x energies). When `model` is not null it receives |a|^2.
  /// Gradients are computed only when `with_gradient`.
  void scaled_cost(const CVec& eps, const IrField& ir, const Eigen::MatrixXd& measured,
                   const Eigen::MatrixXd& weight, bool with_gradient, ScaledCostParts* out,
                   Eigen::MatrixXd* model = nullptr) const;

  /// The same cost with the scale eliminated inside: the caller's further terms quadratic in
  /// mu enter through extra_c2 and extra_c1 (added to c2 and c1 before mu* = -c1 / (2 c2)), and
  /// the gradient comes back combined, eps_bar = mu*^2 eps_bar2 + mu* eps_bar1 (likewise A_bar),
  /// for the data part. Two passes over the delays: the forward pass (descending delays) keeps
  /// the amplitudes and, for a constant dipole, the gate's phase factors in the phase store
  /// (set_phase_store_limit); the adjoint pass (after mu*, ascending) reads them (or, beyond the
  /// store and for other dipoles, forms each delay's gates again) and does one adjoint FFT per
  /// node and delay with the combined a_bar instead of scaled_cost's two
  /// (docs/performance.md). Same numbers as scaled_cost combined by the caller, to rounding.
  void projected_cost(const CVec& eps, const IrField& ir, const Eigen::MatrixXd& measured,
                      const Eigen::MatrixXd& weight, double extra_c2, double extra_c1,
                      bool with_gradient, ProjectedCostParts* out,
                      Eigen::MatrixXd* model = nullptr) const;

 private:
  struct Workspace;
  // Throws std::invalid_argument naming `method` unless M and w are delays x energies.
  void check_cost_inputs(const Eigen::MatrixXd& M, const Eigen::MatrixXd& w,
                         const char* method) const;
  enum class Mode { kAmplitude, kVjp, kScaledCost, kProjected };
  void run(Mode mode, const CVec& eps, const IrField& ir, const Eigen::MatrixXcd* a_bar,
           const Eigen::MatrixXd* measured, const Eigen::MatrixXd* weight, bool with_gradient,
           Eigen::MatrixXcd* amp_out, Eigen::MatrixXd* model_out, ScaledCostParts* parts,
           CVec* eps_bar, std::vector<double>* A_bar, double extra_c2, double extra_c1,
           ProjectedCostParts* projected) const;

  double ip_;
  DipoleModel dipole_;
  TimeGrid grid_;
  double carrier_;
  std::vector<double> delay_, energy_;
  int threads_;
  EnergyBinMap map_;
  std::vector<double> shift_phase_t_;  // carrier-shift phase per time sample (0 when exact)
  // Per energy (fixed axes): FFT bins below/above and their weights dt exp(i w_b t_0), momentum.
  std::vector<std::size_t> bin_lo_, bin_hi_;
  std::vector<cdouble> bin_wlo_, bin_whi_;
  std::vector<double> momentum_;
  // Per delay and energy (fixed by the axes and the plan's I1_mid): -i exp(i theta_ij),
  // theta_ij = (W_j + Ip) tau_i - p_j I1_mid; delays x energies, row-major.
  std::vector<cdouble> row_phase_;
  void set_row_phases();
  // Phase factors kept between the two passes of projected_cost (set_phase_store_limit). A
  // call that finds the store busy (another thread inside the same object) recomputes. Not
  // initialised (tens of MB): a forward pass writes every slot its adjoint pass reads, and a
  // larger plan replaces the buffer without copying it.
  struct PhaseStore {
    PhaseStore() = default;
    PhaseStore(const PhaseStore&) {}
    PhaseStore& operator=(const PhaseStore&) { return *this; }
    std::mutex busy;
    std::unique_ptr<double[]> values;
    std::size_t size = 0;
  };
  mutable PhaseStore store_;
  std::size_t store_limit_bytes_ = std::size_t{64} << 20;
  MomentumBlockPlan plan_;
  double cover_bound_phase_ = 2.0;  // plan_covers: ForwardModelOptions::max_block_phase_rad
  int cover_bound_nodes_ = 10;      // and chebyshev_nodes of the plan
  bool central_ = false;
  bool planned_ = false;
  void blur_row(const double* in, double* out) const;            // out = K in (ne each)
  void blur_row_transpose(const double* in, double* out) const;  // out = K^T in
  // Resolution kernel: row j of K has weights blur_w_[j] on energies blur_first_[j] + t.
  double resolution_fwhm_ = 0.0;
  std::vector<std::size_t> blur_first_;
  std::vector<std::vector<double>> blur_w_;
};

/// Adjoint of IrField's sample-to-integral maps: given adjoints of the stored arrays
/// (A_i, dA/dt_i, I1_i, I2_i) of `ir`, returns the total adjoint of the samples A_i.
/// (Exposed for tests; the forward maps are those of retrieval/physics/ir_field.cpp.)
std::vector<double> ir_samples_adjoint(const IrField& ir, std::vector<double> bar_A,
                                       std::vector<double> bar_dA, std::vector<double> bar_I1,
                                       std::vector<double> bar_I2);

}  // namespace sw
