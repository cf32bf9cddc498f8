#pragma once
// Pulse metrics computed from an XuvField (or sampled intensity), in atomic units unless a
// name says otherwise. All are pure functions of the field: no fitting state.

#include <vector>

#include "retrieval/xuv_field.h"

namespace sw {

/// FWHM of a sampled, non-negative profile y(x) on a uniform axis: the distance between the
/// outermost half-maximum crossings around the global maximum, each located by linear
/// interpolation between samples. Returns 0 when the profile does not fall below half maximum
/// on both sides (undefined width).
double fwhm(const std::vector<double>& x, const std::vector<double>& y);

/// Same but only the crossings around the main peak (walks outward from the maximum, stops at
/// the first crossing): the width of the main burst even when satellites exceed half maximum.
double fwhm_of_main_peak(const std::vector<double>& x, const std::vector<double>& y);

/// Intensity-weighted rms width sqrt(<t^2> - <t>^2).
double rms_width(const std::vector<double>& x, const std::vector<double>& y);

/// Temporal intensity FWHM of the field (a.u. of time), main peak.
double intensity_fwhm(const XuvField& f);
/// FWHM of the transform-limited pulse with the same spectral amplitude (flat phase).
double transform_limited_fwhm(const XuvField& f);
/// The flat-phase pulse with the same spectral amplitude, centred at t = 0.
XuvField transform_limited(const XuvField& f);

/// Polynomial fit of the spectral phase, weighted by spectral intensity, over the bins where
/// the intensity exceeds `threshold` of its maximum: phi(W) = sum c_k (W - W0)^k, k = 0..3,
/// W0 = intensity-weighted centre photon energy. gdd = 2 c_2, tod = 6 c_3 (a.u.).
struct SpectralPhaseFit {
  double center_photon_energy = 0.0;   ///< W0 (a.u.)
  double group_delay = 0.0;            ///< c_1 (a.u. of time)
  double gdd = 0.0;                    ///< a.u. of time^2
  double tod = 0.0;                    ///< a.u. of time^3
  double rms_residual_rad = 0.0;       ///< weighted rms of the fit residual
  double bandwidth_fwhm = 0.0;         ///< spectral intensity FWHM (a.u. of energy)
};
SpectralPhaseFit fit_spectral_phase(const XuvField& f, double threshold = 0.05, int order = 3);

/// Bursts separated by about half the driver period: the intensity of the largest satellite
/// peak within +-(T/2 +- T/8) of the main peak relative to the main peak's intensity, and the
/// fraction of the total energy within +-T/4 of the main peak.
struct BurstStructure {
  double main_peak_time = 0.0;         ///< a.u.
  double satellite_intensity_ratio = 0.0;
  double main_burst_energy_fraction = 1.0;
  int comparable_bursts = 1;           ///< bursts with peak >= 50 % of the main one
};
BurstStructure burst_structure(const XuvField& f, double driver_period_au);

}  // namespace sw
