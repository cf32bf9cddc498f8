#pragma once
// The quality verdict of an analysis (DESIGN.md "quality"): named checks, each a measured value
// against a limit, that decide whether the headline numbers may be presented as trusted.
// Retrieve, classify and rabbitt all build their quality section here. The numbers are always
// written; a failing check that guards a headline number makes quality.trusted false, and the
// CLI says so (stderr warning, report banner, batch summary column).
//
// Checks (names are stable keys of result.json "quality.checks"):
//   signal (every analysis, from the raw counts of the scan):
//     total_counts               counts in the scan                     >= min_total_counts
//     peak_snr                   largest (counts - background) / sqrt(counts) of one element
//                                                                       >= min_peak_snr
//     delay_dependence_sigma     Pearson chi^2 of the scan against its own delay average
//                                (homogeneity test: no delay dependence = no streaking or
//                                sideband signal), as (chi^2 - dof) / sqrt(2 dof) in standard
//                                deviations                           >= min_delay_dependence_sigma
//     energy_support_share       width of the signal's energy support / the energy axis
//                                (1 = signal and background not separated; reported, not guarding)
//   retrieval (retrieve, and classify --retrieve):
//     trace_error_vs_noise_floor G / G_noise                            <= max_trace_error_ratio
//     fwhm_vs_transform_limit    FWHM / its own transform limit         >=
//     min_fwhm_to_transform_limit spectrum_vs_measured       relative L2 difference of the
//     retrieved and measured
//                                delay-integrated spectra inside the support
//                                                                       <= max_spectrum_mismatch
//                                                                          + 3 x its noise
//                                                                          expectation
//     energy_outside_support     share of |E~|^2 outside the support    <=
//     max_energy_outside_support uncertainty_reported       1 with a bootstrap sigma, 0 without >=
//     1 fwhm_sigma_over_value      sigma / FWHM (with bootstrap)          <= accuracy target / 2
//     a0_sigma_over_value        sigma / A0 (with bootstrap)            <= accuracy target / 2
//                                (the +-2 sigma interval inside the target; the looser
//                                low-count target below low_count_peak_counts)
//     cma_phase_error_rad        the CMA's neglected phase (CMA result) <= the retrieve option
//                                (guarding for one central momentum; reported for momentum nodes)
//     cma_signal_counts          counts per delay row in the strongest  >= the retrieve option
//                                analysed bin (CMA result; below it the CMA engine's error
//                                follows the counting noise: docs/validation.md "Few counts
//                                per bin")
//     starts_agreement           |FWHM_a - FWHM_b| / FWHM of two full-model starts whose fits
//                                are equally good (G within 20 %)        <= max_start_disagreement
//     engines_agreement          the same between the CMA run and the full model (reported only:
//                                the full model runs exactly when the CMA is in doubt)
//     bootstrap_bias_over_sigma  |bias| / replica spread of the FWHM (reported: the bias rule
//                                widens sigma instead of moving the value)
//     field_free_rows            edge delay rows without streaking      >= min_field_free_rows
//     class_margin_sigma         |satellite ratio - nearest class threshold| / its bootstrap
//                                sigma (isolated or with satellites)    >= min_class_margin_sigma
//                                (none: the spectral amplitude and the frequency shift are set
//                                by the zero-mean A(t) convention, not by the data)
//     ir_period_vs_sidecar       |lambda(retrieved A(t)) / lambda(sidecar) - 1|
//                                                                       <= max_ir_period_mismatch
//     line_pattern_agreement     1 when the lines found on the unstreaked edge rows alone agree
//                                with the delay-integrated detection (lines.h
//                                compare_line_patterns), 0 when not        >= 1
//     unseen_line_strength       upper limit (2 sigma) of the relative strength of a line of the
//                                gas expected inside the support but not seen
//                                                                       <= max_unseen_line_strength
//     line_delay_fit_chi2        reduced chi^2 of the centre-of-energy fit of the lines'
//                                streaking curves (line_delays.h), when that method gives the
//                                lines' delays (not with the joint fit)
//                                                                       <= max_line_delay_chi2
//     line_separation_widths     smallest distance of two analysed lines in their rms widths,
//                                when the centre-of-energy method gives the delays (its delay
//                                depends on the pulse's phase when tails overlap)
//                                                                 >= min_line_separation_widths
//     ir_field_vs_vector_potential  max |E(t)| / (omega_IR max |A(t)|): ~1 for a field whose
//                                spectrum sits at omega (1.06 for a 5 fs, 800 nm pulse); a
//                                noise-dominated A(t) has a much larger derivative
//                                                                       <= max_ir_field_ratio
//   rabbitt: sidebands_analysed (>= 3, to fit an attochirp); with a second photoelectron line
//     (retrieval/analysis/rabbitt_lines.h), over the non-reference lines:
//     line_sidebands_for_delay   fewest sideband orders giving a relative delay (overlapped or
//                                too weak sidebands give none)          >= min_line_sidebands
//     line_sideband_separation_sigmas  smallest distance between a sideband and a peak of the
//                                other line, in Gaussian peak sigmas    >=
//                                min_line_separation_sigmas
//   classify: verdict_determined (reported), plus the retrieval's checks with --retrieve.
// Default limits: common practice (no published standard); see the fields.

