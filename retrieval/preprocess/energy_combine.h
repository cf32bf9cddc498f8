#pragma once
// Step 4a of preprocessing (preprocess.h): k adjacent bins of an oversampled energy axis summed
// into one before the engines, after the background, hot-pixel, line and window steps have run
// on the measured bins.
//
// Why. The XUV grid's frequency step is the energy step dW, so its time window is h / dW (a.u.:
// 2 pi / dW). A packet confined to a window T has spectra with no structure finer than h / T:
// on an axis finer than the packet needs, summing k bins loses nothing the engines can
// represent on the window h / (k dW), while the grid and every FFT shrink by k. But the engines
// sample the spectrum at bin centres while a sum of k bins integrates over k dW: structure at
// lag L is attenuated by sinc(pi k dW L / h) relative to the model.
//
// The factor k (PreprocessOptions::energy_combine): 0 = automatic, 1 = never, k >= 2 = always k
// (an error when fewer than 16 bins would be left). Automatic: the largest k whose window
// h / (k dW) stays at least
//   - combine_min_window_periods IR periods,
//   - combine_min_window_span_factor x the delay span (largest minus smallest delay), and
//   - combine_min_window_lags x the signal's lag extent (signal_lag_extent below, with
//     combine_noise_sigmas; measured only when the first two leave k >= 2),
// and which leaves >= 64 bins (k <= floor(ne / 64)); k = 1 when no such k >= 2 exists. A pulse
// train or distant satellites have a long lag extent and keep a fine axis. The lag factor 12
// keeps the sinc attenuation <= 1.1 % at the largest significant lag (sinc(pi / 12) = 0.989);
// with 3 (a window just free of aliasing, 17 % there) the high-count 2 % satellite scan
// sat2-ne, on 4x finer bins summed in threes, fitted above its noise floor and lost its trust.
//
// The sum (sum_energy_bins): groups of k bins from the axis start; counts, background and
// neighbour-line estimates are summed (counts conserved), a group is saturated (or model-only)
// when any of its bins is, its energy is the mean of its bins' centres; the last ne mod k bins
// are left out. The engine axis then has step k dW.

#include <cstddef>
#include <vector>

#include <Eigen/Core>

#include "retrieval/core/trace.h"
#include "retrieval/preprocess/preprocess.h"

namespace sw {

/// Largest time lag (a.u.) at which the delay rows' spectra still hold structure above the
/// counting noise. The Fourier transform over energy of a row's counts is the autocorrelation
/// of the photoelectron wave packet in time (Wiener-Khinchin), so its extent in lag bounds the
/// packet's duration, satellites and train included. Each row, minus the background `bg` (per
/// bin), is Hann-tapered (sin^2 over the ne bins: no leakage from the axis edges) and zero-padded
/// to n >= 2 ne (a power of two, >= 64); its power |F_m|^2 is summed over the rows. For Poisson
/// counts the noise adds sum_j w_j^2 max(c_j, 0) to every lag's power of a row (w the taper),
/// with a spread of that per row: lag m is signal when the summed power exceeds the summed noise
/// by `z` x the root of the summed squared row noises. Returns 2 pi m_last / (n dW) for the last
/// such m (0 when none); dW the energy step (a.u.).
double signal_lag_extent(const Eigen::MatrixXd& counts, const Eigen::VectorXd& bg, double dW,
                         double z);

/// The outcome of step 4a's rule.
struct EnergyCombineChoice {
  int k = 1;                          ///< bins summed into one (1 = none)
  double signal_lag_extent_fs = 0.0;  ///< the lag extent when the rule measured it, else 0
};

/// Step 4a's factor for a scan whose analysed axis holds `counts` (delay rows x bins of step dW,
/// a.u.) over the background `bg` (per bin): opt.energy_combine, or the automatic rule of the
/// header comment (the IR period from trace.meta.ir_wavelength_nm, the delay span from
/// trace.delay_au). Throws sw::Error (kUsage) when a forced k leaves fewer than 16 bins.
EnergyCombineChoice choose_energy_combine(const Trace& trace, const PreprocessOptions& opt,
                                          const Eigen::MatrixXd& counts, const Eigen::VectorXd& bg,
                                          double dW);

/// Sums groups of k >= 2 bins (header comment) of every per-bin quantity of the analysed axis,
/// in place: counts and neighbour-line estimates `blend` (delay rows x bins) summed, `saturated`
/// (> 0 = saturated) the group's largest, the background `bg` summed, the centres `energy_au`
/// averaged, `masked` (model-only bins; may be empty) set when any bin of the group is.
/// Returns the number of bins left out at the top of the axis (ne mod k).
std::size_t sum_energy_bins(int k, Eigen::MatrixXd& counts, Eigen::MatrixXd& blend,
                            Eigen::MatrixXd& saturated, Eigen::VectorXd& bg,
                            std::vector<double>& energy_au, std::vector<char>& masked);

}  // namespace sw
