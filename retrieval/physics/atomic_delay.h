#pragma once
// Atomic contributions to RABBITT sideband delays, and the complex Gamma function they need.
//
// What a RABBITT sideband measures (atomic units, DESIGN.md delay convention):
//   t_measured(q) = t_XUV(q) + tau_A(q),   tau_A = tau_W + tau_cc,
// the XUV group delay plus an atomic delay: the one-photon (Wigner-like) delay of the ionizing
// transition and the continuum-continuum ("measurement-induced") delay of the IR transition
// between Coulomb continuum states. Both add to the XUV group delay with the same sign (a
// delayed electron looks like a later XUV burst), so the correction is t_XUV = t_measured - tau_A.
// J. M. Dahlstrom, A. L'Huillier and A. Maquet, J. Phys. B 45, 183001 (2012) (tutorial);
// J. M. Dahlstrom et al., Chem. Phys. 414, 53 (2013) (the same asymptotic theory; finite
// differences of phases over 2 omega as the measured delays).
//
// Models implemented (both hydrogenic, charge Z seen by the outgoing electron, Z = 1 for a
// neutral target):
//
// * Wigner delay of the Coulomb phase: sigma_l(k) = arg Gamma(l + 1 - i Z / k) (the Coulomb
//   phase shift with Sommerfeld parameter eta = -Z/k of an attractive potential), as a finite
//   difference over the two harmonics that feed sideband q,
//     tau_W(q) = [sigma_l(k_{q+1}) - sigma_l(k_{q-1})] / (2 omega),
//   k_{q+-1} = sqrt(2 ((q +- 1) omega - Ip)); its derivative form dsigma/dE = Z Re psi(z) / k^3
//   (z = l + 1 - iZ/k) is provided for checks. No short-range (non-Coulomb) phase: per-gas
//   scattering phases are not implemented, so this is the hydrogenic estimate only.
//   Channel: l = l0 + 1, the dominant channel of ionization from a shell of angular momentum l0
//   by Fano's propensity rule (U. Fano, Phys. Rev. A 32, 617 (1985)); the gas table gives l0
//   (s -> p, p -> d).
//
// * Continuum-continuum delay from the asymptotic (long-range) form of the two-photon matrix
//   element: for an IR transition from an intermediate continuum momentum kappa to the final
//   momentum k, with eta' = Z (1/kappa - 1/k),
//     phi_cc(k, kappa) = arg{ (2 kappa)^{i Z/kappa} / (2 k)^{i Z/k}
//                             * Gamma(2 + i eta') / |kappa - k|^{i eta'}
//                             * [1 + (i Z/2) (kappa - k) (1/kappa^2 + 1/k^2) / (1 + i eta')] }.
//   The first factors are those of the asymptotic formula of Dahlstrom et al. (2012), the
//   continuum-continuum phase of their asymptotic approximation; the bracket is the long-range
//   amplitude correction from the first 1/r term of the asymptotic Coulomb waves, whose
//   amplitude is (1 - Z / (2 k^2 r)) (the WKB amplitude ~ p_local^{-1/2} with
//   p_local = sqrt(k^2 + 2Z/r)). The form was re-derived here from
//   Int_0^inf r^{s-1} e^{-p r} dr = Gamma(s) / p^s with p = -i (kappa - k) (outgoing
//   intermediate wave, incoming-wave final state), because the paper's text could not be
//   consulted while writing this (see tests/test_atomic_delay.cpp for
//   the independent checks). The sideband's delay is the emission path minus the absorption
//   path:
//     tau_cc(q) = [phi_cc(k_q, k_{q+1}) - phi_cc(k_q, k_{q-1})] / (2 omega).
//   It is universal (independent of the atom and, to this order, of l) and negative, tending to
//   0 as 1/k^3 at high energy.
//
// The complex log-Gamma function uses the Lanczos approximation (C. Lanczos, J. SIAM Numer.
// Anal. Ser. B 1, 86 (1964)) with the widely used g = 7, n = 9 coefficient set (P. Godfrey),
// relative accuracy ~1e-15; a second, independent evaluation by the Stirling series with upward
// recurrence is provided for tests. Both return the principal branch of log Gamma (imaginary
// part continuous for Re z > 0), so arg Gamma is not reduced modulo 2 pi.

#include <complex>
#include <string>

#include "retrieval/physics/gas.h"

