#pragma once
// The average attosecond burst of a pulse train from a RABBITT analysis (the reconstruction of
// P. M. Paul et al., Science 292, 1689 (2001); Y. Mairesse et al., Science 302, 1540 (2003)).
//
//   E(t) = sum_q sqrt(I_q) exp(i phi_q) exp(-i q omega t)       (odd q for an odd-harmonic train)
//
// written in the project's Fourier convention (retrieval/core/grid.h: E(t) ~ e^{-i Omega t},
// spectral phase +phi), so a burst whose harmonics have group delay d phi/d Omega = t_e peaks at
// t = +t_e on the IR time axis (the same axis as the sideband group delays).
//  - Amplitudes: I_q = (harmonic peak area) / sigma(q omega), the area taken from the XUV-only
//    spectrum when one is given, else from the delay-integrated RABBITT spectrum (whose
//    harmonic peaks are slightly depleted into the sidebands; negligible at weak IR). sigma is
//    a cross-section model: kFlat (sigma = 1: counts are taken as proportional to the photon
//    spectrum) or kSfaDipole (sigma ~ p |d(p)|^2 with the dipole of retrieval/physics/dipole.h at
//    the photoelectron momentum p = sqrt(2 (q omega - Ip)): the smooth SFA cross section, the
//    energy-density Jacobian p included, that the forward model assumes).
//  - Phases: phi_{q+1} - phi_{q-1} = 2 omega t_e(q), the atomic-delay-corrected sideband group
//    delays of RabbittAnalysis; phi = 0 for the lowest harmonic of the longest chain of
//    harmonics connected by reported sidebands (others are dropped with a warning).
//  - One burst is measured: |E(t)|^2 is sampled over `periods` IR periods centred on the
//    brightest burst; FWHM of the main burst (sw::fwhm_of_main_peak on +-T/4 around it), the
//    transform-limited FWHM (all phi_q = 0) and sigma of the FWHM from a Monte Carlo over the
//    sideband phases (each t_e drawn from a normal distribution with its sigma; fixed seed).
// Assumptions (also returned as text): all bursts of the train are identical (the RABBITT
// phases are train averages), there is no chirp within a harmonic (each harmonic is one phase),
// the atomic delay model of retrieval/physics/atomic_delay.h is adequate, harmonic intensities
// follow the chosen cross-section model.

#include <string>
#include <vector>

#include "retrieval/analysis/rabbitt.h"
#include "retrieval/core/trace.h"
#include "retrieval/physics/dipole.h"

namespace sw {

enum class CrossSectionModel {
  kFlat,       ///< sigma = 1
  kSfaDipole,  ///< sigma ~ p |d(p)|^2 (retrieval/physics/dipole.h), p = photoelectron momentum
};
const char* to_string(CrossSectionModel m);
/// Parses "flat" or "sfa_dipole"; false on anything else.
bool parse_cross_section_model(const std::string& s, CrossSectionModel* out);
/// The same, under the name option descriptions use (retrieval/core/option_spec.h).
inline bool parse_option(const std::string& s, CrossSectionModel* out) {
  return parse_cross_section_model(s, out);
}

struct TrainBurstOptions {
  /// Cross-section model dividing the harmonic peak areas.
  CrossSectionModel cross_section = CrossSectionModel::kFlat;
  /// Dipole used by kSfaDipole (kConstant: sigma ~ p; kHydrogenic: the SFA hydrogenic dipole).
  DipoleKind dipole = DipoleKind::kHydrogenic;
  /// IR periods spanned by the returned samples, 1 or 2.
  int periods = 1;
  /// Samples per IR period (>= 64).
  int samples_per_period = 4096;
  /// Monte Carlo draws for the FWHM sigma (0 = no sigma; else >= 10).
  int monte_carlo_draws = 300;
  /// Seed of the Monte Carlo (fixed: the result is reproducible).
  unsigned long long seed = 12345;
  /// Harmonic peak-area window half width in units of hbar omega, (0, 0.5].
  double window_half_width_fraction = 0.35;

  /// Empty when valid; otherwise names the field, its value and the constraint.
  std::string validate() const;
};

struct TrainBurst {
  std::vector<int> harmonic_orders;  ///< ascending, contiguous chain
  std::vector<double> harmonic_photon_energy_eV;
  std::vector<double> harmonic_intensity;           ///< I_q after the cross-section, max = 1
  std::vector<double> harmonic_phase_rad;           ///< phi_q (phi = 0 at the first)
  std::vector<double> time_as;                      ///< sample times (IR time axis)
  std::vector<double> intensity;                    ///< |E(t)|^2, max = 1
  std::vector<double> transform_limited_intensity;  ///< flat phases, max = 1, same times
  double fwhm_as = 0.0, fwhm_as_sigma = 0.0;
  double transform_limited_fwhm_as = 0.0;
  double peak_time_as = 0.0;  ///< main burst's maximum, in (-T/4, T/4] (bursts
                              ///< repeat every T/2)
  int monte_carlo_draws = 0;
  std::string spectrum_source;  ///< "xuv-only spectrum" or "delay-integrated spectrum"
  std::string cross_section;    ///< model used
  std::string assumptions;      ///< the method's assumptions, for the report
  std::vector<std::string> warnings;
};

/// Builds the average burst. `xuv_only` (optional) is a field-free scan on any energy axis; its
/// delay-integrated spectrum supplies the harmonic areas. Throws sw::Error (kUsage) for invalid
/// options, (kNumeric) when fewer than two harmonics are connected by sidebands.
TrainBurst reconstruct_train_burst(const Trace& trace, const RabbittAnalysis& rabbitt,
                                   const TrainBurstOptions& options,
                                   const Trace* xuv_only = nullptr);

/// Copies the burst durations into the contract section (train_burst_fwhm_as, its sigma,
/// transform_limited_burst_fwhm_as).
void fill_rabbitt_section(const TrainBurst& burst, RabbittSection* section);

}  // namespace sw
