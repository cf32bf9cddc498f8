// The gate's phase factors (retrieval/physics/phase_factors.h) against the C library.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <limits>
#include <random>
#include <vector>

#include "retrieval/physics/phase_factors.h"

using sw::detail::sincos_affine;

namespace {

// Largest |s - sin x|, |c - cos x| over the samples, x = a u + b v as the kernel forms it up to
// rounding (b = 0 below: x = u exactly).
double max_error(const std::vector<double>& x, const std::vector<double>& s,
                 const std::vector<double>& c) {
  double e = 0.0;
  for (std::size_t i = 0; i < x.size(); ++i)
    e = std::max({e, std::abs(s[i] - std::sin(x[i])), std::abs(c[i] - std::cos(x[i]))});
  return e;
}

}  // namespace

TEST_CASE("sincos_affine agrees with std::sin and std::cos", "[phase_factors]") {
  // Reference: std::sin / std::cos (C library, correctly rounded in practice for these
  // arguments). Bound: 3e-16 absolute (under 3 ulp of a result near 1), from the kernel's
  // polynomials (truncation < 1e-19) plus the rounding of the reduction and the quadrant.
  std::mt19937_64 rng(11);
  for (const double range : {0.7, 3.2, 40.0, 1e4}) {
    std::uniform_real_distribution<double> d(-range, range);
    const std::size_t n = 4099;  // not a multiple of the vector width: the tail too
    std::vector<double> u(n), v(n, 0.0), s(n), c(n);
    for (double& x : u) x = d(rng);
    sincos_affine(u.data(), v.data(), 1.0, 0.0, range, s.data(), c.data(), n);
    INFO("|x| <= " << range);
    CHECK(max_error(u, s, c) < 3e-16);
  }
  // Quadrant boundaries: multiples of pi/4 and pi/2 and their neighbours, both signs.
  std::vector<double> u, v;
  for (int k = -40; k <= 40; ++k)
    for (const double dx : {-1e-9, 0.0, 1e-9}) u.push_back(k * (M_PI / 4) + dx);
  v.assign(u.size(), 0.0);
  std::vector<double> s(u.size()), c(u.size());
  sincos_affine(u.data(), v.data(), 1.0, 0.0, 40.0, s.data(), c.data(), u.size());
  CHECK(max_error(u, s, c) < 3e-16);
}

TEST_CASE("sincos_affine: both terms, and the C-library path beyond its range", "[phase_factors]") {
  // Reference: std::sin / std::cos of a u + b v. The argument itself may round differently
  // (FMA contraction), by up to 2 ulp of |x|; the bound adds that.
  const std::size_t n = 1000;
  std::vector<double> u(n), v(n), s(n), c(n);
  for (std::size_t i = 0; i < n; ++i) {
    u[i] = 3.0 * std::sin(0.013 * static_cast<double>(i));
    v[i] = 0.7 * std::cos(0.021 * static_cast<double>(i));
  }
  const double a = -2.75, b = -1.0;
  sincos_affine(u.data(), v.data(), a, b, 2.75 * 3.0 + 0.7, s.data(), c.data(), n);
  double worst = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    const double x = a * u[i] + b * v[i];
    const double tol = 3e-16 + 2.0 * std::numeric_limits<double>::epsilon() * std::abs(x);
    worst =
        std::max(worst, std::max(std::abs(s[i] - std::sin(x)), std::abs(c[i] - std::cos(x))) / tol);
  }
  CHECK(worst < 1.0);
  // A bound of 1e6 or more, or one that is not finite, takes std::sin / std::cos themselves.
  std::vector<double> big(n);
  for (std::size_t i = 0; i < n; ++i) big[i] = 1e7 * u[i];
  std::vector<double> zero(n, 0.0);
  sincos_affine(big.data(), zero.data(), 1.0, 0.0, 3e7, s.data(), c.data(), n);
  for (std::size_t i = 0; i < n; ++i) {
    CHECK(s[i] == std::sin(big[i]));
    CHECK(c[i] == std::cos(big[i]));
  }
  sincos_affine(u.data(), zero.data(), 1.0, 0.0, std::numeric_limits<double>::quiet_NaN(), s.data(),
                c.data(), n);
  CHECK(s[7] == std::sin(u[7]));
}
