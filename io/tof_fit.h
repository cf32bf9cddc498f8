#pragma once
// Time-of-flight calibration fitted from the harmonic peaks of a TOF spectrum (common practice
// of attosecond labs: the XUV comb is a ruler of known photon energies).
//
// An odd-harmonic XUV comb of an IR field of angular frequency omega ionises a gas of
// ionization energy Ip; photoelectrons of harmonic q have the kinetic energy
//   E_q = q * hbar * omega - Ip                                   [eV]
// (hbar * omega = h c / lambda with h c from retrieval/core/units.h, CODATA 2018; Ip from the NIST
// ASD table of retrieval/physics/gas.h). The spectrometer maps flight time t to energy with
//   E(t) = (m_e / 2) (L / (t - t0))^2 / e + E_offset               (io/tof_calibration.h)
// and this module fits L, t0 (and optionally E_offset) so that the peaks land on E_q.
//
// Steps of fit_tof_calibration():
//  1. peaks: local maxima of the spectrum (after subtracting its lowest decile as a flat
//     background) higher than `min_peak_fraction` of the tallest, each with a window: the
//     contiguous bins around it above `window_fraction` of its height, cut at the valleys to its
//     neighbours;
//  2. order assignment: the initial calibration gives each peak an energy, hence a real-valued
//     order (E + Ip) / (hbar omega), rounded to the nearest allowed order (odd orders when
//     harmonic_step = 2); when E_offset is held fixed the assignment is also tried shifted by
//     up to `max_order_shift` allowed orders and the shift with the smallest residual wins
//     (this rescues an initial guess of L that is off by several per cent);
//  3. least squares (Levenberg-Marquardt on 2 or 3 parameters, analytic Jacobian): for every
//     peak the residual is  <E>_peak(L, t0, E_offset) - E_q, where <E>_peak is the count-
//     weighted mean of E(t_i) over the peak's time bins. The mean energy of the electrons of a
//     symmetric energy peak is its centre whatever the t^3 Jacobian does to the shape in time,
//     so the fit is not biased by the skew of peaks on the time axis;
//  4. reassignment with the fitted calibration and refit until the orders no longer change.
// Reported: the calibration, 1-sigma uncertainties from s^2 (J^T J)^-1 with
// s^2 = sum(residual^2) / (peaks - parameters), every peak with its order, energies and residual
// (eV and ns), and the rms residual.
//
// With E_offset free, shifting every order by one allowed step is exactly a change of E_offset
// by step * hbar omega: the order assignment then rests on the initial guess alone (said in
// the fit's message). Errors are sw::Error(kInput) naming the problem (too few peaks, axes of
// different length, invalid options or guess).

#include <string>
#include <vector>

#include "io/tof_calibration.h"

namespace sw {

struct TofFitOptions {
  /// Fit E_offset as a third parameter (else it stays at the initial guess's value).
  bool fit_energy_offset = false;
  /// Peaks lower than this fraction of the tallest peak (above background) are ignored, (0, 1).
  double min_peak_fraction = 0.05;
  /// A peak's window: contiguous bins above this fraction of its height, (0, 1).
  double window_fraction = 0.2;
  /// Spacing of allowed orders: 2 = odd harmonics only (XUV-only spectrum), 1 = every order
  /// (harmonics and RABBITT sidebands). Must be 1 or 2.
  int harmonic_step = 2;
  /// Largest shift (in allowed orders) of the initial assignment that is tried (>= 0; only
  /// when E_offset is not fitted).
  int max_order_shift = 3;
  /// Levenberg-Marquardt iterations per fit (>= 1).
  int max_iterations = 100;
  /// Empty if valid, else a message naming the field, its value and the constraint.
  std::string validate() const;
};

/// One harmonic peak used by the fit.
struct TofPeak {
  int order = 0;                    ///< harmonic order q assigned to the peak
  double time_ns = 0.0;             ///< count-weighted mean flight time of the peak window
  double counts = 0.0;              ///< counts in the window (background subtracted)
  double expected_energy_eV = 0.0;  ///< q hbar omega - Ip
  double fitted_energy_eV = 0.0;    ///< <E>_peak with the fitted calibration
  double residual_eV = 0.0;         ///< fitted - expected
  double residual_ns = 0.0;         ///< residual_eV / |dE/dt| at time_ns (time-axis equivalent)
};

struct TofCalibrationFit {
  /// The fitted calibration (energy_count and the energy window copied from the initial guess).
  TofCalibration calibration;
  double length_m_sigma = 0.0;          ///< 1-sigma of L (m)
  double t0_ns_sigma = 0.0;             ///< 1-sigma of t0 (ns)
  double energy_offset_eV_sigma = 0.0;  ///< 1-sigma of E_offset (0 when not fitted)
  std::vector<TofPeak> peaks;           ///< in ascending flight time
  double rms_residual_eV = 0.0;         ///< sqrt(mean residual_eV^2)
  double photon_energy_eV = 0.0;        ///< hbar omega used
  int order_shift = 0;     ///< shift of the initial assignment that won (allowed orders)
  int iterations = 0;      ///< LM iterations of the final fit
  bool converged = false;  ///< relative step below 1e-12 before max_iterations
  std::string message;     ///< one line: what was fitted, how well, caveats
};

/// Fits the calibration from one TOF spectrum: `counts[i]` counts in the bin centred at
/// `times_ns[i]` (strictly monotonic; sum over delays first for a scan). `ionization_energy_eV`
/// of the gas (> 0), `ir_wavelength_nm` of the driving field (> 0), `initial` the first guess
/// (its length_m > 0 and t0_ns before every peak). Throws sw::Error(kInput) when fewer than
/// parameters + 1 peaks are found or the inputs are inconsistent.
TofCalibrationFit fit_tof_calibration(const std::vector<double>& times_ns,
                                      const std::vector<double>& counts,
                                      double ionization_energy_eV, double ir_wavelength_nm,
                                      const TofCalibration& initial,
                                      const TofFitOptions& options = {});

}  // namespace sw
