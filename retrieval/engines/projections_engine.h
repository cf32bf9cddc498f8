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
// Extra options (EngineOptions::extra, name=value): the fields of ProjectionsSettings below,
// described once in its describe() (mode, gate_relaxation and the CMA settings of
// retrieval/engines/cma_problem.h).

#include <memory>
#include <string>

#include "retrieval/engines/cma_problem.h"
#include "retrieval/engines/engine.h"

namespace sw {

/// The engine's typed settings (read from EngineOptions::extra through describe()).
struct ProjectionsSettings {
  std::string mode = "auto";  ///< auto (pcgpa on a matched delay grid, else lsgpa) | pcgpa | lsgpa
  double gate_relaxation = 1.8;  ///< over-relaxation omega of the gate update
  /// The CMA settings, with this engine's default data projection (amplitude: generalized
  /// projections need a true projection).
  CmaSettings cma{.projection = CmaProjection::kAmplitude};

  template <class Self, class V>
  static void describe(Self& self, V& v) {
    v(OptionSpec{.name = "mode",
                 .help = "auto (pcgpa on a matched delay grid, else lsgpa), pcgpa or lsgpa",
                 .choices = "auto|pcgpa|lsgpa"},
      self.mode);
    v(OptionSpec{.name = "gate_relaxation",
                 .help =
                     "over-relaxation omega of the gate update G <- G + omega (G_projected - G)",
                 .min = 0.1,
                 .max = 2},
      self.gate_relaxation);
    CmaSettings::describe(self.cma, v);
  }
  std::string validate() const { return validate_described(*this); }  ///< names field and rule
};

std::unique_ptr<Engine> make_projections_engine();

}  // namespace sw
