#include "retrieval/physics/xuv_field.h"

#include <cmath>
#include <stdexcept>

#include "retrieval/core/units.h"

namespace sw {

XuvField::XuvField(TimeGrid grid, double carrier_au, CVec envelope)
    : grid_(grid), carrier_(carrier_au), envelope_(std::move(envelope)) {
  if (envelope_.size() != grid_.size())
    throw std::invalid_argument("XuvField: envelope size differs from the grid size");
}

XuvField XuvField::from_spectrum(TimeGrid grid, double carrier_au, const CVec& spectrum_centered) {
  const std::size_t n = grid.size();
  if (spectrum_centered.size() != n)
    throw std::invalid_argument("XuvField::from_spectrum: spectrum size differs from grid size");
  CVec s(n), e(n);
  for (std::size_t j = 0; j < n; ++j) s[centered_to_fft(j, n)] = spectrum_centered[j];
  to_time(grid, Fft(n), s, e);
  return XuvField(grid, carrier_au, std::move(e));
}

std::vector<double> XuvField::intensity() const {
  std::vector<double> I(envelope_.size());
  for (std::size_t i = 0; i < I.size(); ++i) I[i] = std::norm(envelope_[i]);
  return I;
}

CVec XuvField::spectrum() const {
  const std::size_t n = grid_.size();
  CVec s(n), c(n);
  to_spectrum(grid_, Fft(n), envelope_, s);
  for (std::size_t k = 0; k < n; ++k) c[fft_to_centered(k, n)] = s[k];
  return c;
}

std::vector<double> XuvField::photon_energies_au() const {
  std::vector<double> w(grid_.size());
  for (std::size_t j = 0; j < w.size(); ++j) w[j] = carrier_ + grid_.omega_centered(j);
  return w;
}

XuvField XuvField::with_carrier(double new_carrier_au) const {
  // E = env * exp(-i c t) = env * exp(-i (c - c') t) * exp(-i c' t)
  CVec e(envelope_.size());
  const double d = carrier_ - new_carrier_au;
  for (std::size_t i = 0; i < e.size(); ++i)
    e[i] = envelope_[i] * std::polar(1.0, -d * grid_.time(i));
  return XuvField(grid_, new_carrier_au, std::move(e));
}

double XuvField::mean_photon_energy_au() const {
  const CVec s = spectrum();
  double num = 0, den = 0;
  for (std::size_t j = 0; j < s.size(); ++j) {
    const double w = std::norm(s[j]);
    num += w * (carrier_ + grid_.omega_centered(j));
    den += w;
  }
  return den > 0 ? num / den : carrier_;
}

CVec XuvField::spectrum_at(const std::vector<double>& photon_energies_au) const {
  CVec s(photon_energies_au.size(), cdouble(0.0, 0.0));
  for (std::size_t j = 0; j < s.size(); ++j) {
    const double w = photon_energies_au[j] - carrier_;
    cdouble acc = 0.0;
    for (std::size_t n = 0; n < grid_.size(); ++n)
      acc += envelope_[n] * std::polar(1.0, w * grid_.time(n));
    s[j] = acc * grid_.dt();
  }
  return s;
}

XuvField XuvField::resampled(const TimeGrid& g) const {
  // The spectrum at the new grid's centred frequencies, zero beyond the old grid's Nyquist
  // frequency (the sum there is an alias).
  const double nyquist = units::kPi / grid_.dt();
  std::vector<double> omegas;
  std::vector<std::size_t> kept;
  for (std::size_t j = 0; j < g.size(); ++j)
    if (std::abs(g.omega_centered(j)) < nyquist) {
      omegas.push_back(carrier_ + g.omega_centered(j));
      kept.push_back(j);
    }
  const CVec inside = spectrum_at(omegas);
  CVec spec(g.size(), cdouble(0.0, 0.0));
  for (std::size_t k = 0; k < kept.size(); ++k) spec[kept[k]] = inside[k];
  return from_spectrum(g, carrier_, spec);
}

}  // namespace sw
