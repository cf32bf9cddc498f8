#pragma once
// The exact XUV field of a scan configuration, built with the retrieval builders
// (retrieval/physics/xuv_builders.h) on a grid the generator chooses for the quadrature:
//
//   step   h = min(2 pi / (D + B + g), pi / B) / oversampling, where D = largest detuning
//            |W + Ip - Omega_c| of the energy axis, B = half-width of the XUV spectrum about
//            the carrier (where the spectral amplitude has fallen to 1e-9: 6.5 sigma_w for a
//            Gaussian spectrum), g = gate spread (SfaQuadrature::gate_spread). The first bound
//            keeps the trapezoidal quadrature free of aliasing, the second lets the grid
//            represent the spectrum.
//   window an estimate of the field's extent (bursts, chirp-induced group delays, 3.9
//            transform-limited FWHM of Gaussian tails), doubled until the envelope within the
//            outer 2 % of the window is below edge_tolerance of its peak (FFT grids are
//            periodic: a field touching the edge would wrap around), up to
//            xuv_max_window_au(); the window with the lowest edge level is kept.
//
// Tabulated spectra: make_tabulated_xuv interpolates the table linearly, which multiplies the
// field by sinc^2(delta t / 2) and replicates it at multiples of 2 pi / delta (delta = table
// spacing): weak echoes of relative amplitude ~ (delta tau)^2 / (4 pi^2) for a pulse of
// duration tau. The window is kept below 0.8 * 2 pi / delta_min so that the first echo stays
// outside it; use a table fine enough for the echo level to be below edge_tolerance.

#include <string>

#include "retrieval/physics/xuv_field.h"
#include "synthetic/scan_config.h"

namespace sw::synthetic {

/// Carrier photon energy Omega_c (a.u.) of the configured field (burst centre or table carrier).
double xuv_carrier_au(const XuvConfig& xuv);
/// Half-width B (a.u.) of the spectral support about the carrier (see above).
double xuv_half_bandwidth_au(const XuvConfig& xuv);
/// Estimated half-extent (a.u.) of the field in time about t = 0.
double xuv_half_extent_au(const XuvConfig& xuv);

/// The configured field on the given grid (dispatch to the retrieval builders).
XuvField build_xuv(const XuvConfig& xuv, const TimeGrid& grid);

struct BuiltXuv {
  XuvField field;
  bool edges_ok = true;     ///< false when the window limit was hit before the edges cleared
  double edge_level = 0.0;  ///< max |envelope| in the outer 2 % relative to the peak
};

/// Largest useful time window (a.u.): 0.8 * 2 pi / (smallest table spacing) for tabulated
/// spectra, unlimited (infinity) otherwise.
double xuv_max_window_au(const XuvConfig& xuv);

/// Builds the field on a centred grid of step `step_au`, the window sized as described above
/// (at most max_points samples).
BuiltXuv build_xuv_auto(const XuvConfig& xuv, double step_au, double edge_tolerance,
                        std::size_t max_points = std::size_t(1) << 20);

/// The same field on a centred grid with a step <= max_step_au and a window >= both the given
/// grid's and min(min_window_au, xuv_max_window_au()) (finer spectral bins), for pulse metrics.
XuvField refine_xuv(const XuvConfig& xuv, const TimeGrid& grid, double max_step_au,
                    double min_window_au);

/// Rough spectral intensity FWHM (a.u.) of the configured field: 4 ln2 / TL FWHM for Gaussian
/// bursts, 1/16 of the table's span for a table.
double xuv_spectral_scale_au(const XuvConfig& xuv);

}  // namespace sw::synthetic
