#pragma once
// Relative photoemission delays of several photoelectron lines in one streaking scan, by the
// centre-of-energy method.
//
// Every line k of a scan is ionized by the same XUV pulse and streaked by the same IR field
// (retrieval/preprocess/lines.h). Classically an electron born at time t with momentum p_k ends
// with p_k - A(t) (DESIGN.md: p_f = p_i - A(t_i)), so its kinetic energy is
//   W = W_k - p_k A(t) + A(t)^2 / 2.
// An electron of line k emitted delta_k later than the XUV's arrival tau sees A(tau + delta_k);
// averaged over the XUV pulse the first moment of the line's band in delay row tau is
//   M_k(tau) = a_k + g_k [ -p_k A_eff(tau + delta_k) + A_eff(tau + delta_k)^2 / 2 ],
// with A_eff the vector potential seen through the XUV envelope (common to all lines), a_k
// the line's field-free centroid and g_k a gain (1 to first order; it absorbs the lines'
// different response through the energy dependence of the dipole and of p over the band).
// Schultze et al., Science 328, 1658 (2010) measured the neon 2s-2p delay this way (first
// moments of the two lines fitted with a common streaking curve).
//
// Procedure (measure_line_delays):
//   1. per delay row, the band of each line follows the line: it starts at the line's
//      field-free centre moved by the row's overall centroid shift (scaled by p_k / p_ref),
//      is cut half way to the neighbouring lines' current centres and limited to
//      `band_half_width_factor` x the line's rms width, and is re-centred on its own first
//      moment `band_iterations` times; the tail of each neighbouring line inside the band is
//      removed by the neighbour's mirror image about its own centre (its far side; common
//      practice for peak deblending, as in retrieval/preprocess/lines.h); the row's first moment
//      and its Poisson variance Var M = sum_j (W_j - M)^2 n_j / D^2 (n_j the raw counts,
//      D = N - h [rho(M + h) + rho(M - h)] with N the background-subtracted sum and rho the
//      line's density at the band edges: the band follows M, an M-estimator; docs/theory.md)
//      are kept, rows with fewer than `min_row_counts` in the band dropped; when the lines
//      merged in the delay-integrated spectrum (options.reanchor_on_unstreaked_rows) the line
//      centres come from the unstreaked edge rows;
//   2. a joint weighted least-squares fit of all lines' first moments with the model above:
//      A_eff is a band-limited Fourier series on a period 1.5 x the delay span (frequencies up
//      to `max_frequency_factor` x the IR frequency), shared by all lines; per line a_k, g_k
//      and delta_k (g_ref = 1, delta_ref = 0); Levenberg-Marquardt with analytic derivatives,
//      started from delta = 0, g = 1 and A_eff from the reference line alone;
//   3. uncertainties: Poisson bootstrap of the raw counts (the same resampling as retrieve's
//      headline numbers, retrieve.h): each replica repeats steps 1-2;
//      sigma = t_B x standard deviation of the replicas (Student factor as in retrieve.h),
//      never below the fit's covariance sigma (scaled by the reduced chi^2 when above 1);
//   3b. band consistency (options.consistency_band_half_width_factor > 0): the delay is measured
//      once more with that second band half width, on the scan and on the same replicas, and
//      the difference d = delta(second band) - delta(band) is judged by its own paired spread
//      sigma_d = t_B x standard deviation of the replicas' differences. A delay that a
//      neighbour's tail pulls depends on how far the band reaches into that tail; a delay set
//      by the line's own streaking does not (docs/validation.md "Band consistency");
//   4. relative strength: the ratio of the band counts summed over the rows (each line's
//      band follows its streaking, so no line's tail is counted twice), sigma likewise
//      from the replicas;
//   5. Coulomb-laser coupling (measurement-induced) delay of each line,
//        t_CLC(W) = Z / (2 W)^{3/2} [2 - ln(W T_IR)]   (atomic units, W the line's kinetic
//      energy, T_IR the IR period, Z = 1), S. Nagele et al., J. Phys. B 44, 081001 (2011),
//      also R. Pazourek, S. Nagele and J. Burgdoerfer, Rev. Mod. Phys. 87, 765 (2015); the
//      measured streaking delay is t_S = t_EWS + t_CLC, so the corrected relative delay is
//        delta_corrected = delta_raw - [t_CLC(W_k) - t_CLC(W_ref)].
//      The SFA (and the synthetic generator) has no Coulomb tail: on synthetic scans the raw
//      delay is the one to compare with the inserted delay.
//
// Sign: delta_k > 0 means the electrons of line k are emitted later than those of the
// reference line (DESIGN.md "lines"); the curve of a later line is the reference curve moved
// to earlier delays (M_k(tau) ~ M_ref(tau + delta_k)).
//
// Known bias (docs/validation.md "Two lines", "Line shape"): the first moment averages -p A
// over the XUV intensity; for a chirped pulse the momentum spread over the band correlates with
// time, which shifts lines of different p differently (small); the tail of a strong neighbour
// inside a weak line's band pulls its moment, and where the tails overlap the streaked shape
// of that tail follows the pulse's spectral phase, which the method does not model: argon
// 3s/3p (3.25 rms widths apart) moved by 10-18 as under GDD 8000 as^2 or TOD 2e5 as^3 at a
// passing chi^2. LineDelayResult::separation_widths measures the overlap; the quality check
// line_separation_widths (retrieval/analysis/quality.h) guards it.

