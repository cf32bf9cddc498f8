#pragma once
// RABBITT analysis of a photoelectron-energy-versus-delay scan made with an attosecond pulse
// train and a weak IR dressing field (P. M. Paul et al., Science 292, 1689 (2001);
// H. G. Muller, Appl. Phys. B 74, S17 (2002)). Library code: no file I/O; the caller turns the
// returned RabbittAnalysis into result.json, CSV files and figures.
//
// Steps of analyze_rabbitt():
//  1. Peak identification. Harmonic q (odd for an odd-harmonic train) appears at kinetic energy
//     W_q = q hbar omega - Ip, sideband q (even) at the same formula with even q. A first offset
//     modulo 2 hbar omega comes from the phase of the delay-integrated spectrum's Fourier
//     component at period 2 hbar omega; then each peak's centroid above a local baseline is
//     measured in a window of +-hbar omega/2 around its expected position, and a weighted linear
//     fit W_obs = W_ref + offset + scale (W_pred - W_ref) (weights 1/sigma^2 of each centroid,
//     sigma = rms width / sqrt(area)) gives the energy-axis offset and scale. A warning is issued
//     when the offset, or the scale error over the half span of the peaks, exceeds the
//     spectrometer resolution (trace.meta.energy_resolution_eV, else the median bin width).
//     The sideband windows are centred on the aligned positions. The comb contrast
//     2 |sum_j s_j e^{-i pi (W_j + Ip)/(hbar omega)}| / sum_j s_j (1 for a cosine modulation of
//     full depth, up to 2 for narrow lines) must reach min_comb_contrast: a scan without a
//     harmonic comb is refused (require_comb) or warned about.
//  2. Sideband fits. Counts are summed over each sideband's window (half width
//     window_half_width_fraction * hbar omega) and fitted over the whole delay axis (any
//     spacing) by weighted linear least squares with the basis 1, cos(Omega tau),
//     sin(Omega tau), Omega = 2 omega, Poisson weights 1/max(S, 1), followed by
//     `reweight_passes` refits with the weights 1/max(model, 1) (iteratively reweighted least
//     squares; data-based weights alone bias a deeply modulated sideband that drops to a few
//     counts):
//         S(tau) = A + B cos(Omega tau + phi),  c1 = B cos(phi), c2 = -B sin(phi).
//     phi = atan2(-c2, c1); its variance is J C J^T with J = (c2, -c1)/B^2 and C the covariance
//     (X^T W X)^-1, multiplied by the reduced chi^2 when that exceeds 1 (flagged per sideband,
//     listed in the params and warned about above 2). Modulation depth B/A (A less the sidecar
//     background). The same fit per energy bin inside each window gives the phase across the
//     sideband (rainbow RABBITT: V. Gruson et al., Science 354, 734 (2016)).
//  3. Delay-axis check. The oscillation frequency is fitted freely around 2 omega (within
//     +-frequency_search_fraction) by maximising the summed explained weighted variance of the
//     strongest sidebands (data-based weights; grid search, then golden-section refinement).
//     The calibration factor kappa = Omega_fit / (2 omega) is the factor the delay axis must be
//     multiplied by (tau_true = kappa tau_axis: an axis stretched by 3 % gives kappa = 1/1.03).
//     Its sigma comes from the curvature of the summed chi^2 in Omega (Delta chi^2 = 1, after
//     reduced-chi^2 scaling). A warning is issued when |kappa - 1| exceeds
//     calibration_warn_fraction. A sideband amplitude that varies over the scan (IR envelope)
//     biases kappa slightly (~0.1 % for a 30 fs IR pulse and a +-4 fs scan).
//  4. Group delays, unwrapping and attochirp. SIGN CONVENTION. With DESIGN.md's delay
//     tau = t_XUV - t_IR and the XUV field E(t) ~ sum_q |E_q| e^{i phi_q} e^{-i q omega t}
//     (retrieval/core/grid.h), second-order perturbation theory (or the SFA of forward_model.h)
//     gives the sideband signal
//         S(tau) ~ A + B cos(2 omega tau + phi_{q+1} - phi_{q-1} + Delta phi_atomic),
//     so the fitted phi above IS the harmonic phase difference (plus the atomic phase and a
//     constant set by the IR phase): this is the textbook cos(2 omega tau' - Delta phi) with the
//     opposite delay sign tau' = t_IR - t_XUV. The reported sideband phase_rad is phi, and
//         t_e(q) = phi / (2 omega) - tau_A(q)
//     is the emission time (group delay d phi / d Omega) of photon energy q hbar omega, a pulse
//     that peaks later having a larger t_e. Phases are unwrapped across sidebands in order,
//     choosing the 2 pi branch that minimises the change from the previous sideband. The
//     attochirp is the slope of a weighted linear fit of t_e versus photon energy
//     q hbar omega (as/eV, sigma from the fit, scaled by sqrt(reduced chi^2) when above 1).
//     POSITIVE ATTOCHIRP = HIGHER PHOTON ENERGIES EMITTED LATER. For a burst of group-delay
//     dispersion GDD (spectral phase GDD/2 (Omega - Omega0)^2, retrieval/physics/xuv_builders.h)
//     the attochirp in as/eV is GDD (as^2) / hbar (hbar = 658.2119569 eV as, CODATA 2018).
//  5. Atomic delays (retrieval/physics/atomic_delay.h) are subtracted from each sideband's delay
//  when
//     options.atomic.mode == kAuto; the applied value is listed per sideband.
//  6. Several photoelectron lines (retrieval/analysis/rabbitt_lines.h): the peaks are assigned
//     to the scan's lines by a Gaussian model of the delay-integrated spectrum; when a second
//     line is present, every line's sideband windows stop short of the other line's peaks and
//     overlapped orders are left out; each further line's sidebands are fitted like the
//     reference's and give per-sideband relative delays and their weighted mean.

