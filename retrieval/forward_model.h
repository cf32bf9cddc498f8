#pragma once
// The SFA streaking forward model on the engine's FFT grid (DESIGN.md "Physics conventions"):
//
//   a(W, tau) = -i Int dt E_X(t - tau) d(p + A(t)) exp(i phi_V(p, t)) exp(i (W + Ip) t),
//   phi_V(p, t) = -Int_t^inf [p A + A^2/2] dt',   p = sqrt(2 W),
//
// evaluated after the substitution s = t - tau, which keeps the XUV on its grid and moves
// the (smooth) IR quantities instead:
//   a(W, tau) = -i exp(i (W+Ip) tau) Int ds eps(s) G_p(s + tau) exp(i w s),  w = W + Ip - Omega_c,
// with eps the XUV envelope about the carrier Omega_c and G_p(t) = d(p + A) exp(-i p I1 - i I2/2).
// G_p(s + tau) is built by cubic-Hermite interpolation of A, I1, I2 (IrField::at), so any delay
// axis works without rounding to a grid and without wrap-around.
//
// Momentum models:
//   kCentral (CMA): p -> p0 in the gate, one FFT per delay (Mairesse and Quere, PRA 71,
//                   011401 (2005)). d is evaluated at p0 + A(t).
//   kFull:          the exact p dependence. For a block of energies with momenta in
//                   [p_lo, p_hi], G_p(t) is interpolated in p on M Chebyshev nodes; each node
//                   costs one FFT per delay. Blocks are sized so that the phase excursion
//                   (p - p_mid) * (I1 - I1_mid) stays below max_block_phase_rad, which makes the
//                   interpolation error ~ 2 (theta/2)^M / M! (1e-6 for the defaults).
//
// Output: trace() returns the photoelectron energy density dP/dW = p |a|^2 (the factor p is the
// d^3p -> dW Jacobian, DESIGN.md "Jacobians"); amplitude() returns a itself.
// The energy axis is exact when it is uniform with the grid's step dw = 2pi/(N dt); otherwise
// the smooth amplitude is linearly interpolated between FFT bins (documented approximation).

#include <string>
#include <vector>

#include <Eigen/Core>

#include "retrieval/dipole.h"
#include "retrieval/grid.h"
#include "retrieval/ir_field.h"
#include "retrieval/xuv_field.h"

namespace sw {

enum class MomentumModel { kCentral, kFull };
const char* to_string(MomentumModel m);

struct ForwardModelOptions {
  /// kCentral (CMA, fast) or kFull (exact p dependence).
  MomentumModel momentum = MomentumModel::kCentral;
  /// Central momentum p0 (a.u.) used by the CMA; must be > 0 when momentum == kCentral.
  /// Choose it at the photoelectron-spectrum centroid (DESIGN.md pitfall).
  double central_momentum_au = 0.0;
  /// kFull: Chebyshev nodes per momentum block (>= 2).
  int chebyshev_nodes = 10;
  /// kFull: largest |(p - p_mid)(I1 - I1_mid)| within a block, radians (> 0).
  double max_block_phase_rad = 2.0;
  /// Multiply |a|^2 by p so that trace() is a density per unit energy (true) or per momentum
  /// magnitude squared (false).
  bool energy_jacobian = true;
  /// Worker threads over delays; 0 = OpenMP default, 1 = serial.
  int threads = 0;

  /// Empty string when valid; otherwise names the bad field, its value and the constraint.
  std::string validate() const;
};

class ForwardModel {
 public:
  /// ionization_energy_au: Ip of the target; dipole: d(k) model.
  ForwardModel(double ionization_energy_au, DipoleModel dipole, ForwardModelOptions options);

  const ForwardModelOptions& options() const { return options_; }
  double ionization_energy_au() const { return ip_; }

  /// Complex amplitudes a(W_j, tau_i): rows = delays, cols = energies.
  Eigen::MatrixXcd amplitude(const XuvField& xuv, const IrField& ir,
                             const std::vector<double>& delay_au,
                             const std::vector<double>& energy_au) const;
  /// Energy density p |a|^2 (or |a|^2 without the Jacobian), same layout.
  Eigen::MatrixXd trace(const XuvField& xuv, const IrField& ir, const std::vector<double>& delay_au,
                        const std::vector<double>& energy_au) const;

 private:
  double ip_;
  DipoleModel dipole_;
  ForwardModelOptions options_;
};

/// The CMA phase gate G(t) = d(p0 + A) exp(-i p0 I1(t) - i I2(t)/2) at times t (a.u.).
void cma_gate(const IrField& ir, const DipoleModel& d, double p0_au, const double* t_au,
              std::size_t n, cdouble* gate_out);

}  // namespace sw
