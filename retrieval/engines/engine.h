#pragma once
// Reconstruction engines: one interface, one shared iteration loop, a registry by name
// (DESIGN.md "Engines"). Adding an engine is one .cpp file with a class deriving from Engine and
// a factory function, plus one registration line in retrieval/engines/engine_registry.cpp (explicit
// rather than static-initialiser registration, which a static library's linker would drop).
//
// Life cycle, driven by run_engine():
//   prepare(problem, options)   -- build grids, initial guess (validated options only)
//   iterate(k) -> IterationRecord, once per iteration, until a stopping rule fires
//   finalize() -> Reconstruction  (best estimate so far, never the last if it was worse)
// The loop (not the engines) owns counters, timing, callbacks and the stopping rules.
// The concepts it uses live one per header: problem.h (RetrievalProblem), engine_options.h
// (EngineOptions with the engines' typed settings), reconstruction.h (Reconstruction,
// IterationRecord, Termination), trace_error.h (G and its noise floor).

#include <chrono>
#include <cmath>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <type_traits>
#include <vector>

#include <Eigen/Core>

#include "retrieval/core/error.h"
#include "retrieval/core/option_spec.h"
#include "retrieval/core/trace.h"
#include "retrieval/engines/engine_options.h"
#include "retrieval/engines/problem.h"
#include "retrieval/engines/reconstruction.h"
#include "retrieval/engines/trace_error.h"
#include "retrieval/physics/dipole.h"
#include "retrieval/physics/ir_field.h"
#include "retrieval/physics/xuv_field.h"

namespace sw {

/// Callback decision (Ceres style). Callbacks run after every iteration, in the order given;
/// the first one that does not return kContinue ends the run (later ones are not called):
/// kStop -> Termination::kUserStopped, kAbort -> Termination::kFailure. Either way the best
/// estimate is returned.
enum class CallbackResult { kContinue, kStop, kAbort };
using IterationCallback = std::function<CallbackResult(const IterationRecord&)>;

class Engine {
 public:
  virtual ~Engine() = default;
  /// Registered name, a one-line description for --help, and the paper it implements.
  virtual std::string name() const = 0;
  virtual std::string description() const = 0;
  virtual std::string reference() const = 0;
  /// Throws sw::Error(kUsage) for bad settings of its own (its member of
  /// EngineOptions::settings, validated_settings), sw::Error(kInput) for a problem the engine
  /// cannot use (naming the RetrievalProblem field).
  virtual void prepare(const RetrievalProblem& problem, const EngineOptions& options) = 0;
  /// One iteration; returns its record (iteration and seconds filled in by the loop).
  virtual IterationRecord iterate(int k) = 0;
  /// Best estimate so far.
  virtual Reconstruction finalize() = 0;
};

/// Registry (retrieval/engines/engine_registry.cpp holds the one line per built-in engine).
using EngineFactory = std::function<std::unique_ptr<Engine>()>;
/// Adds an engine at run time (plug-ins, tests); false if the name is taken.
bool register_engine(const std::string& name, EngineFactory factory);
/// Throws sw::Error(kUsage) listing the registered names when `name` is unknown.
std::unique_ptr<Engine> make_engine(const std::string& name);
std::vector<std::string> engine_names();

namespace detail {
/// The built-in engines (defined in retrieval/engines/engine_registry.cpp), registered on first
/// use.
std::vector<std::pair<std::string, EngineFactory>> builtin_engines();
}  // namespace detail

/// The shared iteration loop: prepare, iterate until a stopping rule fires, finalize.
/// Validates the common options first (throws sw::Error(kUsage) naming the field); the engine
/// validates its own settings in prepare().
/// After each iteration k (1-based) the rules are checked in this order:
///   1. numerical failure: G not finite, or iterate() threw sw::Error(kNumeric) -> kFailure;
///   2. callbacks, in order: kAbort -> kFailure, kStop -> kUserStopped;
///   3. noise floor: noise_floor_factor > 0, G_k <= noise_floor_factor * G_noise and
///      k > patience with |G_k - G_{k-patience}| / G_k < noise_floor_relative_tolerance
///      -> kNoiseFloor;
///   4. stall: k > patience and |G_k - G_{k-patience}| / G_k < relative_tolerance -> kConverged;
///   5. k == max_iterations -> kMaxIterations (kNoiseFloor when G_k is at the floor: a
///      trace error at the noise floor is convergence, DESIGN.md);
///   6. wall time since the start of run_engine >= max_seconds -> kTimeLimit.
/// Whatever the termination, finalize() supplies the best (lowest-G) estimate; the loop fills
/// history, termination, message, timings, noise floor and iterations. Exceptions other than
/// sw::Error(kNumeric) from the engine propagate unchanged.
Reconstruction run_engine(Engine& engine, const RetrievalProblem& problem,
                          const EngineOptions& options,
                          const std::vector<IterationCallback>& callbacks = {});

}  // namespace sw
