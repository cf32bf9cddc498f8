#pragma once
// Isolated pulse, isolated pulse with satellites, or pulse train? The verdict of DESIGN.md
// ("verdict.class") from the evidence in a scan and, when given, a reconstruction.
//
// Evidence (each reported as a Param in VerdictSection::evidence, keys below):
//
// 1. Spectral fringes at 2 hbar omega ("spectrum.*"). By the Wiener-Khinchin theorem the
//    Fourier transform of the photon spectrum over energy is the field autocorrelation; in the
//    photoelectron spectrum s(W) a component of energy period 2 hbar omega / k measures the
//    autocorrelation at time lag k T/2. Defined here, per delay row, as
//        r_k = max over lags s in [k T/2 - T/8, k T/2 + T/8] of
//              sqrt(max(|sum_j s_j e^{-i W_j s}|^2 - sum_j c_j, 0)) / sum_j s_j,
//    (s_j = counts minus the sidecar background; the subtracted sum_j c_j removes the Poisson
//    noise bias of |.|^2; the lag window absorbs energy-scale errors and streaking), averaged
//    with weights sum_j s_j over the quarter of the delay rows with the largest r_1. (Streaking
//    shifts the spectra of bursts half a cycle apart in opposite directions, by up to 2 p0 A, and
//    hides their fringes except at delays where they overlap; the two satellites of a main burst
//    see the same A and keep their lag-T fringes.) k = 1, 2:
//    "spectrum.fringe_contrast_half_period" (r_1), "spectrum.fringe_contrast_period" (r_2);
//    effective burst count "spectrum.effective_burst_count" = 1 + 2 sum_{k>=1} r_k over the lags
//    the energy step resolves (k T/2 + T/8 < pi / dW, at most 12): 1 for one burst, N for N
//    equal bursts.
//    Model of a main burst with satellites of field ratios a (at -T/2) and b (at +T/2) and
//    opposite sign (the half-cycle sign flip of HHG):
//        r_1 = (a + b) / (1 + a^2 + b^2),  r_2 = a b / (1 + a^2 + b^2)  (r_2 <= 1/3 for a, b <= 1);
//    Estimate of the largest satellite intensity ratio ("spectrum.satellite_intensity_ratio"):
//    symmetric satellites from r_2 alone, a^2 = r_2 / (1 - 2 r_2), when the measured r_1 exceeds
//    the symmetric model's r_1 by at most 5 % (streaking only lowers r_1; mildly asymmetric
//    satellites cannot be told from symmetric ones); otherwise (clearly asymmetric, e.g.
//    one-sided satellites) the exact (a, b) solution with the smaller satellite energy, else a
//    least-squares fit on a grid over [0, 1]^2; with r_1 alone (energy step too coarse for lag T)
//    the symmetric small root of r_1 = 2a / (1 + 2a^2). r_2 above comb_min_period_contrast,
//    beyond any main-plus-two-satellites structure, is a harmonic comb (train). The estimate is
//    model-based evidence (streaking biases it low), not a measurement of the pulse.
// 2. Oscillation in delay ("delay.*"): per energy bin, a weighted linear least-squares fit of
//    the delay trace with 1, tau, tau^2, cos/sin(omega tau), cos/sin(2 omega tau) (Poisson
//    weights 1/max(c, 1)); the noise-debiased powers P_n = c_n^2 + s_n^2 - var(c_n) - var(s_n)
//    summed over energies give "delay.two_omega_share" = P_2 / (P_1 + P_2). A train is
//    periodic in delay with T/2 (only even multiples of omega); streaking of one burst moves the
//    spectrum with A(tau), at omega. Needs a scan of >= 1 IR period with >= 8 delays.
// 3. Reconstructed bursts ("retrieval.*", when a Reconstruction is given): sw::burst_structure
//    of the retrieved XUV field (satellite intensity ratio, main-burst energy fraction,
//    comparable bursts).
//
// Decision (thresholds are options; defaults are DESIGN.md's, common practice, no published
// standard): a class from each available piece of evidence, then
//   - retrieval given and trusted (trace error <= retrieval_max_trace_error_ratio x its noise
//     floor; otherwise it is reported as "retrieval.trusted" = false and ignored): its class
//     (comparable_bursts >= train_min_comparable_bursts -> train; satellite ratio <=
//     satellite_ratio.isolated_max -> isolated; < satellites_max -> isolated_with_satellites;
//     else train), unless the spectral or delay evidence contradicts it by a full step (isolated vs
//     train) -> undetermined;
//   - otherwise the spectral class (comb -> train; else by the fitted satellite ratio), checked
//     against the delay evidence: a train with two_omega_share < delay_streaking_max_share, or
//     an isolated pulse with two_omega_share > delay_train_min_share -> undetermined;
//   - fewer than min_total_counts counts -> undetermined (signal too weak).

