#pragma once
// Preprocessing of a measured scan into an engine-ready RetrievalProblem, the steps a
// practitioner would otherwise do by hand. Each step is recorded (PreprocessSummary) and
// echoed into result.json under "preprocess".
//
//   1. background: the sidecar's value, or an estimate from signal-free energy bins (bins
//      outside the signal region -- first to last bin whose delay-averaged signal exceeds
//      `signal_free_fraction` of the maximum, widened by half its width on each side for the
//      wings -- and below that threshold); the mean of their counts, which is unbiased for
//      Poisson counts, unlike the median;
//   2. isolated hot pixels (optional, no smoothing): a pixel above the median of its 8
//      neighbours by more than `hot_pixel_sigma` Poisson standard deviations AND more than
//      `hot_pixel_ratio` times that median is replaced by the median;
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
//   7. the XUV grid: frequency step = energy step, size the next power of two >= 2x the number
//      of energy bins (so the measured band sits inside the FFT band with margin).

#include <string>
#include <vector>

#include "retrieval/engine.h"
#include "retrieval/support.h"
#include "retrieval/trace.h"

namespace sw {

struct PreprocessOptions {
  /// Fraction of the delay-averaged maximum below which an energy bin counts as signal-free.
  double signal_free_fraction = 0.02;   ///< in (0, 1)
  /// Minimum share of signal-free bins for an automatic background estimate.
  double min_signal_free_share = 0.05;  ///< in (0, 1)
  bool remove_hot_pixels = false;
  double hot_pixel_sigma = 8.0;         ///< > 0
  double hot_pixel_ratio = 5.0;         ///< > 1
  /// Largest centroid shift (fraction of the scan's largest) of a field-free edge row.
  double field_free_shift_fraction = 0.1;  ///< in (0, 1)
  /// XUV grid size; 0 = automatic (next power of two >= 2 x energy bins, at least 256).
  std::size_t grid_size = 0;
  /// Dipole model used by the engines.
  DipoleKind dipole = DipoleKind::kConstant;
  /// Energy support of the signal (retrieval/support.h); max_gap_eV = 0 -> 2 x IR photon energy.
  SupportOptions support;
  std::string validate() const;
};

struct PreprocessSummary {
  double background_counts = 0.0;       ///< per bin, subtracted
  std::string background_source;        ///< "sidecar", "signal-free bins", "none"
  std::size_t signal_free_bins = 0;
  std::size_t hot_pixels_replaced = 0;
  bool energy_resampled = false;
  double energy_step_eV = 0.0;
  double centroid_energy_eV = 0.0;      ///< photoelectron-spectrum centroid
  double central_momentum_au = 0.0;
  double bandwidth_fwhm_eV = 0.0;       ///< of the field-free photoelectron spectrum
  double bandwidth_ratio = 0.0;         ///< bandwidth / centroid energy (CMA validity)
  std::string field_free_source;        ///< "N edge rows ..." or "delay average"
  /// True when field-free (or weakly streaked) edge rows were found; otherwise the engines
  /// do not constrain the amplitude (the delay average is broadened by streaking).
  bool field_free_measured = false;
  /// What the reference spectrum is (RetrievalProblem::reference).
  ReferenceSpectrum reference = ReferenceSpectrum::kDelayAverage;
  std::size_t grid_size = 0;
  double grid_dt_as = 0.0;
  double total_counts = 0.0;
  double peak_counts = 0.0;
  /// Energy support of the signal (kinetic energy, eV), copied to RetrievalProblem::support_*.
  double support_lo_eV = 0.0, support_hi_eV = 0.0;
  double support_peak_sigma = 0.0;      ///< largest significance of the delay-integrated spectrum
  bool support_fills_window = false;    ///< the support reached both ends of the energy axis
  /// Width of the support before its margin over the energy axis (1 when none was found).
  double support_core_share = 1.0;
  /// Analysis energy window actually used (kinetic energy, eV): the user's/sidecar's
  /// energy_window_eV or the band chosen around the reference line; 0, 0 = whole axis.
  double window_lo_eV = 0.0, window_hi_eV = 0.0;
  /// Every photoelectron line found or declared (result.json "lines"); the one retrieved is
  /// marked reference and analysed.
  std::vector<LineEntry> lines;
  std::size_t saturated_bins = 0;       ///< given zero weight
  std::vector<std::string> warnings;
};

/// Builds the RetrievalProblem. Throws sw::Error(kInput) when the trace cannot be analysed
/// (no gas / no IR wavelength / all counts in background), naming the sidecar and the field.
RetrievalProblem preprocess(const Trace& trace, const PreprocessOptions& options,
                            PreprocessSummary* summary);

/// Poisson resample of a trace's counts (parametric bootstrap replica), seeded.
Trace poisson_resample(const Trace& trace, unsigned long long seed);

}  // namespace sw