#include <limits>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <Eigen/Core>

#include "retrieval/core/option_spec.h"
#include "retrieval/core/result.h"

namespace sw {

struct QualityOptions {
  /// Fewest counts in the whole scan for a trusted result (common practice; the classifier's
  /// own "too weak" limit is the same 2000).
  double min_total_counts = 2000.0;  ///< > 0
  /// Smallest peak signal-to-noise (background-subtracted counts / sqrt(counts), one element).
  double min_peak_snr = 3.0;  ///< > 0
  /// Smallest significance (standard deviations) of the delay dependence of the scan
  /// (5 sigma: common practice for "a signal is present").
  double min_delay_dependence_sigma = 5.0;  ///< > 0
  /// Largest trace error over its noise floor, G / G_noise (a fit at the floor has ~1; the
  /// clean presets reach 1.0-1.25, docs/validation.md).
  double max_trace_error_ratio = 1.5;  ///< > 1
  /// Smallest FWHM / transform-limited FWHM: a pulse cannot be shorter than its transform
  /// limit; 5 % allowance for the discrete grid (issue 10).
  double min_fwhm_to_transform_limit = 0.95;  ///< in (0, 1]
  /// Base of the limit of the relative L2 difference between the retrieved and the measured
  /// delay-integrated spectra (the limit adds 3 x the value expected from counting noise).
  double max_spectrum_mismatch = 0.15;  ///< > 0
  /// Largest share of the retrieved spectral energy outside the signal's energy support.
  double max_energy_outside_support = 0.05;  ///< in (0, 1)
  /// Relative accuracy a trusted FWHM and A0 must reach: their +-2 sigma (~95 %) interval must
  /// lie inside +-target, so the limit of fwhm_sigma_over_value and a0_sigma_over_value is
  /// target / 2. Default 0.05, the accuracy target of docs/validation.md at >= 100 peak counts.
  /// A result whose sigma is larger may be right, but the data do not vouch for it: on the
  /// held-out validation set (2026-12-03) two results -5.1 % +- 4.0 % and -8.2 % +- 9.3 % were
  /// outside a 5 % target while the old limit (sigma / value <= 0.10) trusted them.
  double accuracy_target = 0.05;  ///< in (0, 1)
  /// The looser target for weak scans (docs/validation.md: 10 % at 20-50 peak counts), used when
  /// the measured peak counts (RetrievalEvidence::peak_counts) are below low_count_peak_counts.
  double low_count_accuracy_target = 0.10;  ///< in [accuracy_target, 1)
  /// Peak counts per element (3 x 3 average, background subtracted) below which a scan is weak.
  double low_count_peak_counts = 100.0;  ///< >= 0 (0: every scan gets accuracy_target)
  /// Largest relative FWHM difference between two equally good full-model starts.
  double max_start_disagreement = 0.1;  ///< > 0
  /// Two fits are "equally good" when the worse G is within this factor of the better.
  double comparable_fit_ratio = 1.2;  ///< >= 1
  /// Fewest field-free edge rows (preprocess) for a trusted streaking result (>= 0; 0 = off).
  /// Default 1: without them the spectral amplitude and the frequency-shift ambiguity are fixed
  /// by a convention, and the data at the noise floor can hold a different pulse: a held-out
  /// validation scan (docs/validation.md) came out 9.3 % long with a 2.5 % sigma, and 2 % off
  /// once its delay range reached the field-free wings.
  double min_field_free_rows = 1.0;
  /// Fewest bootstrap sigmas between the satellite ratio and the nearest class threshold
  /// (isolated_max / satellites_max) for a trusted class (>= 0; 0 = off). Default 2 (common
  /// practice: a class decided within 2 sigma of its threshold is a coin toss). A held-out
  /// validation scan with 10-20 % satellites was called isolated, trusted (docs/validation.md).
  double min_class_margin_sigma = 2.0;
  /// Largest relative difference between the period of the retrieved A(t) and the sidecar's
  /// IR wavelength (a field locked onto 2 omega gives 0.5); a warning is issued above 2 %.
  double max_ir_period_mismatch = 0.1;  ///< > 0
  /// Largest max |E| / (omega max |A|) of the retrieved IR field (our choice: 1.5; a clean
  /// few-cycle field gives 1.0-1.1, a retrieval whose A(t) carries noise wiggles far more).
  double max_ir_field_ratio = 1.5;  ///< > 1
  /// Largest upper limit (2 sigma) of the relative strength of a line of the gas that is expected
  /// inside the signal's support but not seen (preprocess: lines.h UnseenLine). Such a line is
  /// fitted as part of the XUV spectrum and beats with it: measured on argon 3s under 3p (190 as,
  /// 13.5 eV apart), strength 0.01 gave FWHM -11 %, 0.05 gave -24 % (docs/validation.md); the
  /// intensity modulation is about +-2 sqrt(strength), so 0.003 keeps it near the 5 % target.
  double max_unseen_line_strength = 0.003;  ///< in (0, 1]
  /// Largest reduced chi^2 of the centre-of-energy fit of the lines' streaking curves (> 1).
  /// The common-curve model describes the first moments to their noise when the lines are
  /// clean (neon 2s/2p 0.8-1.35, argon 3s/3p at strength >= 0.3: 1.6-3; docs/validation.md); a
  /// weak line under a strong neighbour's tail (argon 3s at 0.1 of 3p) gave 16-33 with delays
  /// twice the inserted ones (-109 +- 5 as for -50) and a sigma that, scaled by sqrt(chi^2),
  /// still did not cover. Default 5 (our choice, between the two groups).
  double max_line_delay_chi2 = 5.0;
  /// Smallest distance of two lines' field-free centres, in their rms widths in a delay row,
  /// at which the centre-of-energy delay is trusted (> 0). Closer lines' tails overlap, and the
  /// delay then depends on the pulse's spectral phase, which the method does not model: with a
  /// cubic phase of 0.3 rad at twice the spectral rms it moved by -18, -13, -8, -4.5 and -1.5 as
  /// at 3.25, 3.75, 4.2, 4.6 and 5.3-5.4 widths (argon 3s/3p and neon 2s/2p, pulse durations
  /// varied; 1000 counts, sigma 0.8-1.9 as; the reduced chi^2 check passed throughout;
  /// docs/validation.md "Line shape"). Default 5 (our choice: the bias is within 3 sigma from
  /// there on at these counts, and neon 2s/2p at 120 eV, 160 as, 5.4 widths, passes).
  double min_line_separation_widths = 5.0;
  /// rabbitt: fewest sidebands with a phase for an attochirp.
  int min_sidebands = 3;  ///< >= 2
  /// rabbitt with two lines: fewest sideband orders giving a relative delay of a line (>= 1;
  /// default 2: the chi^2 of their weighted mean then tests their agreement; common practice).
  int min_line_sidebands = 2;
  /// rabbitt with two lines: smallest distance of a sideband from the other line's peaks, in
  /// Gaussian peak sigmas (> 0; default 4 = the window rule of RabbittOptions: one sigma of
  /// half width plus the 3-sigma guard).
  double min_line_separation_sigmas = 4.0;

