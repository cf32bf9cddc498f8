#pragma once
// Reconstruction engines: one interface, one shared iteration loop, a registry by name
// (DESIGN.md "Engines"). Adding an engine is one .cpp file with a class deriving from Engine and
// a factory function, plus one registration line in retrieval/engine_registry.cpp (explicit
// rather than static-initialiser registration, which a static library's linker would drop).
//
// Life cycle, driven by run_engine():
//   prepare(problem, options)   -- build grids, initial guess (validated options only)
//   iterate(k) -> IterationRecord, once per iteration, until a stopping rule fires
//   finalize() -> Reconstruction  (best estimate so far, never the last if it was worse)
// The loop (not the engines) owns counters, timing, callbacks and the stopping rules.

#include <chrono>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "retrieval/dipole.h"
#include "retrieval/ir_field.h"
#include "retrieval/trace.h"
#include "retrieval/xuv_field.h"

namespace sw {

/// What an engine is asked to explain: a preprocessed trace on engine-ready axes.
/// Built by retrieval/preprocess.h from a measured Trace.
struct RetrievalProblem {
  /// Measured photoelectron energy density after background subtraction, divided by the
  /// energy Jacobian p (so it is comparable to |a|^2); rows = delays, cols = energies.
  Eigen::MatrixXd intensity;
  /// Poisson variance estimate of each element of `intensity` (same layout; > 0).
  Eigen::MatrixXd variance;
  std::vector<double> energy_au;      ///< uniform, step == grid.dw()
  std::vector<double> delay_au;       ///< ascending, any spacing
  TimeGrid grid;                      ///< XUV grid matched to the energy step
  double ionization_energy_au = 0.0;
  double central_momentum_au = 0.0;   ///< p0 at the photoelectron-spectrum centroid
  double ir_omega_au = 0.0;           ///< IR angular frequency from the sidecar
  /// Field-free (or delay-averaged) photoelectron spectrum on energy_au, |a|^2 units:
  /// constrains |E_X(Omega = W + Ip)|^2.
  std::vector<double> field_free_spectrum;
  DipoleModel dipole;
};

/// Options shared by every engine; engine-specific settings go in `extra` as name=value
/// strings documented by each engine. Defaults validate (tests/test_engine.cpp checks it).
struct EngineOptions {
  int max_iterations = 300;           ///< > 0
  /// Stop when the relative change of the trace error G over the last `patience` iterations
  /// is below this: |G_k - G_{k-patience}| / G_k < relative_tolerance.
  double relative_tolerance = 1e-4;   ///< >= 0
  int patience = 20;                  ///< > 0
  /// Stop when G reaches the noise floor estimated from the variances (G_noise) times this.
  double noise_floor_factor = 1.0;    ///< >= 0 (0 disables)
  unsigned long long seed = 1;        ///< random delay order, initial guesses
  int threads = 1;                    ///< >= 1
  double max_seconds = 600.0;         ///< wall-time budget (> 0)
  /// Warm start (used by bootstrap and chaining); empty = engine's own initial guess.
  std::optional<XuvField> initial_xuv;
  std::optional<IrField> initial_ir;
  std::vector<std::pair<std::string, std::string>> extra;

  std::string validate() const;       ///< "" when valid; else names field, value, constraint
  /// Value of an extra option, or fallback.
  double extra_double(const std::string& name, double fallback) const;
  std::string extra_string(const std::string& name, const std::string& fallback) const;
};

/// One iteration's record.
struct IterationRecord {
  int iteration = 0;
  double trace_error = 0.0;           ///< G (Fittinghoff et al., JOSA B 12, 1955 (1995))
  double seconds = 0.0;               ///< wall time since start
  double step_size = 0.0;             ///< engine-specific (ePIE beta, trust radius ...)
};

enum class Termination { kConverged, kNoiseFloor, kMaxIterations, kTimeLimit, kUserStopped, kFailure };
const char* to_string(Termination t);

/// What an engine returns.
struct Reconstruction {
  std::string engine;                 ///< registered name
  std::string model;                  ///< "cma" or "full" (the forward model it assumed)
  XuvField xuv;                       ///< time origin: IR reference (tau = 0, DESIGN.md)
  IrField ir;                         ///< retrieved vector potential A(t)
  Eigen::MatrixXd retrieved;          ///< model trace on the problem's axes (|a|^2 units)
  double scale = 1.0;                 ///< optimal scale mu of measured vs model
  double trace_error = 0.0;           ///< best G
  double noise_floor_trace_error = 0.0;
  std::vector<IterationRecord> history;
  Termination termination = Termination::kFailure;
  std::string message;                ///< human-readable termination message
  double seconds = 0.0;
  bool converged() const {
    return termination == Termination::kConverged || termination == Termination::kNoiseFloor;
  }
  std::string brief_report() const;   ///< one line
  std::string full_report() const;    ///< table of iterations and timings
};

/// Callback decision (Ceres style).
enum class CallbackResult { kContinue, kStop, kAbort };
using IterationCallback = std::function<CallbackResult(const IterationRecord&)>;

class Engine {
 public:
  virtual ~Engine() = default;
  /// Registered name, a one-line description for --help, and the paper it implements.
  virtual std::string name() const = 0;
  virtual std::string description() const = 0;
  virtual std::string reference() const = 0;
  /// Throws sw::Error(kUsage) for bad engine-specific extras.
  virtual void prepare(const RetrievalProblem& problem, const EngineOptions& options) = 0;
  /// One iteration; returns its record (iteration and seconds filled in by the loop).
  virtual IterationRecord iterate(int k) = 0;
  /// Best estimate so far.
  virtual Reconstruction finalize() = 0;
};

/// Registry (retrieval/engine_registry.cpp holds the one line per built-in engine).
using EngineFactory = std::function<std::unique_ptr<Engine>()>;
/// Adds an engine at run time (plug-ins, tests); false if the name is taken.
bool register_engine(const std::string& name, EngineFactory factory);
/// Throws sw::Error(kUsage) listing the registered names when `name` is unknown.
std::unique_ptr<Engine> make_engine(const std::string& name);
std::vector<std::string> engine_names();

/// G = sqrt( sum (I_meas - mu I_model)^2 / (N max(I_meas)^2) ) with the optimal scale
/// mu = sum I_meas I_model / sum I_model^2 (Fittinghoff et al. 1995, normalised to the
/// measured peak). Also returns mu.
double trace_error(const Eigen::MatrixXd& measured, const Eigen::MatrixXd& model, double* mu = nullptr);
/// G expected from noise alone: sqrt(sum variance / (N max^2)).
double noise_floor_trace_error(const Eigen::MatrixXd& measured, const Eigen::MatrixXd& variance);

/// The shared iteration loop: prepare, iterate until a stopping rule fires, finalize.
/// Validates options first (throws sw::Error(kUsage) naming the field).
Reconstruction run_engine(Engine& engine, const RetrievalProblem& problem,
                          const EngineOptions& options,
                          const std::vector<IterationCallback>& callbacks = {});

}  // namespace sw

