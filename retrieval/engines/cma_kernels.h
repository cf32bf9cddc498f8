#pragma once
// The per-bin kernels of the CMA engines' data projection (cma_problem.h, "The projection onto
// the measured data"), on one contiguous segment of n spectral bins. S holds the segment's raw
// FFT values as interleaved (re, im) pairs, I the measured counts of the same bins, a the
// target amplitudes sqrt(max(I, 0)) / dt (raw units), dt2 = dt^2, so that M = dt2 |S|^2 is the
// model intensity. Each kernel that takes im_out, mm_out adds sum I M and sum M^2 over the
// segment (before any change of S) to them: the error sums of trace_error.h's trace error.
// project_poisson relies on a being that amplitude (see its comment). Beside them: the ePIE
// update of the ptychographic engine.
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
/// (I taken as it is, negative values included), with the sums. The upper bound is evaluated
/// only where it can bite (f > 8), which needs a_q = sqrt(max(I_q, 0)) / dt: another a would
/// change the factor wherever 2 a_q / |S_q| + 1/2 < f <= 8.
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

/// The ePIE updates of one delay (ptychographic engine; interleaved (re, im) arrays of n
/// samples), d = psi' - psi = B / n - P with B the inverse FFT of the projected spectrum and P
/// the exit wave psi:
///   E += bo conj(G) d on every sample (the probe's max |G|^2 is 1);
///   U = cg conj(E) d (cg = beta_gate / max|E|^2, E before this update) on [lo, hi).
/// Returns max |E|^2 over [lo, hi) after the update (the next step's object normalisation).
double epie_update(const double* G, const double* B, const double* P, double* E, double* U,
                   std::size_t n, std::size_t lo, std::size_t hi, double bo, double cg);

}  // namespace sw::cma_kernels