#include <string>
#include <vector>

#include <optional>

#include "retrieval/analysis/rabbitt_lines.h"
#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"
#include "retrieval/physics/atomic_delay.h"

namespace sw {

struct RabbittOptions {
  /// IR (driver) wavelength, nm; 0 = take trace.meta.ir_wavelength_nm (must then be > 0).
  double ir_wavelength_nm = 0.0;
  /// Target gas symbol or name; "" = trace.meta.gas (must then be in the gas table).
  std::string gas;
  /// Harmonics at odd multiples of omega, sidebands at even ones (true, the usual gas-phase
  /// train); false swaps the parities (e.g. a two-colour driven train of even harmonics).
  bool odd_harmonics = true;
  /// Half width of a sideband's (and harmonic's) integration window in units of hbar omega,
  /// in (0, 0.5]. 0.35 keeps clear of the neighbouring harmonic's wings.
  double window_half_width_fraction = 0.35;
  /// Minimum comb contrast of the delay-integrated spectrum at period 2 hbar omega (see step 1),
  /// in [0, 2).
  double min_comb_contrast = 0.1;
  /// Below that contrast: throw sw::Error (kInput) "not a RABBITT scan" (true) or only warn.
  bool require_comb = true;
  /// A peak takes part in the energy-axis fit when its area above the local baseline exceeds
  /// this many Poisson standard deviations (> 0).
  double min_peak_significance = 5.0;
  /// A sideband is reported when its fitted modulation B exceeds this many standard deviations
  /// sigma_B (> 0); weaker sidebands are listed as skipped with the reason.
  double min_modulation_significance = 3.0;
  /// Refits with model-based Poisson weights after the data-weighted fit (0 = weights
  /// 1/max(S, 1) only), 0..10.
  int reweight_passes = 2;
  /// Energy resolution (FWHM, eV) for the alignment warning; 0 = trace.meta, else the median
  /// energy bin width.
  double energy_resolution_eV = 0.0;
  /// Per-bin (rainbow) fits across each sideband.
  bool rainbow = true;
  /// Fit the oscillation frequency freely to check the delay axis.
  bool check_delay_axis = true;
  /// Frequency search range: Omega in 2 omega (1 +- frequency_search_fraction), in (0, 0.5).
  double frequency_search_fraction = 0.1;
  /// Number of strongest sidebands (by modulation significance) used by the frequency fit (>= 1).
  int calibration_sidebands = 4;
  /// Warn when |kappa - 1| exceeds this (>= 0; 0.01 = 1 %).
  double calibration_warn_fraction = 0.01;
  /// Use the fitted frequency for the sideband fits (equivalent to rescaling the delay axis by
  /// kappa); false = only report and warn.
  bool apply_delay_calibration = false;
  /// Atomic-delay correction (mode auto|none, channel, parts). Its `charge` is also the ion
  /// charge of the continuum-continuum correction of relative line delays.
  AtomicDelayOptions atomic;
  /// Look for the scan's other photoelectron lines (the sidecar's declared lines, else the gas
  /// table's) and give their delays relative to the reference line (step 6).
  bool analyse_lines = true;
  /// A line of the gas table counts as present when its summed peak area is this many sigma
  /// (> 0; 5 sigma: common practice for "a signal is present") ...
  double min_line_significance = 5.0;
  /// ... and its harmonic area reaches this fraction of the reference's at the same orders
  /// ([0, 1); 0.03 as LineOptions::min_relative_strength of the streaking analysis).
  double min_line_relative_strength = 0.03;
  /// Gap between a sideband window's edge and the centre of the nearest peak of another line,
  /// in Gaussian peak sigmas (>= 0; our choice: 3, where a Gaussian neighbour leaves 0.13 % of
  /// its area). A window narrower than one sigma is not placed: the order is overlapped.
  double line_guard_sigmas = 3.0;
  /// Largest share of another line's (model) counts in a sideband window relative to the
  /// line's own; above it the order is overlapped (in (0, 1]; our choice: 0.02, a contaminant
  /// modulated like the sideband then moves its phase by at most ~0.02 rad, ~4 as at 800 nm).
  double max_line_leakage = 0.02;