#include <limits>
#include <string>
#include <string_view>
#include <vector>

#include "retrieval/core/option_spec.h"
#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"

namespace sw {

struct LineDelayOptions {
  /// Lines to analyse, by name as in the result's lines ("2s", or "Kr 4p" for a line of another
  /// gas); empty = every line found; the single entry "none" = no line-delay analysis.
  std::vector<std::string> names;
  /// Poisson-bootstrap replicas for the sigmas (>= 2).
  int bootstrap = 24;
  /// Seed of the replicas' Poisson draws.
  unsigned long long seed = 1;
  /// Highest frequency of the A_eff Fourier basis, in units of the IR frequency (> 1).
  double max_frequency_factor = 2.5;
  /// Re-centring passes of each row's band on its own first moment (>= 1). The bands start
  /// from the reference's streaking; too few passes keep a memory of it and compress the
  /// delays towards 0 (argon 3s/3p, 13.5 eV apart: -9 % at 4 passes, none at 12 on the
  /// validation sweep, docs/validation.md).
  int band_iterations = 12;
  /// Half width of a row's band in units of the line's rms width in a row (> 1). Narrow, so
  /// that a neighbour's tail stays out of the band: with 3 the bands reached half way to the
  /// neighbour and its tail, which streaks with the neighbour's curve, compressed the delays
  /// (noiseless scans, docs/validation.md: neon 2s at +-50 as -2.5 % at strength 0.3, argon 3s
  /// -15 % at strength 1 and x2.1 at 0.1; 1.5: within 2 % in all six). Below ~1.25 the
  /// re-centring converges too slowly (its contraction factor 2 c phi(c) / (2 Phi(c) - 1) is
  /// 0.45 at c = 1.5, 0.71 at 1) and keeps a memory of the start.
  double band_half_width_factor = 1.5;
  /// Second band half width (units of the rms width, as band_half_width_factor) at which the
  /// delay is measured again on the scan and on the same replicas, for the band-consistency
  /// difference (step 3b of the header comment); 0 = not measured (0, or > 1). Doubles the
  /// cost of the analysis. Reported only, not a quality check: on the 90-row validation sweep
  /// no limit on |d| / sigma_d (2 or 1.25 rms) separated the two wrong rows from the 88 right
  /// ones (docs/validation.md "Band consistency").
  double consistency_band_half_width_factor = 0.0;
  /// How step 1 measures a line's position in a delay row: "band" (the band first moments
  /// above) or "profile" (a Poisson maximum-likelihood fit of every line as a Gaussian per row,
  /// retrieval/analysis/line_profiles.h, started from the bands' result: the whole profile
  /// informs the centre and the neighbours' tails are modelled; docs/validation.md "Row
  /// estimator").
  std::string row_estimator = "band";
  /// Rows whose band holds fewer background-subtracted counts are not used (>= 1).
  double min_row_counts = 10.0;
  /// Subtract the Coulomb-laser coupling delays (the corrected delay is always listed beside
  /// the raw one; this only says whether the correction is computed at all).
  bool coulomb_laser_correction = true;
  /// Charge of the residual ion seen by the photoelectron (> 0; 1 for neutral targets).
  double ion_charge = 1.0;
  /// When the delay-integrated detection placed the line pattern between two merged lines and
  /// the unstreaked edge rows resolve every line at another photon energy, take the line
  /// centres from the edge rows (measure_line_delays; a warning says so).
  bool reanchor_on_unstreaked_rows = true;
  /// Fit the analysed lines jointly with the pulse (full model,
  /// retrieval/analysis/multi_line_fit.h): its delays and strengths are then reported, the
  /// centre-of-energy ones beside them.
  bool joint_fit = true;

