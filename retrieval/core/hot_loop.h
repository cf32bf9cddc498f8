#pragma once

#include <bit>
#include <cstdint>
// SW_HOT_LOOP marks the per-sample kernels of the CMA engines (gate interpolation, modulus
// replacement, ePIE updates) for function multiversioning: on x86-64 Linux with GCC or Clang
// each marked function is compiled twice, for the baseline and for x86-64-v3 (AVX2 + FMA),
// and the loader picks the clone the CPU supports (ifunc). The project's baseline flags stay
// portable; only rounding (FMA contraction) differs between the clones. Define
// STREAKWRIGHT_NO_CLONES to disable. SW_WIDE_LOOP adds an x86-64-v4 (AVX-512) clone, for
// compute-bound kernels that gain from it (the gate's phase factors: 1.3-1.8x over AVX2 on the
// build machine, docs/performance.md); element-wise kernels only, so that results do not depend
// on the vector width.

#if defined(__x86_64__) && defined(__linux__) && (defined(__GNUC__) || defined(__clang__)) && \
    !defined(STREAKWRIGHT_NO_CLONES)
#define SW_HOT_LOOP __attribute__((target_clones("arch=x86-64-v3", "default")))
#define SW_WIDE_LOOP __attribute__((target_clones("arch=x86-64-v4", "arch=x86-64-v3", "default")))
#else
#define SW_HOT_LOOP
#define SW_WIDE_LOOP
#endif

namespace sw::detail {

/// 1/sqrt(x) for x > 0 to full double precision: the classic bit-level first guess (relative
/// error < 4 %) refined by four Newton steps (the error squares at each), plain arithmetic so
/// that it vectorises inside SW_HOT_LOOP kernels (std::sqrt does not: errno).
inline double rsqrt_newton(double x) {
  double y = std::bit_cast<double>(0x5FE6EB50C7B537A9ULL - (std::bit_cast<std::uint64_t>(x) >> 1));
  const double h = 0.5 * x;
  y *= 1.5 - h * y * y;
  y *= 1.5 - h * y * y;
  y *= 1.5 - h * y * y;
  y *= 1.5 - h * y * y;
  return y;
}

}  // namespace sw::detail
