#pragma once
// The "projections" engine: generalized projections for streaking traces in the
// central-momentum approximation.
//
//   pcgpa: principal-component generalized projections (D. J. Kane, IEEE J. Sel. Top. Quantum
//          Electron. 4, 278 (1998)), applied to streaking by Y. Mairesse and F. Quere, Phys. Rev.
//          A 71, 011401(R) (2005). Needs a matched grid: a uniform delay axis whose step is an
//          integer multiple r of the XUV grid step, so every exit wave is an exact shift of the
//          gate and the modified exit waves form the (row-rotated) outer-product matrix
//          O(n, m) = eps_n G_m with m = n + r j. One power-method step per iteration:
//          eps <- O conj(G) (norm kept), G <- phase of O^T conj(eps).
//   lsgpa: least-squares generalized projections (P. Gagnon, E. Goulielmakis and V. S.
//          Yakovlev, Appl. Phys. B 92, 25 (2008)) for any delay axis: after modulus replacement,
//          alternately minimise sum_j ||psi'_j - eps G_j||^2 in closed form,
//          eps = sum_j conj(G_j) psi'_j / sum_j |G_j|^2,
//          G = phase of sum_j conj(eps) psi'_j scattered onto the gate table (|G| = 1).
//   auto:  pcgpa on a matched grid, else lsgpa.
// The modulus replacement, spectral constraint and gate smoothing are those of the
// ptychographic engine (retrieval/cma_setup.h, retrieval/gate.h). The delays are independent
// within an iteration, so EngineOptions::threads > 1 spreads them over OpenMP threads.
//
// Extra options: mode (auto|pcgpa|lsgpa), spectrum_interval, gate_smoothing_interval,
// gate_knots_per_period, unmeasured_damping (as for the ptychographic engine).

#include <memory>

#include "retrieval/engine.h"

namespace sw {

std::unique_ptr<Engine> make_projections_engine();

}  // namespace sw
