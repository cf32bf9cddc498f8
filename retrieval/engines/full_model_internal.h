#pragma once
// Internals shared by the full-model files (full_model_objective.cpp, full_model_lines.cpp,
// full_model_engine.cpp); not part of the engine's interface (full_model_engine.h).

#include <memory>
#include <string>
#include <vector>

#include "retrieval/core/format.h"
#include "retrieval/engines/engine_options.h"
#include "retrieval/engines/full_model_engine.h"
#include "retrieval/engines/full_model_settings.h"
#include "retrieval/engines/problem.h"
#include "retrieval/physics/forward_model.h"

namespace sw::full_model_detail {

inline std::string num(double x) { return format_g(x); }

// The spectrum that defines carrier and support: field-free if usable, else delay average.
std::vector<double> reference_spectrum(const RetrievalProblem& P);

// Throws sw::Error(kInput) naming `who` and the field when the problem's sizes or values do
// not make a full-model problem.
void check_problem(const RetrievalProblem& P, const std::string& who);

// Forward-model options of the full model (kFull) with the momentum-block plan of the settings
// (chebyshev_nodes, block_phase_rad, node_plan); the callers set the rest.
inline ForwardModelOptions plan_options(const FullModelSettings& s) {
  ForwardModelOptions o;
  o.momentum = MomentumModel::kFull;
  o.chebyshev_nodes = s.chebyshev_nodes;
  o.max_block_phase_rad = s.block_phase_rad;
  o.fewest_nodes = s.node_plan != "fixed";
  return o;
}

// The objective and the parameters a full-model run starts from (LeastSquaresEngine::prepare):
// the XUV from options.initial_xuv (its spectrum at the energy bins) or sqrt(spectrum)/|d| with a
// flat phase; the IR form of settings.ir (auto: spline from options.initial_ir, else the
// parametric pulse fitted to the centroid curve), on a sampling that covers the delays +- the
// XUV's time support + T/4. Settings must be validated.
struct FullModelStart {
  std::unique_ptr<FullModelObjective> objective;
  std::vector<double> x;  // the start, encoded (objective scales set, blocks planned)
  std::string ir_form;    // "parametric" | "spline"
  std::string ir_guess;   // where the IR came from
};
FullModelStart make_full_model_start(const RetrievalProblem& P, const EngineOptions& options,
                                     const FullModelSettings& settings, MomentumModel model);

}  // namespace sw::full_model_detail
