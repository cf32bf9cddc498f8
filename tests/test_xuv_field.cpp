// XuvField on another time grid (retrieval/physics/xuv_field.h, resampled).
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>

#include "retrieval/core/grid.h"
#include "retrieval/physics/xuv_field.h"

using namespace sw;

TEST_CASE("an XUV field resampled onto a finer, shifted grid keeps its envelope", "[xuv]") {
  // A chirped Gaussian envelope exp(-(1 + i b) t^2 / (2 s^2)) (a.u.) sampled on a coarse grid
  // and carried to a grid of half the step and another start: the resampled envelope must match
  // the same formula at the new times. The band limit of the coarse grid (pi / dt = 2.35 a.u.)
  // is far above the pulse's bandwidth (~ sqrt(1 + b^2) / s = 0.24 a.u.), so trigonometric
  // interpolation is exact up to the Gaussian's tails at the grid edges (Shannon sampling
  // theorem; standard numerics).
  const double s = 6.0, b = 0.8, carrier = 3.5;
  auto envelope = [&](double t) {
    return std::exp(-std::complex<double>(1.0, b) * t * t / (2 * s * s));
  };
  const TimeGrid coarse(256, 1.3357, -170.0);
  CVec e(coarse.size());
  for (std::size_t i = 0; i < e.size(); ++i) e[i] = envelope(coarse.time(i));
  const XuvField x(coarse, carrier, e);
  const TimeGrid fine(512, 0.66785, -160.3);
  const XuvField y = x.resampled(fine);
  REQUIRE(y.grid().size() == fine.size());
  CHECK(y.carrier_au() == carrier);
  double worst = 0;
  for (std::size_t i = 0; i < fine.size(); ++i)
    worst = std::max(worst, std::abs(y.envelope()[i] - envelope(fine.time(i))));
  CHECK(worst < 1e-9);
  // The same grid gives the same samples (up to rounding of the direct sums).
  const XuvField z = x.resampled(coarse);
  for (std::size_t i = 0; i < coarse.size(); ++i) CHECK(std::abs(z.envelope()[i] - e[i]) < 1e-9);
}
