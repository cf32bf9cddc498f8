#pragma once
// Element-wise phase factors exp(i x) of the gate, x affine in two sampled functions, as the
// forward model and its adjoint need them (retrieval/physics/forward_adjoint.cpp): one call per
// momentum-node pair and block per delay, so it is written to vectorise (AVX2 and AVX-512
// clones, retrieval/core/hot_loop.h).

#include <cstddef>

namespace sw::detail {

/// s[i] = sin(x_i), c[i] = cos(x_i) for x_i = a u[i] + b v[i], i < n. `bound` >= max |x_i|
/// (from the caller's bounds of |u| and |v|) selects the path: below 1e6 a branch-free
/// Cody-Waite reduction by pi/2 (the three-part split of pi/2 of fdlibm's __ieee754_rem_pio2)
/// and Taylor polynomials on [-pi/4, pi/4] to order 17 (truncation < 1e-19), within 3e-16 of
/// the C library for |x| <= 1e4 (tests/test_phase_factors.cpp); else, or when `bound` is not
/// finite, std::sin / std::cos. Element-wise, so the AVX2 and AVX-512 clones give the same bits
/// (both contract to FMA; the baseline clone does not: last-bit differences between machines,
/// never between runs).
void sincos_affine(const double* u, const double* v, double a, double b, double bound, double* s,
                   double* c, std::size_t n);

}  // namespace sw::detail
