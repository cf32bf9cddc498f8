#pragma once
// The XUV field on a time grid, with time and spectral views.
//
// Representation: complex analytic field E_X(t) = envelope(t) * exp(-i carrier * t), where the
// carrier (a.u., = central photon energy in a.u.) is a reference frequency only: the envelope
// may carry any phase, so the same field can be re-expressed about another carrier exactly.
// The spectral view is E~(Omega) on photon energies Omega = carrier + w_k (ascending order).

#include <vector>

#include "retrieval/core/grid.h"

namespace sw {

class XuvField {
 public:
  XuvField() = default;
  XuvField(TimeGrid grid, double carrier_au, CVec envelope);
  /// Build from the spectral view: spectrum[j] at photon energy carrier + grid.omega_centered(j).
  static XuvField from_spectrum(TimeGrid grid, double carrier_au, const CVec& spectrum_centered);

  const TimeGrid& grid() const { return grid_; }
  double carrier_au() const { return carrier_; }
  const CVec& envelope() const { return envelope_; }
  CVec& envelope() { return envelope_; }

  /// Temporal intensity |E(t)|^2 on grid().times().
  std::vector<double> intensity() const;
  /// Spectral amplitude E~(Omega_j), ascending photon energy (centred order).
  CVec spectrum() const;
  /// Photon energies (a.u.) of spectrum() bins.
  std::vector<double> photon_energies_au() const;
  /// The same field with its envelope expressed about another carrier.
  XuvField with_carrier(double new_carrier_au) const;
  /// Intensity-weighted centre photon energy (a.u.).
  double mean_photon_energy_au() const;
  /// E~(Omega) at any photon energies Omega (a.u.) by direct summation over the grid,
  /// dt sum_n env_n exp(i (Omega - carrier) t_n) (the convention of spectrum()); O(size x count).
  CVec spectrum_at(const std::vector<double>& photon_energies_au) const;
  /// The same field on another time grid (same carrier): its spectrum evaluated by direct
  /// summation at the new grid's frequencies (trigonometric interpolation of the envelope; zero
  /// outside the old grid's span), O(old size x new size). Used where an estimate made on one
  /// grid starts an engine on another (e.g. a bootstrap replica whose support changed).
  XuvField resampled(const TimeGrid& grid) const;

 private:
  TimeGrid grid_;
  double carrier_ = 0.0;
  CVec envelope_;
};

}  // namespace sw
