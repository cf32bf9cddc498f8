#include "retrieval/engines/cma_kernels.h"

#include <algorithm>

#include "retrieval/core/hot_loop.h"

namespace sw::cma_kernels {

namespace {

// The modulus replacement of one segment, S <- a S / |S| (a zero bin stays zero), fused with
// the error sums (a = target amplitude sqrt(max(I, 0)) / dt, raw units; M = dt^2 |S|^2 the
// model intensity).
SW_HOT_LOOP void amplitude_kernel(double* S, const double* I, const double* a, std::size_t n,
                                  double dt2, double* im_out, double* mm_out) {
  double im = 0.0, mm = 0.0;
#pragma omp simd reduction(+ : im, mm)
  for (std::size_t q = 0; q < n; ++q) {
    const double re = S[2 * q], iv = S[2 * q + 1];
    const double r2 = re * re + iv * iv;
    const double M = dt2 * r2;
    im += I[q] * M;
    mm += M * M;
    const double f = a[q] * detail::rsqrt_newton(r2 + 1e-300);
    S[2 * q] = re * f;
    S[2 * q + 1] = iv * f;
  }
  *im_out += im;
  *mm_out += mm;
}

// The Poisson projection |S| <- |S| (1 + I / M) / 2, with the measured I taken as it is
// (negative after a background subtraction: clipping it at 0 would bias the weak bins up), the
// factor kept in [0, 2 a / |S| + 1/2]: bit for bit that step computed in one loop over the bins,
// but without the reciprocal modulus where the clamp cannot bite. With a = sqrt(max(I, 0)) / dt
// (the contract of project_poisson) and y = I / M, the step is v = 1/2 + y/2 and the clamp's
// upper bound 1/2 + 2 a / |S| = 1/2 + 2 sqrt(y) (both terms up to rounding); 2 sqrt(y) exceeds
// y/2 by at least 3 % of itself for every 0 < y <= 15, i.e. v <= 8, and 1/2 + term rounds
// monotonically (I <= 0: v <= 1/2 <= bound), so there the factor is max(v, 0) exactly, whatever
// the bound's last bits. Blocks of kPoissonBlock bins whose largest v exceeds 8 take the full
// formula. The error sums run first, in a loop of their own with the reduction of
// amplitude_kernel (tests/test_cma_kernels.cpp checks the bits against the one-loop step for
// every remainder of the vector width).
constexpr std::size_t kPoissonBlock = 64;

SW_HOT_LOOP void poisson_sums(const double* S, const double* I, std::size_t n, double dt2,
                              double* im_out, double* mm_out) {
  double im = 0.0, mm = 0.0;
#pragma omp simd reduction(+ : im, mm)
  for (std::size_t q = 0; q < n; ++q) {
    const double re = S[2 * q], iv = S[2 * q + 1];
    const double r2 = re * re + iv * iv;
    const double M = dt2 * r2;
    im += I[q] * M;
    mm += M * M;
  }
  *im_out += im;
  *mm_out += mm;
}

SW_HOT_LOOP void poisson_steps(double* S, const double* I, const double* a, std::size_t n,
                               double dt2) {
  double v[kPoissonBlock];
  for (std::size_t q0 = 0; q0 < n; q0 += kPoissonBlock) {
    const std::size_t m = std::min(kPoissonBlock, n - q0);
    double* s = S + 2 * q0;
    const double* i0 = I + q0;
    double vmax = 0.0;
#pragma omp simd reduction(max : vmax)
    for (std::size_t q = 0; q < m; ++q) {
      const double re = s[2 * q], iv = s[2 * q + 1];
      const double r2 = re * re + iv * iv;
      v[q] = 0.5 + 0.5 * i0[q] / (dt2 * (r2 + 1e-300));
      vmax = std::max(vmax, v[q]);
    }
    if (!(vmax > 8.0)) {
#pragma omp simd
      for (std::size_t q = 0; q < m; ++q) {
        const double f = v[q] < 0.0 ? 0.0 : v[q];
        s[2 * q] *= f;
        s[2 * q + 1] *= f;
      }
      continue;
    }
    const double* a0 = a + q0;
#pragma omp simd
    for (std::size_t q = 0; q < m; ++q) {
      const double re = s[2 * q], iv = s[2 * q + 1];
      const double r2 = re * re + iv * iv;
      const double rs = detail::rsqrt_newton(r2 + 1e-300);
      const double f = std::clamp(v[q], 0.0, 2.0 * a0[q] * rs + 0.5);
      s[2 * q] = re * f;
      s[2 * q + 1] = iv * f;
    }
  }
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

// The ePIE kernels (cma_kernels.h).
SW_HOT_LOOP double epie_update(const double* G, const double* B, const double* P, double* E,
                               double* U, std::size_t n, std::size_t lo, std::size_t hi, double bo,
                               double cg) {
  double max_e2 = 0.0;
  const double inv_n = 1.0 / static_cast<double>(n);
#pragma omp simd
  for (std::size_t q = 0; q < lo; ++q) {
    const double dr = B[2 * q] * inv_n - P[2 * q], di = B[2 * q + 1] * inv_n - P[2 * q + 1];
    const double gr = G[2 * q], gi = G[2 * q + 1];
    E[2 * q] += bo * (gr * dr + gi * di);
    E[2 * q + 1] += bo * (gr * di - gi * dr);
  }
#pragma omp simd reduction(max : max_e2)
  for (std::size_t q = lo; q < hi; ++q) {
    const double dr = B[2 * q] * inv_n - P[2 * q], di = B[2 * q + 1] * inv_n - P[2 * q + 1];
    const double er = E[2 * q], ei = E[2 * q + 1], gr = G[2 * q], gi = G[2 * q + 1];
    const double nr = er + bo * (gr * dr + gi * di), ni = ei + bo * (gr * di - gi * dr);
    E[2 * q] = nr;
    E[2 * q + 1] = ni;
    U[2 * q] = cg * (er * dr + ei * di);
    U[2 * q + 1] = cg * (er * di - ei * dr);
    max_e2 = std::max(max_e2, nr * nr + ni * ni);
  }
#pragma omp simd
  for (std::size_t q = hi; q < n; ++q) {
    const double dr = B[2 * q] * inv_n - P[2 * q], di = B[2 * q + 1] * inv_n - P[2 * q + 1];
    const double gr = G[2 * q], gi = G[2 * q + 1];
    E[2 * q] += bo * (gr * dr + gi * di);
    E[2 * q + 1] += bo * (gr * di - gi * dr);
  }
  return max_e2;
}

void project_amplitude(double* S, const double* I, const double* a, std::size_t n, double dt2,
                       double* im_out, double* mm_out) {
  amplitude_kernel(S, I, a, n, dt2, im_out, mm_out);
}

void project_poisson(double* S, const double* I, const double* a, std::size_t n, double dt2,
                     double* im_out, double* mm_out) {
  poisson_sums(S, I, n, dt2, im_out, mm_out);
  poisson_steps(S, I, a, n, dt2);
}

}  // namespace sw::cma_kernels
