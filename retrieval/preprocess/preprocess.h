#pragma once
// Preprocessing of a measured scan into an engine-ready RetrievalProblem, the steps a
// practitioner would otherwise do by hand. Each step is recorded (PreprocessSummary) and
// echoed into result.json under "preprocess".
//
//   0. saturation: a plateau of identical maximal counts (at least `saturation_plateau_bins`
//      8-connected bins at the scan's largest value), or every bin at or above the sidecar's
//      saturation_counts; those bins get RetrievalProblem::weight = 0 (not data);
//   1. background: the sidecar's constant, or the model of retrieval/preprocess/background.h fitted
//   by
//      Poisson maximum likelihood over the delay-independent bins outside the signal envelope
//      (constant + significant low-energy tail + for time-of-flight scans the t^3-Jacobian
//      term), subtracted signed (unbiased);
//   2. isolated hot pixels (on by default, no smoothing; edge pixels compare with the
//      neighbours they have): a pixel c is replaced by the median of its 8 neighbours when it is
//      isolated in delay, c above `hot_pixel_ratio` x and `hot_pixel_sigma` Poisson sigmas over the
//      larger delay neighbour, AND in energy, c above `hot_pixel_sigma` sigmas over the larger
//      energy neighbour (sigma from the larger of it and the 8-neighbour mean) and
//      `hot_pixel_ratio` x the smaller one. A one-bin-wide harmonic is a ridge along delay and
//      stays; a row shifted by stage jitter has a high energy neighbour and stays;
//   2b. lines and window (retrieval/preprocess/lines.h): the lines of the gas (or the sidecar's)
//      found in the delay-integrated spectrum, or expected there (assumed present); the
//      strongest is the reference, analysed alone inside a window that excludes the others
//      (not for scans of kind rabbitt); where the window is cut at a subtracted neighbour
//      inside the reference's streaked band, one streaking range of bins beyond the cut stays
//      with zero weight (model-only margin; reference spectrum and support there from the
//      reference line's mirror image; docs/theory.md "Lines that are not seen");
//      options.energy_window_* and the sidecar's energy_window_eV override the window (in
//      that order);
//   3. energy resampling onto a uniform axis when the measured one is not uniform
//      (overlap rebinning of counts: conserves counts exactly); delay axes stay as measured
//      (the engines accept any delay grid);
//   4. counts per bin -> density per unit energy -> |a|^2 by dividing by p = sqrt(2W), the
//      d^3p -> dW Jacobian (DESIGN.md "Jacobians");
//   5. central momentum p0 from the centroid of the delay-averaged photoelectron spectrum
//      (DESIGN.md: the photoelectron, not the photon, spectrum);
//   6. the field-free spectrum: the mean of the delay rows least affected by the IR (rows at
//      the scan edges whose centroid shift is below `field_free_shift_fraction` of the
//      largest shift). Runs spanning at least one IR period are field-free (kFieldFree:
//      amplitude and centroid); shorter runs are only weakly streaked (kEdgeRows: shape only,
//      their centroid can be off by the residual shift); without such rows the
//      delay-averaged spectrum (kDelayAverage, field_free_measured = false): it is broadened
//      by the streaking, so it then serves as initial guess only;
//   4a. oversampled axes: k adjacent energy bins summed into one (counts, background and
//      neighbour-line estimates summed, a group with a saturated or model-only bin is one),
//      after the background, hot-pixel, line and window steps have run on the measured bins
//      (PreprocessOptions::energy_combine, retrieval/preprocess/energy_combine.h; the last
//      ne mod k bins are left out);
//   7. the XUV grid: frequency step = energy step, size the next power of two >= 2x the number
//      of energy bins (so the measured band sits inside the FFT band with margin).

#include <cstdint>
#include <string>
#include <vector>

#include "retrieval/core/trace.h"
#include "retrieval/engines/engine.h"
#include "retrieval/preprocess/background.h"
#include "retrieval/preprocess/lines.h"
#include "retrieval/preprocess/support.h"

