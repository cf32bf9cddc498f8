#pragma once
// The SFA streaking amplitude of DESIGN.md by direct quadrature, with the full momentum
// dependence and independently of retrieval/physics/forward_model.cpp (no FFT, no CMA gate, no
// IrField interpolation):
//
//   a(W, tau) = -i Int dt E_X(t - tau) d(p + A(t)) exp(i phi_V(p, t)) exp(i (W + Ip) t),
//   phi_V(p, t) = -p I1(t) - I2(t)/2,  p = sqrt(2 W).
//
// With s = t - tau and E_X(s) = eps(s) exp(-i Omega_c s) (eps: envelope about the carrier):
//
//   a(W, tau) = -i exp(i (W + Ip) tau) Int ds eps(s) d(p + A(s + tau))
//                 exp(i [(W + Ip - Omega_c) s - p I1(s + tau) - I2(s + tau)/2]).
//
// The integral is taken in this rotating frame by the trapezoidal rule on the XUV grid's own
// nodes s_k (no interpolation of the envelope). For an integrand that decays at both ends the
// trapezoidal sum equals Sum_m F(2 pi m / h), F being the integrand's Fourier transform, so it
// is exact up to the aliased terms m != 0 (the Poisson summation formula; e.g. L. N. Trefethen
// and J. A. C. Weideman, SIAM Review 56, 385 (2014)). They vanish when
//   2 pi / h > |W + Ip - Omega_c|max + B + g,
// B = half-width of the XUV spectrum about the carrier, g = spectral spread of the gate
// d(p + A) exp(i phi_V) ~ p A0 + A0^2/2 + a few IR frequencies. nyquist_step() gives that
// bound; the generator chooses the grid with it (synthetic/xuv_source.h). The step is set by
// the detuning and the Volkov phase rate, not by the XUV carrier.
//
// A is the analytic Gaussian vector potential at every node; I1, I2 come from VolkovTable.
// Nodes where |eps| < node_threshold * max|eps| are skipped. On a uniform energy axis the
// phasors are advanced from one energy to the next by a rotation (exactly recomputed every 32
// energies; see the .cpp), so the cost per term is a few multiplications, not a sine and a
// cosine. OpenMP over delays; per-thread buffers are allocated once.

#include <optional>
#include <vector>

#include <Eigen/Core>

#include "retrieval/physics/dipole.h"
#include "retrieval/physics/xuv_field.h"
#include "synthetic/volkov_table.h"

namespace sw::synthetic {

struct QuadratureOptions {
  double node_threshold = 1e-10;  ///< skip nodes with |eps| below this fraction of the peak
  int threads = 0;                ///< OpenMP threads over delays (0 = OpenMP default)
};

class SfaQuadrature {
 public:
  /// xuv: the exact field on its grid; ir: the IR pulse (std::nullopt = no IR field);
  /// ionization_energy_au: Ip; dipole: d(k).
  SfaQuadrature(XuvField xuv, const std::optional<GaussianIrPulse>& ir, double ionization_energy_au,
                DipoleModel dipole, QuadratureOptions options = {});

  /// Complex amplitudes a(W_j, tau_i) (rows = delays). `modifiers` (empty, or one per delay)
  /// perturb each row's IR pulse; `delay_au` are the actual delays of the rows.
  Eigen::MatrixXcd amplitude(const std::vector<double>& delay_au,
                             const std::vector<double>& energy_au,
                             const std::vector<IrModifier>& modifiers = {}) const;
  /// Photoelectron energy density p |a|^2 (per unit energy: the d^3p -> dW Jacobian p).
  Eigen::MatrixXd density(const std::vector<double>& delay_au, const std::vector<double>& energy_au,
                          const std::vector<IrModifier>& modifiers = {}) const;

  const XuvField& xuv() const { return xuv_; }
  const VolkovTable* ir_table() const { return table_ ? &*table_ : nullptr; }
  std::size_t active_nodes() const { return nodes_.size(); }

  /// Largest trapezoid step (a.u.) free of aliasing for detuning |W + Ip - Omega_c| <= detuning,
  /// XUV half-bandwidth `half_bandwidth` about the carrier and gate spread `gate_spread`
  /// (all a.u. of angular frequency).
  static double nyquist_step(double detuning, double half_bandwidth, double gate_spread);
  /// Spectral spread of the gate for momenta up to p_max in the given IR (0 without IR).
  static double gate_spread(const std::optional<GaussianIrPulse>& ir, double p_max_au,
                            double max_intensity_factor = 1.0);

 private:
  XuvField xuv_;
  std::optional<VolkovTable> table_;
  double ip_;
  DipoleModel dipole_;
  QuadratureOptions options_;
  std::vector<std::size_t> nodes_;  // active grid indices
};

}  // namespace sw::synthetic
