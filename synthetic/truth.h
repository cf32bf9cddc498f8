#pragma once
// The truth record of a synthetic scan: an sw::AnalysisResult (analysis = "simulate") holding
// what a perfect analysis of the scan should report, computed from the exact fields with the
// pulse metrics of retrieval/physics/pulse_metrics.h, plus every generator parameter.
//
//   xuv:     fwhm_as (main peak), transform_limited_fwhm_as, rms_duration_as, gdd_as2, tod_as3,
//            center_photon_energy_eV, bandwidth_fwhm_eV (fit_spectral_phase, threshold 5 %,
//            cubic);
//   ir:      peak_vector_potential_au (max |A| of the nominal pulse), peak_intensity_Wcm2,
//            wavelength_nm, fwhm_fs (absent without IR);
//   verdict: class from burst_structure() with DESIGN.md's default thresholds (common
//            practice): `train` for >= 3 comparable bursts (>= 50 % of the main peak), else
//            `isolated` when the largest satellite at about +-T/2 is <= 10 % of the main
//            burst, `isolated_with_satellites` below 70 %, `undetermined` above;
//   rabbitt: for trains, attochirp_as_per_eV = burst GDD / hbar (hbar = 658.2119569 eV as,
//            CODATA 2018), train_burst_fwhm_as and transform_limited_burst_fwhm_as of the
//            average burst the scan can measure: the harmonics whose photoelectron lines
//            q hbar omega - Ip lie on the energy axis (measurable_train_burst_fwhm_as); the
//            burst of the full spectrum (harmonics off the axis or below Ip included) is the
//            xuv section's fwhm_as / transform_limited_fwhm_as (main burst of the train);
//   lines:   truth_lines() (ScanConfig::lines, default the gas's outer-valence line);
//   extra:   every ScanConfig field as "generator.<key>", "generator.seed", the quadrature
//            grid ("generator.numerics.quadrature_step_as", ".quadrature_nodes",
//            ".window_fs") and, when per-row effects are on, the realised per-row values
//            ("generator.realized.delay_offset_fs", ".ir_intensity_factor", ".cep_offset_rad").

#include <complex>
#include <vector>

#include "retrieval/core/result.h"
#include "retrieval/physics/pulse_metrics.h"
#include "synthetic/fluctuations.h"
#include "synthetic/scan_config.h"
#include "synthetic/volkov_table.h"

namespace sw::synthetic {

/// Verdict thresholds (DESIGN.md defaults).
struct VerdictThresholds {
  double isolated_max_satellite = 0.10;  ///< isolated when the satellite ratio is <= this
  double satellites_max_ratio = 0.70;    ///< isolated_with_satellites below this
  int train_min_bursts = 3;              ///< train with at least this many comparable bursts
};

/// Verdict of a known burst structure.
VerdictSection classify_bursts(const BurstStructure& b, const VerdictThresholds& t = {});

/// Driver period (a.u.) used to look for satellites: the train's or satellites' driver, else
/// the IR wavelength, else 800 nm.
double truth_driver_period_au(const ScanConfig& config);

/// FWHM (as) of the main burst of the train E(t) = sum_k a_k exp(-i q_k omega t) of odd
/// harmonic orders q_k with complex amplitudes a_k (omega the driver frequency, a.u.), from
/// |E|^2 on 4096 samples of one half period; flat_phase = true uses |a_k| (the transform limit).
double comb_burst_fwhm_as(const std::vector<int>& orders,
                          const std::vector<std::complex<double>>& amplitudes, double omega_au,
                          bool flat_phase);

/// FWHM and transform-limited FWHM (as) of one burst of a train built only from the odd
/// harmonics q whose photoelectron energies q hbar omega - Ip lie at least hbar omega / 2
/// inside the config's energy axis (the whole line recorded): E(t) = sum_q E~(q omega)
/// exp(-i q omega t), E~ = the spectrum of `one_burst` (interpolated). False (outputs
/// untouched) when fewer than two harmonics qualify.
bool measurable_train_burst_fwhm_as(const ScanConfig& config, const XuvField& one_burst,
                                    double* fwhm_as, double* tl_fwhm_as);

/// Pulse sections of the truth record (xuv, ir, verdict, rabbitt) from the exact field
/// `xuv_fine` (sampled finely enough for metrics) and the IR table (nullptr = no IR).
AnalysisResult make_truth(const ScanConfig& config, const XuvField& xuv_fine,
                          const VolkovTable* ir);

/// The truth record's `lines`: every line with its gas, threshold, kinetic energy at the
/// centre photon energy (centre - Ip), the ratio of its delay-integrated noise-free counts to
/// the first line's (`totals`, one per line) and its photoemission delay relative to the first
/// line; the first line is the reference.
std::vector<LineEntry> truth_lines(const std::vector<ResolvedLine>& lines,
                                   const std::vector<double>& totals, double center_photon_eV);

/// The generator parameters: config fields, seed, numerics, realised per-row perturbations.
std::vector<Param> generator_parameters(const ScanConfig& config, unsigned long long seed,
                                        double quadrature_step_au, std::size_t quadrature_nodes,
                                        double window_au, const std::vector<RowPerturbation>& rows);

}  // namespace sw::synthetic
