#pragma once
// Builders of XUV fields on a TimeGrid (synthetic truth, initial guesses, tests).
//
// Fourier and phase conventions (DESIGN.md, retrieval/core/grid.h): E(t) ~ exp(-i Omega t) and
// E(t) = (1/2pi) Int dOmega E~(Omega) exp(-i Omega t). The spectral field is written
//   E~(Omega) = |E~(Omega)| exp(i phi(Omega)),
//   phi(Omega) = t_c (Omega - Omega0) + (GDD/2) (Omega - Omega0)^2 + (TOD/6) (Omega - Omega0)^3,
// so the group delay is t_g(Omega) = dphi/dOmega = t_c + GDD (Omega - Omega0) + (TOD/2) (...)^2:
//   - a linear phase +t_c (Omega - Omega0) delays the pulse: its peak sits at t = +t_c;
//   - positive GDD means higher photon energies arrive later ("positive chirp", the usual
//     attochirp sign of short-trajectory HHG emission; Mairesse et al., Science 302, 1540 (2003)).
// Times are measured on the XUV grid; t = 0 is the XUV reference (the delay axis says where
// the XUV sits relative to the IR). The grid is periodic (FFT): a pulse or burst placed beyond
// the time window wraps around, so builders keep every burst inside the window.
//
// Every parameter struct has in-class defaults and validate() (empty string when valid,
// otherwise a sentence naming the field, its value and the constraint); builders throw
// sw::Error (kUsage) with that sentence.

#include <string>
#include <vector>

#include "retrieval/physics/xuv_field.h"

namespace sw {

/// Gaussian spectrum of given photon-energy centre, transform-limited intensity FWHM, and
/// spectral phase coefficients (boundary units in the names).
///
/// Spectral amplitude exp(-(Omega-Omega0)^2 / (2 sigma_w^2)) with peak 1; sigma_w follows from
/// the Gaussian time-bandwidth product of intensity FWHMs, dt * dnu = 2 ln2 / pi = 0.441
/// (e.g. J.-C. Diels and W. Rudolph, Ultrashort Laser Pulse Phenomena, 2nd ed. (2006)):
/// sigma_w = 2 sqrt(ln 2) / transform_limited_fwhm.
struct GaussianXuvPulse {
  double center_eV = 95.0;                 ///< central photon energy Omega0, eV (> 0)
  double transform_limited_fwhm_as = 150;  ///< intensity FWHM of the flat-phase pulse, as (> 0)
  double gdd_as2 = 0.0;                    ///< GDD, as^2 (any sign)
  double tod_as3 = 0.0;                    ///< TOD, as^3 (any sign)
  double center_time_as = 0.0;             ///< group delay at Omega0, as: peak at t = +t_c

  /// Empty when valid, else a sentence naming the field, its value and the constraint.
  std::string validate() const;
};
/// The Gaussian pulse on the grid, carrier = Omega0. Throws sw::Error (kUsage) when
/// pulse.validate() fails.
XuvField make_gaussian_xuv(const TimeGrid& grid, const GaussianXuvPulse& pulse);

/// Tabulated spectrum: photon energies (eV, strictly ascending, >= 2 points), spectral intensity
/// (any unit, >= 0) and spectral phase (rad), linearly interpolated onto the grid's photon
/// energies carrier + omega_centered(j); zero outside the table. The spectral amplitude is
/// sqrt(intensity). The phase is interpolated as given: unwrap it first if it jumps by 2 pi.
/// Throws sw::Error (kInput) naming the inconsistency (sizes, ordering, negative intensity).
XuvField make_tabulated_xuv(const TimeGrid& grid, double carrier_eV,
                            const std::vector<double>& photon_energy_eV,
                            const std::vector<double>& spectral_intensity,
                            const std::vector<double>& spectral_phase_rad);

/// Train of bursts spaced by half the driver period T/2 with alternating sign (the odd-harmonic
/// comb of a symmetric gas-phase HHG train: q omega with q odd, spacing 2 omega; P. M. Paul et
/// al., Science 292, 1689 (2001)). Burst k (sign (-1)^k) is the given Gaussian pulse (including
/// its chirp) delayed to t_k = burst.center_time_as + k T/2, with field amplitude
/// sqrt(I_env(k T/2)), where I_env(t) = exp(-4 ln2 t^2 / train_fwhm^2) is the Gaussian train
/// intensity envelope centred on burst.center_time_as (t = 0 by default). The delays are applied
/// in the spectral domain as exp(i Omega t_k) with the absolute photon energy Omega, which is
/// what makes the comb sit at odd multiples of omega.
/// Only bursts with |k| <= max_bursts/2 whose centre lies at least T/4 inside the time window
/// are included (the FFT grid is periodic; a burst outside would wrap around).
struct XuvTrain {
  GaussianXuvPulse burst;               ///< one burst (at k = 0)
  double driver_wavelength_nm = 800.0;  ///< driver wavelength, nm (> 0): T = lambda / c
  double train_fwhm_fs = 10.0;          ///< intensity FWHM of the train envelope, fs (> 0)
  int max_bursts = 41;                  ///< bursts at k T/2 for |k| <= max_bursts/2 (>= 1)

  std::string validate() const;
};
XuvField make_xuv_train(const TimeGrid& grid, const XuvTrain& train);

/// Partial gating: a main burst at burst.center_time_as plus satellites at -T/2 and +T/2 from it
/// with field amplitudes sqrt(satellite_intensity_ratio) times the main burst's and opposite sign
/// (intensity ratio = satellite peak intensity / main peak intensity; the half-cycle sign flip of
/// HHG emission). Satellites are identical copies of the main burst (same chirp).
struct XuvWithSatellites {
  GaussianXuvPulse burst;                          ///< the main burst
  double driver_wavelength_nm = 800.0;             ///< driver wavelength, nm (> 0)
  double satellite_intensity_ratio_before = 0.05;  ///< satellite at -T/2 (>= 0)
  double satellite_intensity_ratio_after = 0.05;   ///< satellite at +T/2 (>= 0)

  std::string validate() const;
};
XuvField make_xuv_with_satellites(const TimeGrid& grid, const XuvWithSatellites& p);

/// Driver optical period T = lambda / c in a.u. for a vacuum wavelength in nm (via units.h).
double driver_period_au(double driver_wavelength_nm);

}  // namespace sw
