#pragma once
// Internals shared by the CmaProblem files (cma_problem.cpp, cma_constraints.cpp,
// cma_momentum_bands.cpp, cma_initial_guess.cpp); not part of its interface (cma_problem.h).

#include <cstddef>
#include <string>
#include <vector>

#include "retrieval/core/format.h"
#include "retrieval/core/grid.h"
#include "retrieval/physics/gate.h"

namespace sw::cma_detail {

inline std::string num(double x) { return format_g(x); }

// v[i] *= exp(i rate (t0 + i step)), by recurrence of unit rotations.
void rotate_linear(cdouble* v, std::size_t n, double t0, double step, double rate);

// Last gate node whose coverage reaches 30 % of the maximum (where reconstruct() ends A(t)).
std::size_t last_probed_node(const std::vector<double>& cover);

// sin^2(pi (i + 1/2) / m), i < m: the Hann weights of align_vector_potential, kept per thread
// for the last m asked for.
const std::vector<double>& hann_weights(std::size_t m);

}  // namespace sw::cma_detail
