#pragma once
// The "projections" engine: generalized projections for streaking traces in the
// central-momentum approximation.
//
//   pcgpa: principal-component generalized projections (D. J. Kane, IEEE J. Sel. Top. Quantum
//          Electron. 4, 278 (1998)), applied to streaking by Y. Mairesse and F. Quere, Phys. Rev.
//          A 71, 011401(R) (2005). Needs a matched grid: a uniform delay axis whose step is an
//          integer multiple r of the XUV grid step, so every exit wave is an exact shift of the
//          gate (no interpolation) and the modified exit waves form the (row-rotated)
//          outer-product matrix O(n, m) = eps_n G_m, m = n + r j. One simultaneous
//          power-method step per iteration, both from the previous vectors:
//          eps <- O conj(G) / N_delay,  G <- phase of O^T conj(eps_previous).
//   lsgpa: least-squares generalized projections (P. Gagnon, E. Goulielmakis and V. S.
//          Yakovlev, Appl. Phys. B 92, 25 (2008)) for any delay axis: after modulus replacement,
//          alternately minimise sum_j ||psi'_j - eps G_j||^2 in closed form,
//          eps = sum_j conj(G_j) psi'_j / sum_j |G_j|^2,
//          G = phase of sum_j conj(eps_new) psi'_j scattered onto the gate table by the
//          transpose of its interpolation (the unit-modulus least-squares value per node).
//   auto:  pcgpa on a matched grid, else lsgpa.
// With a unit-modulus gate sum_j |G_j|^2 = N_delay, so on a matched grid the two differ only
// in using the previous or the new eps for the gate (and in needing no interpolation).
// Both over-relax the gate step, G <- unit(G + omega (G_projected - G)), omega =
// gate_relaxation (default 1.8; 1 is the plain projection; relaxation is common practice for
// alternating projections: it roughly halves the iterations on our noise-free traces).
// The modulus replacement, spectral constraint, gate smoothing and final bookkeeping are those
// of the ptychographic engine (retrieval/engines/cma_problem.h, retrieval/physics/gate.h); the gate
// is updated on the XUV support only (CmaProblem::support). The delays are independent within an
// iteration, so EngineOptions::threads > 1 spreads them over OpenMP threads (on a machine
// loaded by other processes set OMP_WAIT_POLICY=passive: spinning threads then lose badly).
//
// Settings: ProjectionsSettings (retrieval/engines/projections_settings.h; carried typed by
// EngineOptions::settings), described once in its describe() (mode, gate_relaxation and the CMA
// settings of retrieval/engines/cma_settings.h).

#include <memory>
#include <string>

#include "retrieval/engines/engine.h"
#include "retrieval/engines/projections_settings.h"

namespace sw {

std::unique_ptr<Engine> make_projections_engine();

}  // namespace sw