  /// Empty when valid; otherwise names the field, its value and the constraint.
  std::string validate() const;
};

/// Weighted linear least-squares fit of S = A + B cos(Omega tau + phi) (see header comment).
struct CosineFit {
  double angular_frequency_au = 0.0;              ///< Omega used
  double mean = 0.0, mean_sigma = 0.0;            ///< A (counts)
  double amplitude = 0.0, amplitude_sigma = 0.0;  ///< B (counts), B >= 0
  double phase_rad = 0.0, phase_rad_sigma = 0.0;  ///< phi in (-pi, pi]
  double modulation_depth = 0.0;                  ///< B / A (0 when A <= 0)
  double chi2 = 0.0;                              ///< weighted sum of squared residuals
  double reduced_chi2 = 0.0;                      ///< chi2 / (N - 3)
  bool covariance_scaled = false;                 ///< sigmas multiplied by sqrt(reduced_chi2)
  double explained_chi2 = 0.0;  ///< chi2 of the constant-only fit minus chi2 (>= 0)
  int points = 0;
};

/// The fit above on one delay trace: weights 1/max(S, 1), then `reweight_passes` refits with
/// 1/max(model, 1). Needs >= 4 points. Throws sw::Error (kUsage) on mismatched lengths, too few
/// points or reweight_passes < 0.
CosineFit fit_cosine(const std::vector<double>& delay_au, const std::vector<double>& signal,
                     double angular_frequency_au, int reweight_passes = 2);

/// One identified harmonic or sideband peak of the delay-integrated spectrum.
struct SpectralPeak {
  int order = 0;
  bool sideband = false;
  double predicted_eV = 0.0;  ///< q hbar omega - Ip
  double observed_eV = 0.0;   ///< centroid above the local baseline
  double observed_eV_sigma = 0.0;
  double area_counts = 0.0;   ///< delay-integrated counts above the baseline
  double significance = 0.0;  ///< area / Poisson sigma of the area
  bool used_in_alignment = false;
};

/// Energy-axis alignment: W_obs = W_ref + offset + scale (W_pred - W_ref).
struct EnergyAxisAlignment {
  double reference_eV = 0.0;  ///< weighted mean predicted energy of the peaks used
  double offset_eV = 0.0, offset_eV_sigma = 0.0;
  double scale = 1.0, scale_sigma = 0.0;
  double coarse_offset_eV = 0.0;  ///< from the 2 hbar omega Fourier phase (modulo 2 hbar omega)
  double resolution_eV = 0.0;     ///< resolution the result was compared with
  int peaks_used = 0;
  bool fitted = false;  ///< false when fewer than 2 significant peaks
  bool within_resolution = true;
};

/// One sideband in full detail (the contract's Sideband is derived from it).
struct SidebandDetail {
  int order = 0;
  double energy_eV = 0.0;                            ///< nominal q hbar omega - Ip
  double photon_energy_eV = 0.0;                     ///< q hbar omega
  double window_low_eV = 0.0, window_high_eV = 0.0;  ///< integration window on the trace axis
  int window_bins = 0;
  CosineFit fit;                     ///< fit of the window-integrated signal
  double phase_unwrapped_rad = 0.0;  ///< phi after unwrapping across sidebands
  double measured_delay_as = 0.0;    ///< phi_unwrapped / (2 omega)
  AtomicDelay atomic;                ///< correction applied (total_as subtracted)
  double group_delay_as = 0.0, group_delay_as_sigma = 0.0;  ///< XUV emission time t_e
  /// Rainbow RABBITT: phase (unwrapped within the sideband, relative branch of phi) per bin.
  std::vector<double> rainbow_energy_eV, rainbow_phase_rad, rainbow_phase_rad_sigma,
      rainbow_modulation_depth;
};

/// One photoelectron line of a RABBITT scan (step 6).
struct RabbittLine {
  RabbittLineCandidate candidate;
  std::string source;  ///< "sidecar", "gas table" (detected in the comb)
  bool present = false;
  double significance = 0.0;                                      ///< summed peak area / sigma
  double relative_strength = 0.0, relative_strength_sigma = 0.0;  ///< harmonic areas / reference's
  /// Non-reference lines: their own sideband fits (ascending order) and skipped orders.
  std::vector<SidebandDetail> sidebands;
  std::vector<std::string> skipped;
  std::vector<int> overlapped_orders;  ///< sideband orders left out for overlap
  double nearest_other_peak_eV = 0.0;  ///< smallest sideband-to-other-line-peak distance (eV)
  std::vector<RelativeSidebandDelay> relative;  ///< orders present for this line and the reference
  std::optional<WeightedMean> delay;            ///< weighted mean of relative_delay_as
  std::optional<WeightedMean> delay_corrected;  ///< same of the corrected delays
};

/// Result of the delay-axis check.
struct DelayAxisCheck {
  bool performed = false;
  double nominal_frequency_au = 0.0;  ///< 2 omega
  double fitted_frequency_au = 0.0;
  double calibration_factor = 1.0, calibration_factor_sigma = 0.0;  ///< kappa (see header)
  std::vector<int> sidebands_used;                                  ///< orders
  bool applied = false;
};

struct RabbittAnalysis {
  /// The contract section: sidebands (order, energy, phase, group delay, modulation depth,
  /// atomic delay) and the attochirp. train_burst_* are filled by retrieval/analysis/train_burst.h.
  RabbittSection section;
  std::string gas;  ///< gas symbol used
  double ionization_energy_eV = 0.0;
  double ir_wavelength_nm = 0.0;
  double ir_photon_energy_eV = 0.0;  ///< hbar omega
  std::vector<double> energy_eV;     ///< the trace's energy axis (eV)
  std::vector<double> delay_fs;      ///< the trace's delay axis (fs)
  /// Delay-integrated spectrum: per energy bin, the delay-step-weighted mean count times the
  /// number of delays (counts; equals the plain sum for uniform delays).
  std::vector<double> integrated_spectrum;
  std::vector<SpectralPeak> peaks;
  EnergyAxisAlignment alignment;
  DelayAxisCheck delay_check;
  std::vector<SidebandDetail> sidebands;       ///< reported sidebands, ascending order
  std::vector<std::string> skipped_sidebands;  ///< "SB 12: reason"
  /// Photoelectron lines (step 6): every candidate, the reference first; empty when the line
  /// analysis is off. The sidebands above are the reference's.
  std::vector<RabbittLine> lines;
  CombPeakModel comb_model;  ///< the peak model of the lines (fitted with >= 2 candidates)
  /// Attochirp fit t_e = intercept + attochirp (q hbar omega - reference): reference photon
  /// energy (eV) and intercept (as); reduced chi^2 of that fit.
  double attochirp_reference_eV = 0.0;
  double attochirp_intercept_as = 0.0;
  double attochirp_reduced_chi2 = 0.0;
  std::vector<std::string> warnings;  ///< physicist-facing warnings
  std::vector<Param> params;          ///< settings and diagnostics under "rabbitt.*" keys
};

/// Runs the analysis. Throws sw::Error: kUsage for invalid options, kInput when the trace has
/// no usable gas / IR wavelength or too few delays, kNumeric when no sideband can be fitted.
RabbittAnalysis analyze_rabbitt(const Trace& trace, const RabbittOptions& options);

/// Delay-integrated spectrum (see RabbittAnalysis::integrated_spectrum).
std::vector<double> delay_integrated_spectrum(const Trace& trace);

}  // namespace sw