namespace sw {

/// Step 2, isolated hot pixels (remove_hot_pixels below, the rule in the file comment); the
/// classifier despikes its evidence with the same options.
struct HotPixelOptions {
  bool remove = true;  ///< replace them
  double sigma = 8.0;  ///< hot_pixel_sigma: > 0, Poisson sigmas above the reference r
  double ratio = 5.0;  ///< hot_pixel_ratio: > 1, times the reference r
};

struct PreprocessOptions {
  /// Replace isolated hot pixels (step 2).
  HotPixelOptions hot_pixels;
  /// Smallest 8-connected plateau of bins at the scan's largest value taken as saturation.
  int saturation_plateau_bins = 3;  ///< >= 2
  /// Background model fit (retrieval/preprocess/background.h).
  BackgroundOptions background;
  /// Line detection (retrieval/preprocess/lines.h).
  LineOptions lines;
  /// Restrict the analysis to the reference line's window when other lines are found.
  bool window_reference_line = true;
  /// With the reference-line window: subtract the found neighbour lines per delay row
  /// (deblend_neighbours, retrieval/preprocess/lines.h) and keep the reference's whole streaked
  /// band.
  bool deblend_lines = true;
  DeblendOptions deblend;  ///< iterations of the neighbour estimate
  /// User's analysis window of photoelectron kinetic energy (eV); both 0 = none. Overrides
  /// the sidecar's energy_window_eV and the automatic window.
  double energy_window_lo_eV = 0.0, energy_window_hi_eV = 0.0;
  /// Largest centroid shift (fraction of the scan's largest) of a field-free edge row.
  double field_free_shift_fraction = 0.1;  ///< in (0, 1)
  /// Adjacent energy bins summed into one before the engines (step 4a): 0 = automatic, 1 =
  /// never, k >= 2 = always k. Automatic: the largest k whose XUV-grid time window h / (k dW)
  /// stays at least the three windows below and which leaves >= 64 bins (the rule and its
  /// reasons: retrieval/preprocess/energy_combine.h).
  int energy_combine = 0;
  double combine_min_window_periods = 6.0;      ///< > 0, IR periods (automatic combination)
  double combine_min_window_span_factor = 1.5;  ///< >= 0, x the delay span (automatic)
  double combine_min_window_lags = 12.0;        ///< >= 2, x the lag extent (automatic)
  double combine_noise_sigmas = 5.0;            ///< > 0 (automatic)
  /// XUV grid size; 0 = automatic (next power of two >= 2 x energy bins, at least 256).
  std::size_t grid_size = 0;
  /// Dipole model used by the engines.
  DipoleKind dipole = DipoleKind::kConstant;
  /// Energy support of the signal (retrieval/preprocess/support.h); max_gap_eV = 0 -> 2 x IR photon
  /// energy.
  SupportOptions support;
  std::string validate() const;
};

struct PreprocessSummary {
  double background_counts = 0.0;    ///< constant term per bin, subtracted
  std::string background_source;     ///< "sidecar", "fit" (Poisson ML), "none"
  std::size_t signal_free_bins = 0;  ///< energy bins the background fit used
  BackgroundModel background;        ///< the full model (model "sidecar constant" / "none" too)
  std::size_t hot_pixels_replaced = 0;
  bool energy_resampled = false;
  double energy_step_eV = 0.0;  ///< of the engines' axis (after step 4a)
  /// Step 4a: measured (or resampled) bins summed into one engine bin (1 = none), the step before
  /// the sum, and the bins at the top of the axis left out (fewer than energy_bins_combined).
  std::size_t energy_bins_combined = 1;
  double measured_energy_step_eV = 0.0;
  std::size_t energy_bins_left_out = 0;
  /// Lag extent of the signal (fs) measured by the automatic rule of step 4a (0 = not needed).
  double signal_lag_extent_fs = 0.0;
  double centroid_energy_eV = 0.0;  ///< photoelectron-spectrum centroid
  double central_momentum_au = 0.0;
  double bandwidth_fwhm_eV = 0.0;  ///< of the field-free photoelectron spectrum
  double bandwidth_ratio = 0.0;    ///< bandwidth / centroid energy (CMA validity)
  std::string field_free_source;   ///< "N edge rows ..." or "delay average"
  /// True when field-free (or weakly streaked) edge rows were found; otherwise the engines
  /// do not constrain the amplitude (the delay average is broadened by streaking).
  bool field_free_measured = false;
  /// Edge rows with a centroid shift below field_free_shift_fraction of the largest (0 = the
  /// whole scan is streaked: the spectral amplitude and the frequency shift are then set by a
  /// convention, not by the data; quality check field_free_rows).
  std::size_t field_free_rows = 0;
  /// What the reference spectrum is (RetrievalProblem::reference).
  ReferenceSpectrum reference = ReferenceSpectrum::kDelayAverage;
  std::size_t grid_size = 0;
  double grid_dt_as = 0.0;
  double total_counts = 0.0;
  double peak_counts = 0.0;
  /// Counts per delay row in the strongest analysed bin: the largest delay-average of the
  /// background-subtracted counts over the analysed bins (after the window and step 4a's sum).
  /// The counting statistics the engines see; `auto` refines a CMA result below
  /// RetrieveOptions::cma_min_signal_counts with the full model (retrieval/analysis/retrieve.h).
  double signal_peak_counts = 0.0;
  /// Energy support of the signal (kinetic energy, eV), copied to RetrievalProblem::support_*.
  double support_lo_eV = 0.0, support_hi_eV = 0.0;
  double support_peak_sigma = 0.0;    ///< largest significance of the delay-integrated spectrum
  bool support_fills_window = false;  ///< the support reached both ends of the energy axis
  /// Width of the support before its margin over the energy axis (1 when none was found).
  double support_core_share = 1.0;
  /// Analysis energy window actually used (kinetic energy, eV): the user's/sidecar's
  /// energy_window_eV or the band chosen around the reference line; 0, 0 = whole axis.
  double window_lo_eV = 0.0, window_hi_eV = 0.0;
  /// Every photoelectron line found or declared (result.json "lines"); the one retrieved is
  /// marked reference and analysed.
  std::vector<LineEntry> lines;
  /// Lines of the gas table expected inside the signal's support (after the window) but not
  /// seen (lines.h UnseenLine): quality check unseen_line_strength.
  std::vector<UnseenLine> unseen_lines;
  /// The line detection repeated on the unstreaked edge rows alone (lines.h
  /// compare_line_patterns): run when there are >= 3 such rows; "" when it agrees, else what
  /// differs (quality check line_pattern_agreement).
  bool line_pattern_checked = false;
  std::string line_pattern_disagreement;
  std::size_t saturated_bins = 0;        ///< given zero weight
  double saturation_level_counts = 0.0;  ///< counts at which saturation was found (0 = none)
  std::string saturation_source;         ///< "sidecar", "plateau" or "" (none)
  std::string window_source;             ///< "option", "sidecar", "reference line", "" (whole axis)
  /// Where the reference-line window is cut at a neighbour inside the reference's streaked band:
  /// the share of the reference's delay-summed counts beyond the cut, estimated by its mirror
  /// image about the line centre (0 = no such cut). Sets the window-cut part of the FWHM's
  /// systematic sigma (RetrieveOptions::window_cut_sigma_per_share).
  double window_cut_share = 0.0;
  double photon_energy_eV = 0.0;  ///< from the line pattern (0 = no line found)
  std::vector<std::string> warnings;
};

/// Builds the RetrievalProblem. Throws sw::Error(kInput) when the trace cannot be analysed
/// (no gas / no IR wavelength / all counts in background), naming the sidecar and the field.
RetrievalProblem preprocess(const Trace& trace, const PreprocessOptions& options,
                            PreprocessSummary* summary);

/// The photoelectron lines of a scan exactly as preprocess() finds them (background model, line
/// detection, the reference line analysed), for the analyses that do not preprocess (classify,
/// rabbitt): result.json "lines". A scan that preprocess() refuses gives no lines and the reason
/// in *why_not.
std::vector<LineEntry> scan_lines(const Trace& trace, const PreprocessOptions& options,
                                  std::string* why_not);

/// Step 2 alone: replaces the isolated hot pixels of `counts` (delays x energies) by the median
/// of their neighbours, by the rule in the header comment with k = hot_pixel_sigma and
/// ratio = hot_pixel_ratio; bins flagged in `saturated` (same shape, > 0 = saturated; may be
/// empty) are left alone. Returns the number replaced. Also used by the classifier, whose
/// spectral fringe test a single spike would fake (a delta in energy has flat fringes).
std::size_t remove_hot_pixels(Eigen::MatrixXd& counts, const Eigen::MatrixXd& saturated,
                              double hot_pixel_sigma, double hot_pixel_ratio);

/// Poisson resample of a trace's counts (parametric bootstrap replica), seeded. Saturated
/// bins (detect_saturation) keep their value and draws are clipped at the saturation level,
/// as the detector would.
Trace poisson_resample(const Trace& trace, unsigned long long seed);

/// Saturated bins of counts (delays x energies): 1 = saturated. By the sidecar level when
/// given (> 0), else by a plateau of at least `plateau_bins` 8-connected bins at the largest
/// value (relative tolerance 1e-9), which fixes the level: then every bin at it is saturated.
/// *level receives the level (0 when none).
Eigen::Matrix<std::uint8_t, Eigen::Dynamic, Eigen::Dynamic> detect_saturation(
    const Eigen::MatrixXd& counts, double sidecar_level, int plateau_bins, double* level);

/// The preprocessing record as result.json keys under "preprocess." (appended to `out`).
void append_preprocess_params(const PreprocessSummary& summary, std::vector<Param>* out);

/// The energy window an analysis applied, as preprocess.window_source (where it came from:
/// "option", "sidecar", "reference line"), preprocess.window_lo_eV and preprocess.window_hi_eV
/// (appended to `out`; the analyses without a PreprocessSummary write it this way too).
void append_window_params(const std::string& source, double lo_eV, double hi_eV,
                          std::vector<Param>* out);

}  // namespace sw
