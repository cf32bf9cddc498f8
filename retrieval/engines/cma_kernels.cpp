#include "retrieval/engines/cma_kernels.h"

#include <algorithm>

#include "retrieval/core/hot_loop.h"

namespace sw::cma_kernels {

namespace {

// The data projection of one segment, fused with the error sums (a = target amplitude
// sqrt(max(I, 0)) / dt, raw units; M = dt^2 |S|^2 the model intensity):
//   Poisson = false: the exact modulus replacement S <- a S / |S| (a zero bin stays zero);
//   Poisson = true:  |S| <- |S| (1 + I / M) / 2 with the measured I taken as it is (negative
//                    after a background subtraction: clipping it at 0 would bias the weak bins
//                    up), the factor kept in [0, 2 a / |S| + 1/2].
template <bool Poisson>
SW_HOT_LOOP void projection_kernel(double* S, const double* I, const double* a, std::size_t n,
                                   double dt2, double* im_out, double* mm_out) {
  double im = 0.0, mm = 0.0;
#pragma omp simd reduction(+ : im, mm)
  for (std::size_t q = 0; q < n; ++q) {
    const double re = S[2 * q], iv = S[2 * q + 1];
    const double r2 = re * re + iv * iv;
    const double M = dt2 * r2;
    im += I[q] * M;
    mm += M * M;
    const double rs = detail::rsqrt_newton(r2 + 1e-300);
    double f;
    if constexpr (Poisson)
      f = std::clamp(0.5 + 0.5 * I[q] / (dt2 * (r2 + 1e-300)), 0.0, 2.0 * a[q] * rs + 0.5);
    else
      f = a[q] * rs;
    S[2 * q] = re * f;
    S[2 * q + 1] = iv * f;
  }
  *im_out += im;
  *mm_out += mm;
}

}  // namespace

// r2 = |S|^2 per bin and the error sums sum I M, sum M^2 with M = dt^2 r2.
SW_HOT_LOOP void moduli_and_sums(const double* S, const double* I, double* r2, std::size_t n,
                                 double dt2, double* im_out, double* mm_out) {
  double im = 0.0, mm = 0.0;
#pragma omp simd reduction(+ : im, mm)
  for (std::size_t q = 0; q < n; ++q) {
    r2[q] = S[2 * q] * S[2 * q] + S[2 * q + 1] * S[2 * q + 1];
    const double M = dt2 * r2[q];
    im += I[q] * M;
    mm += M * M;
  }
  *im_out += im;
  *mm_out += mm;
}

SW_HOT_LOOP void mode_factors(double* r2, const double* I, const double* a, std::size_t n,
                              double dt2, bool poisson, double* im_out, double* mm_out) {
  double im = 0.0, mm = 0.0;
#pragma omp simd reduction(+ : im, mm)
  for (std::size_t q = 0; q < n; ++q) {
    const double M = dt2 * r2[q];
    im += I[q] * M;
    mm += M * M;
    const double rs = detail::rsqrt_newton(r2[q] + 1e-300);
    r2[q] = poisson ? std::clamp(0.5 + 0.5 * I[q] / (dt2 * (r2[q] + 1e-300)), 0.0,
                                 2.0 * a[q] * rs + 0.5)
                    : a[q] * rs;
  }
  *im_out += im;
  *mm_out += mm;
}

SW_HOT_LOOP void scale_bins(double* S, const double* f, std::size_t n) {
#pragma omp simd
  for (std::size_t q = 0; q < 2 * n; ++q) S[q] *= f[q / 2];
}

void project_amplitude(double* S, const double* I, const double* a, std::size_t n, double dt2,
                       double* im_out, double* mm_out) {
  projection_kernel<false>(S, I, a, n, dt2, im_out, mm_out);
}

void project_poisson(double* S, const double* I, const double* a, std::size_t n, double dt2,
                     double* im_out, double* mm_out) {
  projection_kernel<true>(S, I, a, n, dt2, im_out, mm_out);
}

}  // namespace sw::cma_kernels
