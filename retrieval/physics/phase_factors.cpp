#include "retrieval/physics/phase_factors.h"

#include <cmath>

#include "retrieval/core/hot_loop.h"

namespace sw::detail {

namespace {

// Taylor coefficients of (sin r - r) / r^3 and (cos r - 1) / r^2 in r^2, highest order first.
constexpr double kSinTaylor[] = {2.8114572543455207632e-15, -7.6471637318198164759e-13,
                                 1.6059043836821614599e-10, -2.5052108385441718775e-08,
                                 2.7557319223985890653e-06, -1.9841269841269841270e-04,
                                 8.3333333333333333333e-03, -1.6666666666666666667e-01};
constexpr double kCosTaylor[] = {4.7794773323873852974e-14, -1.1470745597729724714e-11,
                                 2.0876756987868098979e-09, -2.7557319223985890653e-07,
                                 2.4801587301587301587e-05, -1.3888888888888888889e-03,
                                 4.1666666666666666667e-02, -0.5};

// The polynomial with coefficients c (highest order first) at x, by Horner's rule.
template <std::size_t N>
inline double horner(double x, const double (&c)[N]) {
  double p = c[0];
  for (std::size_t k = 1; k < N; ++k) p = p * x + c[k];
  return p;
}

}  // namespace

SW_WIDE_LOOP void sincos_affine(const double* __restrict__ u, const double* __restrict__ v,
                                double a, double b, double bound, double* __restrict__ s,
                                double* __restrict__ c, std::size_t n) {
  if (!(bound < 1e6)) {  // outside the exact range of the reduction (or not finite): libm
    for (std::size_t i = 0; i < n; ++i) {
      const double x = a * u[i] + b * v[i];
      s[i] = std::sin(x);
      c[i] = std::cos(x);
    }
    return;
  }
  constexpr double kTwoOverPi = 0.63661977236758134308;
  constexpr double kRound = 6755399441055744.0;  // 1.5 * 2^52: adding it rounds to an integer
  constexpr double kP1 = 1.57079632673412561417e+00, kP2 = 6.07710050630396597660e-11,
                   kP3 = 2.02226624879595063154e-21;
  for (std::size_t i = 0; i < n; ++i) {
    const double x = a * u[i] + b * v[i];
    const double kd = (x * kTwoOverPi + kRound) - kRound;
    const double r = ((x - kd * kP1) - kd * kP2) - kd * kP3;
    const double r2 = r * r;
    const double sr = r + r * r2 * horner(r2, kSinTaylor);
    const double cr = 1.0 + r2 * horner(r2, kCosTaylor);
    const int q = static_cast<int>(kd);
    const double swap = static_cast<double>(q & 1);
    const double sgn_s = 1.0 - 2.0 * static_cast<double>((q >> 1) & 1);
    const double sgn_c = 1.0 - 2.0 * static_cast<double>(((q + 1) >> 1) & 1);
    s[i] = sgn_s * (sr + swap * (cr - sr));
    c[i] = sgn_c * (cr + swap * (sr - cr));
  }
}

}  // namespace sw::detail
