// The satellite start of the full model (retrieval/physics/satellite_seed.h): intensities of the
// satellites and the spectral fringes they make, checked against the Fourier shift theorem.
#include <catch2/catch.hpp>

#include <cmath>

#include "retrieval/core/units.h"
#include "retrieval/physics/satellite_seed.h"

using namespace sw;

namespace {

// A 100 as (intensity FWHM) Gaussian burst at 100 eV, centred on a 512-point grid.
XuvField burst() {
  const TimeGrid g = TimeGrid::for_energy_step(512, units::eV_to_au(0.25));
  const double tf = units::as_to_au(100);
  CVec e(g.size());
  for (std::size_t i = 0; i < g.size(); ++i) {
    const double t = g.time(i);
    e[i] = std::exp(-2 * std::log(2.0) * t * t / (tf * tf));
  }
  return XuvField(g, units::eV_to_au(100.0), std::move(e));
}

}  // namespace

TEST_CASE("satellites at -+T/2 carry the requested intensity ratio", "[satellite]") {
  const XuvField x = burst();
  const double T = 2.0 * 40.0 * x.grid().dt();  // ~2.6 fs (an 800 nm period), T/2 on a sample
  const XuvField s = with_satellites(x, 0.5 * T, 0.2, -1.0);
  const std::vector<double> I = s.intensity();
  const TimeGrid& g = s.grid();
  auto at = [&](double t) {
    return I[static_cast<std::size_t>(std::lround((t - g.t0()) / g.dt()))];
  };
  // The copies do not overlap (100 as bursts 1.3 fs apart): |c|^2 = ratio at their peaks
  // (intensity ~ |E|^2; the definition of the ratio in retrieval/physics/pulse_metrics.h).
  CHECK(at(0.5 * T) / at(0.0) == Approx(0.2).epsilon(0.01));
  CHECK(at(-0.5 * T) / at(0.0) == Approx(0.2).epsilon(0.01));
  CHECK(at(0.25 * T) / at(0.0) < 1e-6);
}

TEST_CASE("the seeded field equals time-shifted copies of the burst", "[satellite]") {
  // A copy delayed by tau of E(t) = env(t) exp(-i Omega_c t) is env(t - tau) exp(-i Omega_c t)
  // exp(+i Omega_c tau): written out analytically here and compared with the spectral-domain
  // construction (Fourier shift theorem, e.g. Bracewell, The Fourier Transform and Its
  // Applications, 3rd ed. (2000), ch. 6).
  const XuvField x = burst();
  const TimeGrid& g = x.grid();
  const double tau = units::fs_to_au(1.335), tf = units::as_to_au(100), wc = x.carrier_au();
  auto env = [&](double t) { return std::exp(-2 * std::log(2.0) * t * t / (tf * tf)); };
  for (const double sign : {-1.0, 1.0}) {
    const XuvField s = with_satellites(x, tau, 0.15, sign);
    const double c = sign * std::sqrt(0.15);
    double worst = 0;
    for (std::size_t i = 0; i < g.size(); ++i) {
      const double t = g.time(i);
      const cdouble expect = env(t) + c * (env(t - tau) * std::polar(1.0, wc * tau) +
                                           env(t + tau) * std::polar(1.0, -wc * tau));
      worst = std::max(worst, std::abs(s.envelope()[i] - expect));
    }
    INFO("sign " << sign);
    CHECK(worst < 1e-7);  // FFT rounding; the Gaussian is band-limited to ~1e-12
  }
}

TEST_CASE("with_satellites rejects meaningless arguments", "[satellite]") {
  const XuvField x = burst();
  CHECK_THROWS(with_satellites(x, 0.0, 0.2, 1.0));
  CHECK_THROWS(with_satellites(x, 10.0, -0.1, 1.0));
  CHECK_THROWS(with_satellites(x, 10.0, 0.2, 0.5));
}
