#include "retrieval/physics/phase_factors.h"

#include <bit>
#include <cmath>
#include <cstdint>

#include "retrieval/core/hot_loop.h"

namespace sw::detail {

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
  // 1.5 * 2^52: x 2/pi + kRound rounds to an integer k held in the low mantissa bits.
  constexpr double kRound = 6755399441055744.0;
  constexpr double kP1 = 1.57079632673412561417e+00, kP2 = 6.07710050630396597660e-11,
                   kP3 = 2.02226624879595063154e-21;
  // fdlibm k_sin.c and k_cos.c (Sun Microsystems, 1993), from memory; checked against the C
  // library by tests/test_phase_factors.cpp.
  constexpr double S1 = -1.66666666666666324348e-01, S2 = 8.33333333332248946124e-03,
                   S3 = -1.98412698298579493134e-04, S4 = 2.75573137070700676789e-06,
                   S5 = -2.50507602534068634195e-08, S6 = 1.58969099521155010221e-10;
  constexpr double C1 = 4.16666666666666019037e-02, C2 = -1.38888888888741095749e-03,
                   C3 = 2.48015872894767294178e-05, C4 = -2.75573143513906633035e-07,
                   C5 = 2.08757232129817482790e-09, C6 = -1.13596475577881948265e-11;
  for (std::size_t i = 0; i < n; ++i) {
    const double x = a * u[i] + b * v[i];
    const double t = x * kTwoOverPi + kRound;
    const double kd = t - kRound;
    const std::uint64_t q = std::bit_cast<std::uint64_t>(t);  // k mod 4 in the two low bits
    const double r = ((x - kd * kP1) - kd * kP2) - kd * kP3;  // x - k pi/2, |r| <= pi/4
    const double r2 = r * r;
    const double sr = r + r * r2 * (S1 + r2 * (S2 + r2 * (S3 + r2 * (S4 + r2 * (S5 + r2 * S6)))));
    const double cr =
        1.0 - 0.5 * r2 + r2 * r2 * (C1 + r2 * (C2 + r2 * (C3 + r2 * (C4 + r2 * (C5 + r2 * C6)))));
    // sin(r + k pi/2) = (sin r, cos r, -sin r, -cos r) and cos = (cos r, -sin r, -cos r, sin r)
    // for k mod 4 = 0..3: odd k swaps, bit 1 of k (of k + 1 for cos) flips the sign.
    const bool swap = (q & 1) != 0;
    const double s0 = swap ? cr : sr, c0 = swap ? sr : cr;
    s[i] = std::bit_cast<double>(std::bit_cast<std::uint64_t>(s0) ^ ((q & 2) << 62));
    c[i] = std::bit_cast<double>(std::bit_cast<std::uint64_t>(c0) ^ (((q + 1) & 2) << 62));
  }
}

}  // namespace sw::detail
