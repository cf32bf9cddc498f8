#pragma once
// The per-bin kernels of the CMA engines' data projection (cma_problem.h, "The projection onto
// the measured data"), on one contiguous segment of n spectral bins. S holds the segment's raw
// FFT values as interleaved (re, im) pairs, I the measured counts of the same bins, a the
// target amplitudes sqrt(max(I, 0)) / dt (raw units), dt2 = dt^2, so that M = dt2 |S|^2 is the
// model intensity. Each kernel that takes im_out, mm_out adds sum I M and sum M^2 over the
// segment (before any change of S) to them: the error sums of trace_error.h's trace error.
// tests/test_cma_kernels.cpp checks them against a plain scalar reference.

#include <cstddef>

namespace sw::cma_kernels {

/// r2[q] = |S_q|^2; adds sum I M and sum M^2 (M = dt2 r2) to *im_out, *mm_out.
void moduli_and_sums(const double* S, const double* I, double* r2, std::size_t n, double dt2,
                     double* im_out, double* mm_out);

/// Modulus replacement S_q <- a_q S_q / |S_q| (a bin with S_q = 0 stays 0), with the sums.
void project_amplitude(double* S, const double* I, const double* a, std::size_t n, double dt2,
                       double* im_out, double* mm_out);

/// Poisson step S_q <- f S_q, f = (1 + I_q / M_q) / 2 clamped into [0, 2 a_q / |S_q| + 1/2]
/// (I taken as it is, negative values included), with the sums.
void project_poisson(double* S, const double* I, const double* a, std::size_t n, double dt2,
                     double* im_out, double* mm_out);

/// The factor of the projection for a bin whose model is r2[q] = sum of |S|^2 over several
/// incoherent modes (cma_problem.h, project_modes): on return r2[q] holds the factor f_q that
/// project_amplitude (poisson = false) or project_poisson (true) would apply to one spectrum of
/// that modulus; adds the sums of M = dt2 r2 as the others.
void mode_factors(double* r2, const double* I, const double* a, std::size_t n, double dt2,
                  bool poisson, double* im_out, double* mm_out);

/// S_q <- f_q S_q (both components).
void scale_bins(double* S, const double* f, std::size_t n);

}  // namespace sw::cma_kernels
