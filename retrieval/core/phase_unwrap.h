#pragma once
// Phase unwrapping: one rule for every phase the project unwraps (spectral phases, sideband
// phases, figure curves). The rule is numpy.unwrap's with its defaults (period 2 pi,
// discont pi; numpy.org/doc/stable/reference/generated/numpy.unwrap.html): a step of
// magnitude below pi is kept, a larger one is replaced by its representative in [-pi, pi]
// (numpy's mod(step + pi, 2 pi) - pi, with +pi kept for a positive step of exactly pi), so each
// phase lands on the branch nearest the previous one. tests/test_phase_unwrap.cpp checks it
// against numpy's definition.

#include <vector>

namespace sw {

/// A phase step (rad) as numpy.unwrap keeps it: unchanged when |step| < pi, otherwise moved by
/// a multiple of 2 pi into [-pi, pi] (+pi for a positive step of exactly pi mod 2 pi).
double wrapped_phase_step(double step_rad);

/// The branch raw_rad + 2 pi m nearest to previous_rad (previous_rad already unwrapped):
/// previous_rad + wrapped_phase_step(raw_rad - previous_rad).
double unwrap_next(double previous_rad, double raw_rad);

/// numpy.unwrap(phases_rad): the first value kept, each next one on the branch nearest its
/// predecessor; out[k] = phases_rad[k] + (cumulated corrections), as numpy computes it.
std::vector<double> unwrap_phase(const std::vector<double>& phases_rad);

}  // namespace sw
