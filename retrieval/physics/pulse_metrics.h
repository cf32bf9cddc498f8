#pragma once
// Pulse metrics computed from an XuvField (or sampled intensity), in atomic units unless a
// name says otherwise. All are pure functions of the field: no fitting state.
//
// Field-based metrics treat the time grid as periodic (it is an FFT grid): a pulse that
// straddles the window edge is measured as one pulse, and burst windows wrap around.
// Programmer errors (mismatched axis lengths, a non-positive period, a bad fit order) throw
// sw::Error with a message naming the argument.

#include <vector>

#include "retrieval/physics/xuv_field.h"

namespace sw {

/// FWHM of a sampled, non-negative profile y(x) on an ascending axis: the distance between the
/// outermost half-maximum crossings around the global maximum (first sample >= max/2 from the
/// left, last from the right), each located by linear interpolation between samples. Returns 0
/// when the profile does not fall below half maximum on both sides (undefined width), or when it
/// has fewer than 3 samples or no positive maximum.
double fwhm(const std::vector<double>& x, const std::vector<double>& y);

/// Same but only the crossings around the main peak (walks outward from the maximum, stops at
/// the first crossing): the width of the main burst even when satellites exceed half maximum.
double fwhm_of_main_peak(const std::vector<double>& x, const std::vector<double>& y);

/// FWHM of the main peak of a periodic profile I sampled with step dt over one period (the
/// profile is rotated so its maximum sits mid-window first); `imax`, when given, receives the
/// index of the maximum. Same units as dt.
double periodic_main_peak_fwhm(const std::vector<double>& I, double dt,
                               std::size_t* imax = nullptr);

/// Intensity-weighted rms width sqrt(<x^2> - <x>^2) (0 when the weights sum to 0).
double rms_width(const std::vector<double>& x, const std::vector<double>& y);

/// Temporal intensity FWHM of the field (a.u. of time), main peak (periodic grid: the profile is
/// rotated so the maximum sits mid-window before measuring). When the main peak spans fewer
/// than `min_samples_per_fwhm` samples of the field's grid, the field is first interpolated
/// onto a finer grid by zero-padding its spectrum (refine_time_grid: band-limited, exact for
/// a field whose spectrum lies inside the grid's band), so that a coarse grid does not bias
/// the width (linear interpolation of the half-maximum crossings on a 3-sample Gaussian is off
/// by up to ~10 %). 0 disables the refinement.
double intensity_fwhm(const XuvField& f, int min_samples_per_fwhm = 16);
/// FWHM of the transform-limited pulse with the same spectral amplitude (flat phase), measured
/// like intensity_fwhm.
double transform_limited_fwhm(const XuvField& f, int min_samples_per_fwhm = 16);
/// The same field on a grid `factor` times finer over the same window (its spectrum zero-padded
/// at both ends; the physical spectrum E~(Omega) is unchanged). factor >= 1.
XuvField refine_time_grid(const XuvField& f, std::size_t factor);
/// The field with its spectrum set to zero at photon energies outside [lo_au, hi_au]
/// (a.u.; the energy support of the signal, photon energy = kinetic energy + Ip).
XuvField within_band(const XuvField& f, double lo_au, double hi_au);
/// Share of the spectral energy sum |E~|^2 at photon energies outside [lo_au, hi_au]
/// (0 when the spectrum is empty).
double spectral_energy_outside(const XuvField& f, double lo_au, double hi_au);
/// The flat-phase pulse with the same spectral amplitude |E~(Omega)| and carrier, centred at
/// t = 0.
XuvField transform_limited(const XuvField& f);

/// Polynomial fit of the spectral phase, weighted by spectral intensity, over the bins where
/// the intensity exceeds `threshold` of its maximum: phi(W) = sum c_k (W - W0)^k, k = 0..order,
/// W0 = intensity-weighted centre photon energy of those bins. gdd = 2 c_2, tod = 6 c_3 (a.u.;
/// 0 when order is too low). Before the fit the phase is unwrapped along photon energy over the
/// selected bins, walking outward from the spectral maximum (each bin is brought within pi of the
/// previously visited selected bin, so gaps such as those of a harmonic comb are bridged by the
/// nearest selected neighbour). Weighted linear least squares (Eigen, QR on a scaled energy
/// axis). Sign convention of retrieval/physics/xuv_builders.h: group delay = dphi/dW; a pulse
/// peaking at t = +T has group_delay = +T; positive gdd = higher photon energies later. threshold
/// in (0, 1), order in 1..6; throws sw::Error (kUsage) otherwise, and (kNumeric) when fewer than
/// order+1 bins pass the threshold.
struct SpectralPhaseFit {
  double center_photon_energy = 0.0;  ///< W0 (a.u.)
  double group_delay = 0.0;           ///< c_1 (a.u. of time)
  double gdd = 0.0;                   ///< a.u. of time^2
  double tod = 0.0;                   ///< a.u. of time^3
  double rms_residual_rad = 0.0;      ///< weighted rms of the fit residual
  double bandwidth_fwhm = 0.0;        ///< spectral intensity FWHM (a.u. of energy), outermost
  int bins_used = 0;                  ///< spectral bins above the threshold
};
SpectralPhaseFit fit_spectral_phase(const XuvField& f, double threshold = 0.05, int order = 3);

/// Bursts separated by about half the driver period T (periodic time grid):
///  - main peak: the maximum of |E(t)|^2 (position refined by a 3-point parabola in log I);
///  - satellite_intensity_ratio: the largest intensity within the windows centred at
///    main +- T/2 of half-width T/8, relative to the main peak intensity (local maxima refined
///    like the main peak);
///  - main_burst_energy_fraction: the fraction of sum |E|^2 within +-T/4 of the main peak;
///  - comparable_bursts: local maxima found in windows of half-width T/8 centred at main + k T/2
///    (k = 0, +-1, ... while the windows fit in the grid without overlapping their wrapped
///    images) whose peak is >= 50 % of the main one; the main burst counts, so 1 = isolated.
/// Thresholds for the verdict live with the verdict (DESIGN.md), not here.
struct BurstStructure {
  double main_peak_time = 0.0;  ///< a.u.
  double satellite_intensity_ratio = 0.0;
  double main_burst_energy_fraction = 1.0;
  int comparable_bursts = 1;  ///< bursts with peak >= 50 % of the main one
};
BurstStructure burst_structure(const XuvField& f, double driver_period_au);

}  // namespace sw
