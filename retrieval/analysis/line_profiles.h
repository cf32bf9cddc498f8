#pragma once
// Per-delay-row maximum-likelihood fit of several photoelectron lines as Gaussian profiles: the
// "profile" row estimator of the line-delay analysis (retrieval/analysis/line_delays.h,
// LineDelayOptions::row_estimator), an alternative to the band first moments of its step 1.
//
// Model of one delay row (raw counts c_j in energy bins j of width w_j, background b_j per bin,
// known):
//   mu_j = b_j + sum_k N_k w_j exp(-(W_j - x_k)^2 / (2 s_k^2)) / (sqrt(2 pi) s_k),
// three parameters per line: counts N_k, centre x_k and rms width s_k. They are the maximum of
// the Poisson likelihood, sum_j [c_j ln mu_j - mu_j], found by Fisher scoring (Gauss-Newton on
// the likelihood) with Levenberg-Marquardt damping; the covariance of the parameters is the
// inverse Fisher information F = sum_j grad mu_j grad mu_j^T / mu_j at the maximum (the
// Cramer-Rao bound the estimator reaches asymptotically: e.g. G. Cowan, Statistical Data
// Analysis, Oxford (1998), ch. 6-7).
//
// Why: every line's whole profile informs its centre, and the neighbours' tails are part of the
// model instead of being cut away or mirrored out. A band of +-1.5 rms that follows its own
// first moment (the band estimator) has the centre variance of the whole-line first moment
// times ~3 (D / N = 0.55, line_delays.h); a Gaussian fit reaches s^2 / N for a Gaussian line.
// The price is the shape assumption: for a line that is not Gaussian (skewed by an
// energy-dependent dipole, a chirp that reshapes the streaked spectrum) x_k is the centre of
// the best Gaussian, not the first moment; the delay analysis absorbs a constant offset (its
// a_k) and a proportional response (its gain g_k), not a delay-dependent skew.

#include <vector>

namespace sw {

/// Fit of one delay row (index k as in the starts given).
struct RowProfileFit {
  bool ok = false;                 ///< converged, every line with N_k > 0 and a finite variance
  std::vector<double> counts;      ///< N_k (counts of the line in the row, background excluded)
  std::vector<double> centre;      ///< x_k (units of the energy axis)
  std::vector<double> centre_var;  ///< variance of x_k from the inverse Fisher information
  std::vector<double> width;       ///< s_k
  int iterations = 0;
};

/// Options of fit_row_profiles (defaults: our choice, noted per field).
struct RowProfileOptions {
  /// The bins used: within this many start widths of any line's start centre.
  double window_widths = 4.0;
  /// A line's width must stay within [start / width_range, start x width_range]; its centre
  /// within max_shift_widths start widths of its start. Outside: not ok (a line lost in noise).
  double width_range = 3.0;
  double max_shift_widths = 3.0;
  int max_iterations = 40;
};

/// Fits the lines of one row. `counts`: raw counts per bin (ne values, row of the scan);
/// `energy` and `bin_width`: bin centres and widths (same units as the centres, ascending);
/// `background`: expected background counts per bin; `start_centre`, `start_width`: per line.
RowProfileFit fit_row_profiles(const double* counts, const std::vector<double>& energy,
                               const std::vector<double>& bin_width,
                               const std::vector<double>& background,
                               const std::vector<double>& start_centre,
                               const std::vector<double>& start_width,
                               const RowProfileOptions& options = {});

}  // namespace sw
