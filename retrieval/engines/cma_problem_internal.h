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

// cover = gate.coverage(eps) (PhaseGate: cover[m] = sum over the delays j, in order, of
// |eps[m - base_j]|^2), the same sums in the same order, bit for bit, accumulated node by node
// in registers instead of delay by delay in memory. `delay_au` are the delays the gate was built
// for; a gate whose nodes differ from them takes gate.coverage itself.
void coverage(const PhaseGate& gate, const std::vector<double>& delay_au, const CVec& eps,
              std::vector<double>& cover);

// sin^2(pi (i + 1/2) / m), i < m: the Hann weights of align_vector_potential, kept per thread
// for the last m asked for.
const std::vector<double>& hann_weights(std::size_t m);

}  // namespace sw::cma_detail
