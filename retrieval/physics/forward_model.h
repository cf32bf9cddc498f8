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
//   kCentral (CMA): one momentum in the gate, one FFT per delay (Mairesse and Quere, PRA 71,
//                   011401 (2005)), in the delay-adapted form of retrieval/physics/gate.h:
//                   G(t) = d(p0 + A) exp(-i p0 I1 + i I2/2), whose phase rate p0 A - A^2/2 is
//                   the exact one of the electrons streaked to p0 - A(tau) at t = tau (the
//                   textbook p -> p0 gives p0 A + A^2/2, off by A^2). d is evaluated at
//                   p0 + A(t).
//   kFull:          the exact p dependence. For a block of energies with momenta in
//                   [p_lo, p_hi], G_p(t) is interpolated in p on M Chebyshev nodes; each node
//                   costs one FFT per delay. The interpolation error of M nodes over a block
//                   whose phase excursion (p - p_mid) * (I1 - I1_mid) stays below theta is at
//                   most 2 (theta/2)^M / M!; chebyshev_nodes and max_block_phase_rad set that
//                   bound (5.5e-7 for the defaults), and the plan takes the blocks and nodes
//                   with the fewest nodes in all that meet it (ForwardModelOptions::fewest_nodes).
//
// Output: trace() returns the photoelectron energy density dP/dW = p |a|^2 (the factor p is the
// d^3p -> dW Jacobian, DESIGN.md "Jacobians"); amplitude() returns a itself.
// The energy axis is exact when it is uniform with the grid's step dw = 2pi/(N dt); otherwise
// the smooth amplitude is linearly interpolated between FFT bins (documented approximation).

#include <string>
#include <vector>

#include <Eigen/Core>

#include "retrieval/core/grid.h"
#include "retrieval/physics/dipole.h"
#include "retrieval/physics/ir_field.h"
#include "retrieval/physics/xuv_field.h"

namespace sw {

enum class MomentumModel { kCentral, kFull };

/// Most Chebyshev nodes per momentum block (ForwardModelOptions::chebyshev_nodes, and the
/// fewest-nodes plan).
inline constexpr int kMaxChebyshevNodes = 64;
/// Error bound of interpolating exp(i theta x), x in [-1, 1], at `nodes` Chebyshev points:
/// 2 (theta/2)^nodes / nodes! (the full model's accuracy per momentum block).
double chebyshev_interpolation_bound(double phase_rad, int nodes);
const char* to_string(MomentumModel m);

struct ForwardModelOptions {
  /// kCentral (CMA, fast) or kFull (exact p dependence).
  MomentumModel momentum = MomentumModel::kCentral;
  /// Central momentum p0 (a.u.) used by the CMA; must be > 0 when momentum == kCentral.
  /// Choose it at the photoelectron-spectrum centroid (DESIGN.md pitfall).
  double central_momentum_au = 0.0;
  /// kFull: Chebyshev nodes per momentum block (>= 2, <= kMaxChebyshevNodes).
  int chebyshev_nodes = 10;
  /// kFull: largest |(p - p_mid)(I1 - I1_mid)| within a block, radians (> 0).
  double max_block_phase_rad = 2.0;
  /// kFull: true (default): the two settings above fix only the accuracy, the interpolation
  /// error bound 2 (theta/2)^M / M! of M nodes over a block of phase excursion theta
  /// (chebyshev_interpolation_bound; 5.5e-7 for the defaults); the plan then takes the number
  /// of blocks and of nodes per block with the fewest nodes in all whose bound is no larger
  /// (fewer, wider blocks with more nodes each: every node is one FFT per delay, and the bound
  /// falls faster with M than it rises with theta). false: blocks of max_block_phase_rad with
  /// chebyshev_nodes nodes each (the layout before 2026-12-05; for comparisons).
  bool fewest_nodes = true;
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

/// One momentum block of the full model: energies [first, last) whose amplitudes are
/// interpolated in p from `nodes` (Chebyshev points of the block's momentum interval);
/// lagrange(j - first, m) is the Lagrange weight of node m at energy j.
struct MomentumBlock {
  std::size_t first = 0, last = 0;
  std::vector<double> nodes;
  Eigen::MatrixXd lagrange;
};

/// The block layout kFull uses for one IR field (what ForwardModel::amplitude builds on every
/// call), exposed so that adjoint code can reuse exactly the same nodes. Node m of a block
/// carries the gate d(p_m + A) exp(-i p_m (I1 - i1_mid) - i I2/2); the factor
/// exp(-i p i1_mid) is restored per energy. i1_lo/i1_hi: range of I1(t) over the times the
/// XUV grid can sample, [t_0 + tau_first, t_last + tau_last] (the range the blocks were sized
/// for); i1_mid = (i1_lo + i1_hi) / 2.
struct MomentumBlockPlan {
  /// The phase excursion bound the blocks were sized for (radians): every block has
  /// |(p - p_mid)(I1 - I1_mid)| <= block_phase_rad for the IR it was planned on.
  double block_phase_rad = 0.0;
  double i1_mid = 0.0;
  double i1_lo = 0.0;
  double i1_hi = 0.0;
  std::vector<MomentumBlock> blocks;
};
/// Blocks for energies energy_au (ascending), delays delay_au, the XUV grid and an IR field,
/// sized by options.chebyshev_nodes, options.max_block_phase_rad and options.fewest_nodes
/// (momentum model ignored).
MomentumBlockPlan plan_momentum_blocks(const IrField& ir, const TimeGrid& xuv_grid,
                                       const std::vector<double>& delay_au,
                                       const std::vector<double>& energy_au,
                                       const ForwardModelOptions& options);

/// Where each requested energy falls on the XUV grid's FFT bins (what ForwardModel uses):
/// the amplitude at energy j is (1 - frac[j]) x bin[j] + frac[j] x (bin[j] + 1) (signed FFT
/// bins of the frequency w = W + Ip - carrier - carrier_shift). For a uniform axis whose step
/// is the grid's dw, carrier_shift (< dw/2 in magnitude) moves the carrier onto the axis and
/// every frac is 0. Throws std::invalid_argument when an energy lies outside the grid's band.
struct EnergyBinMap {
  double carrier_shift = 0.0;
  std::vector<long> bin;
  std::vector<double> frac;
};
EnergyBinMap map_energy_bins(const TimeGrid& grid, double carrier_au, double ionization_energy_au,
                             const std::vector<double>& energy_au);

}  // namespace sw
