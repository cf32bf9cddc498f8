#include "retrieval/physics/satellite_seed.h"

#include <cmath>

#include "retrieval/core/error.h"

namespace sw {

XuvField with_satellites(const XuvField& x, double delay_au, double intensity_ratio, double sign) {
  if (!(delay_au > 0) || !(intensity_ratio > 0) || !(std::abs(sign) == 1.0))
    throw usage_error("with_satellites: need delay > 0, intensity ratio > 0 and sign +-1");
  // Exact shifts by the Fourier shift theorem: E(t - tau) <-> E~(Omega) exp(+i Omega tau)
  // (retrieval/core/grid.h convention), on the absolute photon energy Omega. Circular on the grid:
  // the grid's window holds the burst and both copies when it spans more than 2 tau + burst.
  const double c = sign * std::sqrt(intensity_ratio);
  CVec spec = x.spectrum();
  const std::vector<double> W = x.photon_energies_au();
  for (std::size_t j = 0; j < spec.size(); ++j)
    spec[j] *= 1.0 + 2.0 * c * std::cos(W[j] * delay_au);
  return XuvField::from_spectrum(x.grid(), x.carrier_au(), spec);
}

}  // namespace sw
