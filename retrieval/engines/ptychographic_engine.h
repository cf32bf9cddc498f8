#pragma once
// The "ptychographic" engine: ePIE (extended ptychographical iterative engine, A. M. Maiden
// and J. M. Rodenburg, Ultramicroscopy 109, 1256 (2009)) applied to attosecond streaking in
// the central-momentum approximation (M. Lucchini et al., Opt. Express 23, 29502 (2015)).
//
// Object: the XUV envelope eps(s) on the problem's grid. Probe: the unit-modulus CMA phase
// gate G(t) = exp(i phi(t)), phi = -p0 I1 - I2/2 (retrieval/physics/gate.h). For each delay tau_j,
// in a seeded random order every iteration, the exit wave psi_j(s) = eps(s) G(s + tau_j) is Fourier
// transformed, its modulus replaced by the measured sqrt(I) on the measured bins
// (retrieval/engines/cma_problem.h), transformed back, and both factors are updated:
//   eps += beta_object conj(G_j) (psi' - psi) / max|G_j|^2            (max|G_j|^2 = 1),
//   G_j += beta_gate   conj(eps) (psi' - psi) / max|eps|^2,
// the gate update being scattered onto the gate table by the transpose of its interpolation
// and renormalised to |G| = 1 (a phase increment arg(1 + dG/G)). Exactly two FFTs per delay.
// The gate update is applied where |eps|^2 >= 1e-4 max|eps|^2 (the support, recomputed every
// iteration; elsewhere it is below 1 % of its peak), and the gate is sampled there with
// cubic, elsewhere with linear interpolation (retrieval/physics/gate.h: the difference changes psi
// by < 2e-4 of its peak). After each sweep: the field-free-spectrum constraint and, every
// gate_smoothing_interval iterations, the smooth-gate projection. The estimate of the
// iteration with the lowest running trace error is the one returned.
//
// Step sizes: beta_object = 0.1 and beta_gate = 1.5 by default. Every XUV sample appears in
// every exit wave (the gate has no compact support), so the object step is small, an
// exponential average over ~10 delays; the gate is localised by eps and takes a larger step.
// Chosen on the synthetic traces of tests/test_ptychographic.cpp (noise-free and Poisson;
// beta_gate in [1, 2] and beta_object in [0.1, 0.5] all converge there).
//
// Several photoelectron lines (RetrievalProblem::extra_lines, setting joint_lines, default on):
// one incoherent exit-wave mode per line and delay, the counts their sum (mixed-state
// ptychography, P. Thibault and A. Menzel, Nature 494, 68 (2013)); each line's mode is the
// shared XUV moved to its kinetic energy, scaled by the square root of its strength and seeing
// the shared A(t) at its own central momentum and delay (LineMode, cma_problem.h). Per delay: one
// joint projection of the modes, then the ePIE steps of every mode with the object normalised by
// 1 + sum of the strengths; per sweep: the gates tied to one A(t), each line's strength by a
// Gauss-Newton step and its delay by a step on its least-squares profile. The XUV support is
// cut between the lines (joint_lines_reach), the field-free spectrum used for its centroid only,
// no momentum nodes. Reported as joint_line.<l>.delay_as / .strength / .counts_ratio in the
// Reconstruction's settings (docs/theory.md "Joint lines in the CMA").
//
// Settings: PtychographicSettings (retrieval/engines/ptychographic_settings.h; carried typed by
// EngineOptions::settings), described once in its describe() (the step sizes above, the momentum
// nodes, the joint lines and the CMA settings of retrieval/engines/cma_settings.h).

#include <memory>

#include "retrieval/engines/engine.h"
#include "retrieval/engines/ptychographic_settings.h"

namespace sw {

std::unique_ptr<Engine> make_ptychographic_engine();

/// The momentum nodes the engine uses on `problem` with `settings` once it adds them: the
/// count its CmaProblem makes (momentum_bands, or auto_momentum_bands for 0), or 1 when it never
/// adds any (one node by the settings or the band, or the lines fitted jointly). A run reports
/// this count or 1 (Reconstruction::momentum_nodes: 1 when its best iterate predates the
/// nodes). retrieve() starts the bootstrap replicas, whose node count is pinned to the
/// estimate's, on this count before the estimate's run has ended. Throws as the engine's
/// prepare() does for invalid settings.
int ptychographic_momentum_nodes(const RetrievalProblem& problem,
                                 const PtychographicSettings& settings);

}  // namespace sw
