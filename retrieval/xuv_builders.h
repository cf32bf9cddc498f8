#pragma once
// Builders of XUV fields on a TimeGrid. Spectral phase convention (with E ~ exp(-i Omega t)):
//   E~(Omega) = |E~(Omega)| exp(i phi(Omega)),
//   phi(Omega) = (GDD/2) (Omega - Omega0)^2 + (TOD/6) (Omega - Omega0)^3,
// so the group delay is t_g(Omega) = dphi/dOmega = GDD (Omega - Omega0): positive GDD means
// higher photon energies arrive later ("positive chirp", the usual attochirp sign).
// Times are measured on the XUV grid; t = 0 is the XUV reference (the delay axis says where
// the XUV sits relative to the IR).

#include <vector>

#include "retrieval/xuv_field.h"

namespace sw {

/// Gaussian spectrum of given photon-energy centre, transform-limited intensity FWHM, and
/// spectral phase coefficients (boundary units in the names).
struct GaussianXuvPulse {
  double center_eV = 95.0;               ///< central photon energy Omega0
  double transform_limited_fwhm_as = 150;///< intensity FWHM of the flat-phase pulse
  double gdd_as2 = 0.0;                  ///< GDD, as^2
  double tod_as3 = 0.0;                  ///< TOD, as^3
  double center_time_as = 0.0;           ///< group delay at Omega0 (shifts the pulse)
};
XuvField make_gaussian_xuv(const TimeGrid& grid, const GaussianXuvPulse& pulse);

/// Tabulated spectrum: photon energies (eV, ascending), spectral intensity (any unit, >= 0) and
/// spectral phase (rad), linearly interpolated onto the grid; zero outside the table.
XuvField make_tabulated_xuv(const TimeGrid& grid, double carrier_eV,
                            const std::vector<double>& photon_energy_eV,
                            const std::vector<double>& spectral_intensity,
                            const std::vector<double>& spectral_phase_rad);

/// Train of bursts spaced by half the driver period T/2 with alternating sign (the odd-harmonic
/// comb of a symmetric gas-phase HHG train). Each burst is a Gaussian pulse (the given one,
/// including its chirp); bursts are weighted by a Gaussian train envelope of the given
/// intensity FWHM (fs), centred on t = 0.
struct XuvTrain {
  GaussianXuvPulse burst;
  double driver_wavelength_nm = 800.0;
  double train_fwhm_fs = 10.0;
  int max_bursts = 41;                   ///< bursts at k T/2 for |k| <= max_bursts/2
};
XuvField make_xuv_train(const TimeGrid& grid, const XuvTrain& train);

/// Partial gating: a main burst at t = 0 plus satellites at -T/2 and +T/2 with field
/// amplitudes sqrt(satellite_intensity_ratio) times the main burst's and opposite sign
/// (intensity ratio = satellite peak intensity / main peak intensity).
struct XuvWithSatellites {
  GaussianXuvPulse burst;
  double driver_wavelength_nm = 800.0;
  double satellite_intensity_ratio_before = 0.05;  ///< satellite at -T/2
  double satellite_intensity_ratio_after = 0.05;   ///< satellite at +T/2
};
XuvField make_xuv_with_satellites(const TimeGrid& grid, const XuvWithSatellites& p);

}  // namespace sw
