#pragma once
// Background model of a photoelectron scan, fitted over the whole scan.
//
// The background B(W) (counts per energy bin, per delay row) is the same in every delay row:
// stray and scattered electrons, detector dark counts and the low-energy tail of slow electrons
// do not depend on the XUV-IR delay, while the streaked photoelectron signal moves with it.
// The model is a sum of non-negative shapes, linear in their amplitudes:
//
//   B(W) = c                                      constant per energy bin (dark counts)
//        + a exp(-W / w)                          low-energy tail (optional, w fitted)
//        + d (W_ref / (W - W_off))^(3/2)          time-of-flight scans only: a constant per
//                                                 time bin seen on the energy axis, with the
//                                                 Jacobian |dt/dW| = (L/2) sqrt(m/2) (W -
//                                                 W_off)^(-3/2) ∝ t^3 (DESIGN.md "Jacobians");
//                                                 W_ref = the axis' lowest energy (so d is counts
//                                                 per bin there)
//
// Which bins are background. A bin j belongs to the background when (1) the counts of its
// delay rows are consistent with one constant: the dispersion index D = var_i / mean_i of the
// rows' counts (summed over `group_bins` neighbouring bins) is within `dispersion_sigma`
// standard deviations sqrt(2 / (rows - 1)) of its 10 % quantile over the axis (1 for pure
// Poisson counts; the quantile absorbs extra readout variance), and (2) it lies outside the
// signal envelope: the first to last group that fails (1) (scans with fewer than 4 rows: whose
// delay-averaged counts exceed `signal_fraction` of the maximum), widened by `envelope_margin`
// of its width on each side (streaked wings below the noise, which (1) cannot see).
//
// Fit: Poisson maximum likelihood on the delay-summed counts S_j = sum_i N_ij of the background
// bins, E[S_j] = rows * B(W_j). For a fixed decay w the model is linear in (c, a, d) and the ML
// solution is found by iteratively reweighted least squares (weights 1 / E[S_j]: McCullagh and
// Nelder, Generalized Linear Models, 2nd ed. (1989), identity link); w is profiled over a
// logarithmic grid and refined by a parabola through the three best points of the profile
// log-likelihood. The tail (and the time-of-flight term) is kept only when it raises
// 2 ln L by more than the 1 % point of the chi^2 distribution with the number of parameters
// it adds (Wilks' theorem; 9.21 for 2, 6.63 for 1); otherwise the simpler model stands.
// Sigmas are from the inverse Fisher information (the decay's from the profile curvature).
// Subtraction is signed: E[N - B] = 0 in background bins (clipping would bias them up).
//
// Onset. Spectrometers pass few electrons of the lowest energies, so a measured low-energy tail
// rises to a maximum before it decays; a exp(-W/w) fitted through the rising bins is pulled
// flat and the constant negative, which leaves a false line at high energy. When the leading
// background bins (from the axis start, below the signal) rise to a maximum of their
// `group_bins` sums that is at least twice the first sum and 5 Poisson sigmas above it, and
// decay again to half of it by the run's end (a streaked wing rising towards the signal does
// not; our choice), the bins below that maximum keep their own delay-averaged counts as the
// background (they are delay-independent, so this is unbiased) and the fit uses the bins from the
// maximum on. A tail that decays from the axis start is unaffected.

#include <string>
#include <vector>

#include <Eigen/Core>

namespace sw {

struct BackgroundOptions {
  /// Bins summed into one group for the dispersion test (>= 1).
  int group_bins = 4;
  /// Width of the dispersion-index band, in its standard deviations sqrt(2/(rows-1)) (> 0).
  double dispersion_sigma = 5.0;
  /// Scans with fewer than 4 delay rows: delay-averaged counts above this fraction of their
  /// maximum are signal (in (0, 1)).
  double signal_fraction = 0.02;
  /// Widening of the signal envelope on each side, as a fraction of its width (>= 0). The
  /// dispersion test sees a streaked wing down to a variance of ~0.6 background counts, so
  /// a small margin covers the Gaussian tails beyond it (our choice).
  double envelope_margin = 0.1;
  /// Smallest share of the energy bins that must be background for a fit (in (0, 1)).
  double min_background_share = 0.05;
  /// Fit the low-energy exponential tail a exp(-W/w) (kept only if significant).
  bool fit_tail = true;
  /// Range of the tail's decay energy w (eV), 0 < min < max.
  double tail_decay_min_eV = 1.0;
  double tail_decay_max_eV = 300.0;
  std::string validate() const;  ///< "" when valid; else names field, value and rule
};

/// The fitted model and its uncertainties (counts per bin per delay row; eV).
struct BackgroundModel {
  /// "none" (no fit possible), "sidecar constant", "constant", "constant + exponential tail",
  /// "constant + time-of-flight", "constant + exponential tail + time-of-flight".
  std::string model = "none";
  double constant_counts = 0.0, constant_counts_sigma = 0.0;
  bool has_tail = false;
  double tail_counts_at_zero = 0.0,
         tail_counts_at_zero_sigma = 0.0;                 ///< a: counts per bin at W = 0
  double tail_decay_eV = 0.0, tail_decay_eV_sigma = 0.0;  ///< w
  bool has_tof = false;
  double tof_counts = 0.0, tof_counts_sigma = 0.0;  ///< d: counts per bin at W_ref
  double tof_reference_eV = 0.0;                    ///< W_ref
  double tof_offset_eV = 0.0;                       ///< W_off (energy offset of the calibration)
  std::size_t background_bins = 0;                  ///< energy bins the fit used
  /// Onset of the tail (eV; 0 and empty tables = none): below it B(W) is each bin's own delay
  /// average, `below_onset_counts` at `below_onset_W_eV` (ascending); the fit starts here.
  double onset_eV = 0.0;
  std::vector<double> below_onset_W_eV, below_onset_counts;
  std::size_t rows = 0;       ///< delay rows summed
  double fit_deviance = 0.0;  ///< Poisson deviance of the fit over the background bins
  std::string note;           ///< why no fit, or which terms were rejected
  /// B(W) in counts per bin per row at kinetic energy W (eV).
  double at(double W_eV) const;
  /// Standard deviation of B(W) from the parameter covariance (delta method).
  double sigma_at(double W_eV) const;
  /// Covariance of (c, a, d) in the order of the terms present (internal; used by sigma_at).
  Eigen::MatrixXd covariance;
};

/// Which energy bins the fit may use (true = background), by the rule in the header comment.
/// counts: delays x energies, per bin.
std::vector<bool> background_bins(const Eigen::MatrixXd& counts, const BackgroundOptions& options);

/// Fits the model to counts (delays x energies, per bin) on the energy axis W (eV, ascending).
/// `time_of_flight`: add the t^3-Jacobian term with energy offset `tof_offset_eV`. A scan with
/// too few background bins gets model "none" with the reason in `note`.
BackgroundModel fit_background(const Eigen::MatrixXd& counts, const std::vector<double>& W_eV,
                               const BackgroundOptions& options, bool time_of_flight = false,
                               double tof_offset_eV = 0.0);

}  // namespace sw