#include <string>

#include "retrieval/core/option_spec.h"
#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"
#include "retrieval/engines/engine.h"
#include "retrieval/preprocess/preprocess.h"

namespace sw {

/// A satellite/main intensity ratio threshold of the verdict: a number in (0, 1].
constexpr OptionSpec satellite_ratio_spec(std::string_view name, std::string_view help,
                                          std::string_view flag, std::string_view config_key) {
  return OptionSpec{.name = name,
                    .help = help,
                    .min = 0,
                    .min_open = true,
                    .max = 1,
                    .flag = flag,
                    .config_key = config_key};
}

/// The two satellite-ratio thresholds of the verdict (DESIGN.md defaults, common practice, no
/// published standard), described once for every analysis: the retrieve flags, batch config
/// keys and batch option strings as RetrieveOptions uses them.
inline constexpr OptionSpec kIsolatedMaxSpec = satellite_ratio_spec(
    "isolated_max_satellite_ratio",
    "verdict: largest satellite/main intensity ratio for 'isolated' (common practice)",
    "--isolated-max", "isolated_max");
inline constexpr OptionSpec kSatellitesMaxSpec = satellite_ratio_spec(
    "satellites_max_satellite_ratio",
    "verdict: upper limit of the satellite/main ratio for 'isolated_with_satellites'",
    "--satellites-max", "satellites_max");

/// The two satellite-ratio thresholds of the verdict, one place for every analysis (the retrieve
/// options carry them into each verdict; their flags and keys: kIsolatedMaxSpec,
/// kSatellitesMaxSpec): 0 < isolated_max < satellites_max <= 1.
struct SatelliteThresholds {
  /// isolated when the largest satellite has at most this fraction of the main burst's peak
  /// intensity (DESIGN.md: 10 %).
  double isolated_max = 0.10;
  /// isolated_with_satellites while the largest satellite stays below this (DESIGN.md: 70 %).
  double satellites_max = 0.70;
};

/// A threshold as an analysis other than retrieve takes it (rabbitt, classify): on its command
/// line only, with no config key and outside the batch option strings (batch sets the
/// thresholds through RetrieveOptions).
constexpr OptionSpec command_line_only(OptionSpec spec) {
  spec.config_key = {};
  spec.batch = false;
  return spec;
}

struct ClassifierOptions {
  /// IR wavelength, nm; 0 = trace.meta.ir_wavelength_nm (must then be > 0).
  double ir_wavelength_nm = 0.0;
  /// The satellite-ratio thresholds (named isolated_max_satellite_ratio and satellite_max_ratio
  /// in messages and in the evidence).
  SatelliteThresholds satellite_ratio;
  /// train when a reconstruction shows at least this many bursts with >= 50 % of the main
  /// burst's peak intensity (DESIGN.md: 3), >= 2.
  int train_min_comparable_bursts = 3;
  /// harmonic comb (train) when r_2 exceeds this, in (1/3, 1): no main burst with two
  /// satellites reaches r_2 > 1/3.
  double comb_min_period_contrast = 0.45;
  /// Delay evidence says "train-like" above this 2 omega share, in (0, 1).
  double delay_train_min_share = 0.65;
  /// Delay evidence says "streaking-like" below this 2 omega share, in (0, delay_train_min_share).
  double delay_streaking_max_share = 0.35;
  /// Fewer counts in the whole trace -> undetermined (> 0).
  double min_total_counts = 2000.0;
  /// A reconstruction whose trace error exceeds this multiple of its noise floor has not
  /// explained the data (a stalled engine): its bursts are reported as evidence but do not
  /// decide the class (> 1; our choice: converged fits sit at 1-1.4 x, stalled CMA runs on
  /// multi-burst pulses at 4-6 x). Ignored when the reconstruction has no noise floor.
  double retrieval_max_trace_error_ratio = 2.0;
  /// Replace isolated hot pixels before taking the evidence (sw::remove_hot_pixels, the same
  /// rule and defaults as preprocessing): a single spike fakes spectral fringes at every lag.
  HotPixelOptions hot_pixels;

  /// Empty when valid; otherwise names the field, its value and the constraint.
  std::string validate() const;
};

/// The verdict with its evidence and reason. `retrieval` may be nullptr. Throws sw::Error:
/// kUsage for invalid options, kInput when the IR wavelength is unknown or the trace invalid.
VerdictSection classify(const Trace& trace, const ClassifierOptions& options,
                        const Reconstruction* retrieval = nullptr);

/// Largest satellite intensity ratio max(a, b)^2 of the main-plus-two-satellites model fitted to
/// the fringe contrasts (r_1, r_2) (see header comment; r2 < 0 = not measured); for tests.
double satellite_ratio_from_fringes(double r1, double r2);

}  // namespace sw