  /// Names and bounds of the limits (retrieval/core/option_spec.h), for validation only: the
  /// limits are not echoed in result.json and have no flag or config key of their own.
  template <class Self, class V>
  static void describe(Self& self, V& v) {
    constexpr double kInf = std::numeric_limits<double>::infinity();
    auto limit = [&](std::string_view name, auto& field, double min, bool min_open, double max,
                     bool max_open) {
      v(OptionSpec{.name = name,
                   .min = min,
                   .min_open = min_open,
                   .max = max,
                   .max_open = max_open,
                   .echo = false,
                   .batch = false},
        field);
    };
    limit("min_total_counts", self.min_total_counts, 0, true, kInf, false);
    limit("min_peak_snr", self.min_peak_snr, 0, true, kInf, false);
    limit("min_delay_dependence_sigma", self.min_delay_dependence_sigma, 0, true, kInf, false);
    limit("max_trace_error_ratio", self.max_trace_error_ratio, 1, true, kInf, false);
    limit("min_fwhm_to_transform_limit", self.min_fwhm_to_transform_limit, 0, true, 1, false);
    limit("max_spectrum_mismatch", self.max_spectrum_mismatch, 0, true, kInf, false);
    limit("max_energy_outside_support", self.max_energy_outside_support, 0, true, 1, true);
    limit("accuracy_target", self.accuracy_target, 0, true, 1, true);
    limit("low_count_accuracy_target", self.low_count_accuracy_target, 0, true, 1, true);
    limit("low_count_peak_counts", self.low_count_peak_counts, 0, false, kInf, false);
    limit("max_start_disagreement", self.max_start_disagreement, 0, true, kInf, false);
    limit("comparable_fit_ratio", self.comparable_fit_ratio, 1, false, kInf, false);
    limit("max_ir_period_mismatch", self.max_ir_period_mismatch, 0, true, kInf, false);
    limit("max_unseen_line_strength", self.max_unseen_line_strength, 0, true, 1, false);
    limit("max_line_delay_chi2", self.max_line_delay_chi2, 1, true, kInf, false);
    limit("min_line_separation_widths", self.min_line_separation_widths, 0, true, kInf, false);
    limit("min_field_free_rows", self.min_field_free_rows, 0, false, kInf, false);
    limit("min_class_margin_sigma", self.min_class_margin_sigma, 0, false, kInf, false);
    limit("max_ir_field_ratio", self.max_ir_field_ratio, 1, true, kInf, false);
    limit("min_sidebands", self.min_sidebands, 2, false, kInf, false);
    limit("min_line_sidebands", self.min_line_sidebands, 1, false, kInf, false);
    limit("min_line_separation_sigmas", self.min_line_separation_sigmas, 0, true, kInf, false);
  }
  /// "" when valid; else names the field, its value and the rule (the bounds above, then
  /// low_count_accuracy_target >= accuracy_target).
  std::string validate() const;
};

/// Signal checks from the scan's raw counts (delays x energies) and the background per bin
/// that was subtracted (0 when none). Adds total_counts, peak_snr and (with >= 3 delays)
/// delay_dependence_sigma.
void add_signal_checks(QualitySection& q, const Eigen::MatrixXd& counts, double background_counts,
                       const QualityOptions& options);

/// Pearson chi^2 homogeneity test of the counts against their per-energy delay average,
/// in standard deviations (chi^2 - dof) / sqrt(2 dof); energy bins whose average is below
/// 1e-12 are skipped. 0 with fewer than 2 delays.
double delay_dependence_sigma(const Eigen::MatrixXd& counts);

/// Everything the retrieval checks need, measured by retrieve() (absent = check skipped).
struct RetrievalEvidence {
  double trace_error = 0.0, noise_floor_trace_error = 0.0;
  double fwhm_as = 0.0, transform_limited_fwhm_as = 0.0;
  std::optional<double> spectrum_mismatch, spectrum_mismatch_noise;
  std::optional<double> energy_outside_support;
  std::optional<double> fwhm_as_sigma, peak_vector_potential_au, peak_vector_potential_au_sigma;
  std::optional<double> cma_phase_error_rad;  ///< set when a CMA engine gave the result
  double cma_phase_error_max_rad = 0.6;
  bool momentum_nodes = false;  ///< the CMA result used momentum nodes
  /// Counts per delay row in the strongest analysed bin (PreprocessSummary::signal_peak_counts),
  /// set when a CMA engine that projects the measured modulus (ptychographic, projections) gave
  /// the result, and its limit (RetrieveOptions::cma_min_signal_counts;
  /// 0 = no check).
  std::optional<double> cma_signal_counts;
  double cma_min_signal_counts = 60.0;
  std::optional<double> start_disagreement;    ///< two full-model starts
  bool starts_comparable = false;              ///< their fits equally good
  std::optional<double> engine_disagreement;   ///< CMA run vs final
  std::optional<double> bias_over_sigma;       ///< bootstrap FWHM |bias| / spread
  std::optional<double> ir_period_mismatch;    ///< |lambda_retrieved / lambda_sidecar - 1|
  std::optional<double> ir_field_ratio;        ///< max |E(t)| / (omega max |A(t)|)
  std::optional<double> energy_support_share;  ///< support width / energy axis
  std::optional<double> field_free_rows;       ///< edge rows without streaking (preprocess)
  /// Distance of the satellite ratio from the nearest class threshold in bootstrap sigmas
  /// (isolated / isolated_with_satellites results with a sigma only).
  std::optional<double> class_margin_sigma;
  /// Peak counts of the scan (peak_signal_counts): selects the accuracy target.
  std::optional<double> peak_counts;
  /// Largest strength upper limit of a line expected inside the support but not seen, and
  /// which line it is ("Ar 3s at 40.9 eV ..."); absent when there is none.
  std::optional<double> unseen_line_strength;
  std::string unseen_line;
  /// 1 when the line detection on the unstreaked edge rows agrees with the delay-integrated
  /// one, 0 when not (what differs in line_pattern_detail); absent when not run.
  std::optional<double> line_pattern_agreement;
  std::string line_pattern_detail;
  /// Reduced chi^2 of the centre-of-energy fit of the analysed lines (absent: fewer than two).
  std::optional<double> line_delay_reduced_chi2;
  /// The same fit's LineDelayResult::separation_widths (absent: fewer than two lines).
  std::optional<double> line_separation_widths;
};

/// Largest 3 x 3 average of (counts - background) over the scan's elements: the "peak counts"
/// of a scan, robust to a single hot element. 0 for an empty scan.
double peak_signal_counts(const Eigen::MatrixXd& counts, double background_counts);

void add_retrieval_checks(QualitySection& q, const RetrievalEvidence& e,
                          const QualityOptions& options);

/// The quality section of a classify result: the signal checks (background per bin from the
/// sidecar, 0 when none), the retrieval's own checks when classify ran one (without repeating
/// the signal checks), and verdict_determined (1 when the class is not undetermined; reported
/// only: "undetermined" is an answer, not a wrong number).
QualitySection classify_quality(const Eigen::MatrixXd& counts, double background_counts,
                                const VerdictSection& verdict, const QualitySection* retrieval,
                                const QualityOptions& options);

/// What the two-line checks of a rabbitt result need, per non-reference line analysed.
struct RabbittLineEvidence {
  std::string line;                ///< "Ar 3s"
  int sidebands_with_delay = 0;    ///< orders giving a relative delay
  double separation_sigmas = 0.0;  ///< nearest other-line peak / peak sigma
  std::string why;                 ///< why orders are missing ("" when none are)
};

/// The quality section of a rabbitt result: the signal checks, sidebands_analysed (sidebands
/// with a phase >= min_sidebands, guarding the attochirp) and, when `lines` is not empty, the
/// two-line checks (header comment; guarding: the relative delay is a headline number).
QualitySection rabbitt_quality(const Eigen::MatrixXd& counts, double background_counts,
                               const RabbittSection& rabbitt, const QualityOptions& options,
                               const std::vector<RabbittLineEvidence>& lines = {});

/// Relative L2 difference sqrt(sum (m - c r)^2 / sum m^2) of a measured and a retrieved
/// spectrum over bins [lo, hi] (c = least-squares scale of r), and (noise_out) the same
/// expected from the measured variances alone, sqrt(sum var / sum m^2). NaN when empty.
double spectrum_mismatch(const Eigen::VectorXd& measured, const Eigen::VectorXd& retrieved,
                         const Eigen::VectorXd& variance, Eigen::Index lo, Eigen::Index hi,
                         double* noise_out);

/// The bootstrap rule of retrieve() for one headline number (retrieve.h): s_stat = t_B x the
/// replicas' sample standard deviation; bias = mean(replicas) - estimate, corrected only when
/// it is significant and small: 2 s_stat / sqrt(B) <= |bias| <= s_stat (the bias estimate is a
/// mean of B replicas, standard error ~ s_stat / sqrt(B); so never with B <= 4), then
/// sigma_statistical = s_stat sqrt(1 + 1/B). A bias that is not corrected and not negligible
/// (|bias| > s_stat / 4) leaves the value and enters sigma (Efron and Tibshirani, An
/// Introduction to the Bootstrap, 1993, sec. 10.6: a bias below a quarter of the standard error
/// is ignored; correcting adds variance). sigma = sqrt(stat^2 + systematic^2 + sigma_bias^2).
/// So the value never moves by more than its sigma. Needs >= 2 replicas.
struct BootstrapEstimate {
  double value = 0.0;  ///< reported value (corrected or not)
  double sigma = 0.0;  ///< total 1-sigma
  double sigma_statistical = 0.0;
  double sigma_systematic = 0.0;  ///< as given (the chain's spread)
  double sigma_bias = 0.0;        ///< |bias| when neither negligible nor corrected, else 0
  double bias = 0.0;              ///< mean(replicas) - estimate
  double spread = 0.0;            ///< s_stat before the sqrt(1 + 1/B) factor
  bool corrected = false;
};
BootstrapEstimate bootstrap_estimate(double estimate, const std::vector<double>& replicas,
                                     double systematic_sigma);

/// Student-t factor for the sample standard deviation of B values: the half-width of the
/// central 68.27 % interval of Student's t with B - 1 degrees of freedom (Student, Biometrika
/// 6, 1 (1908)), computed by integrating its density; 1 for B > 200. B >= 2.
double student_one_sigma_factor(int samples);

}  // namespace sw