  /// Names and bounds of the numeric fields (retrieval/core/option_spec.h), for validation
  /// only: not echoed, no flag or config key (retrieve's --lines sets `names`).
  template <class Self, class V>
  static void describe(Self& self, V& v) {
    constexpr double kInf = std::numeric_limits<double>::infinity();
    auto number = [&](std::string_view name, auto& field, double min, bool min_open) {
      v(OptionSpec{.name = name,
                   .min = min,
                   .min_open = min_open,
                   .max = kInf,
                   .echo = false,
                   .batch = false},
        field);
    };
    number("bootstrap", self.bootstrap, 2, false);
    number("max_frequency_factor", self.max_frequency_factor, 1, true);
    number("band_iterations", self.band_iterations, 1, false);
    number("band_half_width_factor", self.band_half_width_factor, 1, true);
    number("consistency_band_half_width_factor", self.consistency_band_half_width_factor, 0, false);
    number("min_row_counts", self.min_row_counts, 1, false);
    number("ion_charge", self.ion_charge, 0, true);
    v(OptionSpec{.name = "row_estimator", .choices = "band|profile", .echo = false, .batch = false},
      self.row_estimator);
  }
  /// "" when valid; else names field, value and rule (the bounds above; no empty name).
  std::string validate() const;
};

/// One line's first moment versus delay (for the figure): measured points and the fitted curve.
struct LineCurve {
  std::string name;                 ///< "2p", "Kr 4p", ...
  std::vector<double> delay_fs;     ///< rows used
  std::vector<double> centroid_eV;  ///< first moment of the line's band
  std::vector<double> sigma_eV;     ///< its Poisson standard deviation
  std::vector<double> model_eV;     ///< the joint fit at the same delays
  double shift_as = 0.0;            ///< fitted delta_k (0 for the reference)
  double field_free_eV = 0.0;       ///< fitted a_k
  double gain = 1.0;                ///< fitted g_k
};

/// Per line: the numbers of one estimate (index as in the lines given).
struct LineDelayEstimate {
  std::vector<double> delay_as;            ///< delta_k (0 for the reference)
  std::vector<double> delay_cov_sigma_as;  ///< fit-covariance sigma of delta_k
  std::vector<double> strength;            ///< band counts over the reference's
  double reduced_chi2 = 0.0;
  /// Smallest distance of two analysed lines' field-free centres in units of the larger of
  /// their rms widths in a delay row (median of the per-row Gaussian fits,
  /// retrieval/analysis/line_profiles.h); 0 when not measured.
  double separation_widths = 0.0;
  bool ok = false;                ///< false when a line had too few usable rows
  std::string why_not;            ///< reason when !ok
  std::vector<LineCurve> curves;  ///< analysed lines, reference first
};

struct LineDelayResult {
  /// The lines given, with relative_delay_as (raw), its sigma, relative_strength and its sigma
  /// filled for the analysed ones and analysed = true on them.
  std::vector<LineEntry> lines;
  std::vector<LineCurve> curves;  ///< analysed lines, reference first
  /// Per analysed line (index into lines): Coulomb-laser coupling delay of that line (as),
  /// correction subtracted (as) and the corrected relative delay (as).
  std::vector<int> analysed;
  std::vector<double> clc_delay_as, clc_correction_as, corrected_delay_as;
  std::vector<double> delay_cov_sigma_as;  ///< the fit's own sigma per analysed line
  /// Band consistency (step 3b; empty when not measured), per analysed line (0 for the
  /// reference): d = delay at consistency_band_half_width_factor - delay at
  /// band_half_width_factor (as), and its paired bootstrap sigma (as; 0 with < 2 replicas).
  std::vector<double> band_difference_as, band_difference_sigma_as;
  double reduced_chi2 = 0.0;
  double separation_widths = 0.0;  ///< LineDelayEstimate::separation_widths of the scan
  int replicas_used = 0;
  std::vector<Param> extra;  ///< "lines.*" records for result.json
  std::vector<std::string> warnings;
  bool done = false;  ///< false when nothing was analysed (why in warnings)
};

/// Coulomb-laser coupling delay t_CLC (a.u.) of a photoelectron of kinetic energy W (a.u.)
/// streaked by an IR field of period T (a.u.): Z / (2W)^{3/2} [2 - ln(W T)] (header comment).
double coulomb_laser_delay_au(double kinetic_energy_au, double ir_period_au, double charge = 1.0);

/// First moments of one line's band, per delay row used (step 1 of the header comment).
struct LineMoments {
  std::string name;                  ///< for messages and the curve
  double momentum_au = 0.0;          ///< p_k of the line's field-free centre
  std::vector<double> delay_au;      ///< delay of each row used
  std::vector<double> moment_au;     ///< first moment M_k of the band in that row
  std::vector<double> variance_au2;  ///< its variance (> 0)
  double counts = 0.0;               ///< band counts summed over every row (for the strength)
};

/// Step 2 of the header comment alone: the joint weighted fit of the lines' first moments
/// (index 0 the reference) with A_eff a Fourier series on a period 1.5 x (t_hi - t_lo)
/// (at least one IR period) up to max_frequency_factor x omega. ok = false (why_not) when a
/// line has fewer than 8 rows.
LineDelayEstimate fit_line_moments(const std::vector<LineMoments>& moments, double t_lo_au,
                                   double t_hi_au, double ir_omega_au,
                                   double max_frequency_factor = 2.5);

/// One centre-of-energy estimate on counts (delays x energies, raw) minus a background per
/// energy bin (counts per row). `lines` are the lines to analyse (centres in
/// kinetic_energy_eV, index 0 the reference); ir_omega_au the IR frequency.
/// measure_separation = false skips the per-row Gaussian fits that give separation_widths (then
/// 0) unless options.row_estimator needs them (the bootstrap replicas use only the delays).
LineDelayEstimate centre_of_energy_estimate(const Eigen::MatrixXd& counts,
                                            const std::vector<double>& energy_au,
                                            const std::vector<double>& delay_au,
                                            const std::vector<double>& background_per_bin,
                                            const std::vector<LineEntry>& lines, double ir_omega_au,
                                            const LineDelayOptions& options,
                                            bool measure_separation = true);

/// Throws sw::Error (kUsage) when a name in options.names (other than "none") is not among the
/// lines (matched by name, or "GAS name"); the message lists the scan's lines.
void check_line_names(const std::vector<LineEntry>& lines, const LineDelayOptions& options,
                      const std::string& scan_gas);

/// The whole analysis (header comment) on a scan whose lines were found by preprocessing:
/// `lines` as in PreprocessSummary::lines (the reference flagged), background per energy bin
/// of the trace (counts per row). Throws sw::Error (kUsage) for bad options or a name in
/// options.names that is not among the lines (the message lists them).
LineDelayResult measure_line_delays(const Trace& trace, const std::vector<LineEntry>& lines,
                                    const std::vector<double>& background_per_bin,
                                    const LineDelayOptions& options);

}  // namespace sw