namespace sw {

/// log Gamma(z), Lanczos (g = 7, 9 terms); reflection formula for Re z < 1/2.
std::complex<double> log_gamma(std::complex<double> z);
/// log Gamma(z) by the Stirling series (Bernoulli terms up to B_20 / z^19) after shifting z up
/// to Re z >= 20 with log Gamma(z) = log Gamma(z + m) - sum_j log(z + j). Re z > 0 only
/// (throws sw::Error kUsage otherwise). Independent check of log_gamma().
std::complex<double> log_gamma_stirling(std::complex<double> z);
/// Digamma psi(z) = d log Gamma / dz (Re z > 0): upward recurrence to Re z >= 20, then the
/// asymptotic series ln w - 1/(2w) - sum B_2n / (2n w^2n).
std::complex<double> digamma(std::complex<double> z);

/// Coulomb phase shift sigma_l(k) = arg Gamma(l + 1 - i Z/k) (rad), continuous branch.
double coulomb_phase(int l, double k_au, double charge = 1.0);
/// Wigner delay of the Coulomb phase d sigma_l / dE = Z Re psi(l + 1 - iZ/k) / k^3 (a.u.).
double coulomb_wigner_delay_derivative_au(int l, double kinetic_energy_au, double charge = 1.0);
/// Continuum-continuum phase phi_cc(k, kappa) of the formula above (rad); k, kappa > 0,
/// k != kappa.
double continuum_continuum_phase(double k_final_au, double kappa_intermediate_au,
                                 double charge = 1.0);
/// tau_cc of a sideband at final kinetic energy W (a.u.) for IR photon energy omega (a.u.):
/// [phi_cc(k, k+) - phi_cc(k, k-)] / (2 omega), k+- = sqrt(2 (W +- omega)). Requires
/// W > omega (both intermediate states in the continuum); throws sw::Error (kUsage) otherwise.
double continuum_continuum_delay_au(double sideband_kinetic_energy_au, double omega_au,
                                    double charge = 1.0);
/// tau_W of a sideband: [sigma_l(k+) - sigma_l(k-)] / (2 omega), same k+- as above (a.u.).
double coulomb_wigner_delay_au(int l, double sideband_kinetic_energy_au, double omega_au,
                               double charge = 1.0);

/// Whether atomic delays are subtracted from the measured sideband delays.
enum class AtomicDelayMode {
  kAuto,  ///< subtract tau_W (hydrogenic Coulomb phase) + tau_cc (asymptotic formula)
  kNone,  ///< report measured delays as the XUV group delays (e.g. SFA synthetic data)
};
const char* to_string(AtomicDelayMode m);
/// Parses "auto" or "none"; false on anything else.
bool parse_atomic_delay_mode(const std::string& s, AtomicDelayMode* out);

struct AtomicDelayOptions {
  /// kAuto or kNone.
  AtomicDelayMode mode = AtomicDelayMode::kAuto;
  /// Angular momentum of the photoelectron channel used for the Wigner delay; -1 = automatic
  /// (valence l0 + 1, Fano's propensity rule). Otherwise 0..6.
  int channel_l = -1;
  /// Include the Wigner delay of the Coulomb phase.
  bool include_wigner = true;
  /// Include the continuum-continuum delay.
  bool include_continuum_continuum = true;
  /// Charge of the residual ion seen by the photoelectron (> 0; 1 for neutral targets).
  double charge = 1.0;

  /// Empty when valid; otherwise names the field, its value and the constraint.
  std::string validate() const;
};

/// The atomic delay of one sideband, each part in as (0 for an excluded part).
struct AtomicDelay {
  double wigner_as = 0.0;
  double continuum_continuum_as = 0.0;
  double total_as = 0.0;    ///< wigner_as + continuum_continuum_as
  int channel_l = 0;        ///< l used for the Wigner part
  bool applied = false;     ///< false when mode == kNone or the sideband is too close to
                            ///< threshold (W <= omega)
  std::string description;  ///< what was applied, for reports
};

/// Atomic delay of the sideband at kinetic energy W (a.u.) for the gas and IR photon energy.
/// Throws sw::Error (kUsage) when options.validate() fails.
AtomicDelay sideband_atomic_delay(const Gas& gas, double sideband_kinetic_energy_au,
                                  double omega_au, const AtomicDelayOptions& options);

}  // namespace sw
