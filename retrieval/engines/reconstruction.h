#pragma once
// What an engine returns (Reconstruction), its per-iteration record and how a run ended.
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include <Eigen/Core>

#include "retrieval/physics/ir_field.h"
#include "retrieval/physics/xuv_field.h"

namespace sw {

/// One iteration's record.
struct IterationRecord {
  int iteration = 0;
  double trace_error = 0.0;  ///< G (Fittinghoff et al., JOSA B 12, 1955 (1995))
  double seconds = 0.0;      ///< wall time since start
  double step_size = 0.0;    ///< engine-specific (ePIE beta, trust radius ...)
};

enum class Termination {
  kConverged,
  kNoiseFloor,
  kMaxIterations,
  kTimeLimit,
  kUserStopped,
  kFailure
};
const char* to_string(Termination t);

/// What an engine returns.
struct Reconstruction {
  std::string engine;  ///< registered name
  std::string model;   ///< forward model it assumed: "cma" (central momentum), "banded-cma"
                       ///< (momentum bands) or "full" (the electron's own momentum)
  /// Noise model of the data term the engine fitted (result.json fit.noise_model):
  ///   "poisson"  intensity-unbiased projection (ptychographic's default) or least squares
  ///              weighted by the Poisson variances (full model with variances);
  ///   "gaussian" least squares on sqrt(I) (amplitude projection, noise band) or unweighted
  ///              least squares on I (full model without variances): Gaussian errors.
  std::string noise_model;
  /// Momentum nodes of the gate a CMA engine used (1 = one p0; the banded CMA more; 0 = not
  /// a CMA engine or not recorded): retrieve's bootstrap replicas use the same count.
  int momentum_nodes = 0;
  XuvField xuv;               ///< time origin: IR reference (tau = 0, DESIGN.md)
  IrField ir;                 ///< retrieved vector potential A(t)
  Eigen::MatrixXd retrieved;  ///< model trace on the problem's axes (|a|^2 units)
  double scale = 1.0;         ///< optimal scale mu of measured vs model
  double trace_error = 0.0;   ///< G of the returned (best) estimate, on `retrieved`
  double noise_floor_trace_error = 0.0;
  std::vector<IterationRecord> history;
  Termination termination = Termination::kFailure;
  std::string message;  ///< human-readable termination message
  double seconds = 0.0;
  // --- additions beside the original fields ---
  std::string reference;         ///< paper(s) the engine implements
  int iterations = 0;            ///< iterations run (== history.size())
  int best_iteration = 0;        ///< iteration whose estimate was returned (0 = initial)
  double prepare_seconds = 0.0;  ///< timing breakdown of `seconds`
  double iterate_seconds = 0.0;
  double finalize_seconds = 0.0;
  /// Settings the engine actually used (name, value), e.g. the resolved mode of "auto", step
  /// sizes, grid sizes: the "requested vs used" record echoed into reports.
  std::vector<std::pair<std::string, std::string>> settings;
  bool converged() const {
    return termination == Termination::kConverged || termination == Termination::kNoiseFloor;
  }
  std::string brief_report() const;  ///< one line
  std::string full_report() const;   ///< table of iterations and timings
};

}  // namespace sw
