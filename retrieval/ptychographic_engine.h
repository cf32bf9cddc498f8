#pragma once
// The "ptychographic" engine: ePIE (extended ptychographical iterative engine, A. M. Maiden
// and J. M. Rodenburg, Ultramicroscopy 109, 1256 (2009)) applied to attosecond streaking in
// the central-momentum approximation (M. Lucchini, M. H. Brugmann, A. Ludwig, L. Gallmann,
// U. Keller and T. Feurer, Opt. Express 23, 29502 (2015)).
//
// Object: the XUV envelope eps(s) on the problem's grid. Probe: the unit-modulus CMA phase
// gate G(t) = exp(i phi(t)), phi = -p0 I1 - I2/2 (retrieval/gate.h). For each delay tau_j, in a
// seeded random order every iteration, the exit wave psi_j(s) = eps(s) G(s + tau_j) is
// Fourier transformed, its modulus replaced by the measured sqrt(I) on the measured bins
// (retrieval/cma_setup.h), transformed back, and both factors are updated:
//   eps += beta_object conj(G_j) (psi' - psi) / max|G_j|^2            (max|G_j|^2 = 1),
//   G_j += beta_gate   conj(eps) (psi' - psi) / max|eps|^2,
// the gate update being scattered onto the gate table by the transpose of its interpolation
// and renormalised to |G| = 1 (a phase increment arg(1 + dG/G)). Exactly two FFTs per delay.
//
// Extra options (EngineOptions::extra), see extra_options() for defaults and limits:
//   beta_object, beta_gate      step sizes of the two updates;
//   spectrum_interval           impose |eps~(W + Ip)| = sqrt(field-free spectrum) every n
//                               iterations (0 = never; ignored without a spectrum);
//   gate_smoothing_interval     project the gate phase onto its smooth cubic-B-spline form
//                               every n iterations (0 = only at the end);
//   gate_knots_per_period       knot density of that smooth phase (per IR period);
//   unmeasured_damping          factor applied to the exit-wave spectrum on FFT bins outside the
//                               measured energy window (1 = free, 0 = forced to zero).

#include <memory>

#include "retrieval/engine.h"

namespace sw {

std::unique_ptr<Engine> make_ptychographic_engine();

}  // namespace sw
