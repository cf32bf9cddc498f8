#pragma once
// Joint retrieval of several photoelectron lines of one streaking scan: one XUV field and one IR
// field shared by every line, each line with its own binding energy, strength and relative
// photoemission delay (the model and its gradient: retrieval/engines/full_model_engine.h, "Several
// photoelectron lines").
//
// Procedure (joint_line_problem, then the full-model engine on it):
//   1. the window: the reference line's analysis window (preprocess' single-line window, which
//      already holds its streaked band) moved by each joint line's kinetic-energy offset
//      W_k - W_ref, their union cut to the scan's axis; preprocessing is repeated on it
//      (same options, window given explicitly, so no line is subtracted);
//   2. the XUV spectral support and the carrier stay those of the reference line (its support
//      in the single-line problem; the reference spectrum is zeroed outside it), so that the
//      other lines' counts can only be explained by their own terms: E~ at photon energy Omega
//      gives electrons at Omega - Ip_k in line k;
//   3. each other line is modelled over every column of the window whose photon energy
//      W + Ip_k lies inside the XUV grid's band, started from the centre-of-energy delay and
//      strength (retrieval/analysis/line_delays.h);
//   4. the full model is started from the single-line result (XUV and IR) -- or, when the CMA
//      options are given and their ptychographic joint_lines setting is on, first the
//      ptychographic engine runs on the joint problem from the single-line result (the lines as
//      incoherent modes, retrieval/engines/cma_problem.h LineMode) and the full model starts from
//      its XUV, IR, delays and strengths; its result replaces
//      the single-line one as the headline pulse, and the lines' delays and strengths (ratio
//      of the modelled counts, as the centre-of-energy strength) are read back.
// Uncertainties: retrieve() repeats steps 1-4 on each Poisson replica
// (retrieval/analysis/retrieve.h).

#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "retrieval/analysis/line_delays.h"
#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"
#include "retrieval/engines/engine.h"
#include "retrieval/preprocess/preprocess.h"

namespace sw {

/// The joint problem and which entry of the lines list each ExtraLine stands for.
struct JointLineProblem {
  RetrievalProblem problem;
  PreprocessSummary summary;
  std::vector<int> line_index;  ///< per problem.extra_lines entry: index into the lines given
  int reference = -1;           ///< index of the reference line in the lines given
  bool ok = false;
  std::string why_not;  ///< reason when !ok
};

/// Builds the joint problem (steps 1-3). `lines`: result lines (reference flagged) with
/// kinetic_energy_eV; `joint`: per line, whether to fit it jointly (non-reference lines only);
/// `delay_as` / `strength`: per line, initial values (centre of energy). `single` and
/// `single_summary`: the single-line problem and summary of the same trace (window, support).
JointLineProblem joint_line_problem(const Trace& trace, const PreprocessOptions& options,
                                    const RetrievalProblem& single,
                                    const PreprocessSummary& single_summary,
                                    const std::vector<LineEntry>& lines,
                                    const std::vector<char>& joint,
                                    const std::vector<double>& delay_as,
                                    const std::vector<double>& strength);

/// Per joint line (problem.extra_lines order) as read back from a full-model reconstruction of
/// the joint problem: relative delay (as, + = emitted later) and relative strength (modelled
/// counts over the reference's). Throws sw::Error (kInternal) when the reconstruction lacks them.
struct JointLineValues {
  std::vector<double> delay_as, strength, dipole_strength;
  /// Full model only (NaN otherwise): the delay before the engine's line polish and the sigma
  /// of the delay from the cost's curvature with the rest held (full_model_engine.h).
  std::vector<double> delay_before_polish_as, delay_curvature_sigma_as;
};
JointLineValues joint_line_values(const Reconstruction& r, std::size_t num_lines);

/// Runs an engine on a problem (retrieve()'s runner: progress, time origin).
using EngineRunner =
    std::function<Reconstruction(const RetrievalProblem&, const std::string& engine,
                                 const EngineOptions&, const std::string& stage)>;

/// The lines part of retrieve(): the centre-of-energy delays on the whole scan, then (when
/// LineDelayOptions::joint_fit and >= 2 lines were analysed) the joint fit, repeated on each
/// bootstrap replica, and the lines section from both.
struct JointLineStep {
  std::optional<LineDelayResult> centre_of_energy;  ///< done or not (warnings inside)
  bool used = false;              ///< the joint fit ran and gives the headline pulse
  JointLineProblem joint;         ///< its problem (valid when used)
  Reconstruction reconstruction;  ///< its result (time origin fixed by the runner)
  JointLineValues values;         ///< its line values (problem.extra_lines order)
  /// The joint CMA stage's result (step 4; absent when it did not run or failed): its
  /// joint_line.<l>.* settings carry the CMA's per-line delay and strength.
  std::optional<Reconstruction> cma_reconstruction;
  /// One slot per bootstrap replica, sized by the caller before the replicas run: replica b's
  /// line values, written by joint_line_replica(b) alone (so replicas may run on any threads
  /// and the report reads them in index order, the same numbers for any thread count); empty
  /// when its joint problem could not be built or its fit failed.
  std::vector<std::optional<JointLineValues>> replicas;
  std::vector<std::string> warnings;
};

/// Step 1, after the single-line chain: centre of energy (on `trace`, lines of `summary`),
/// then the joint fit from `single_rec` (full-model options `eo`, iterations as given; with
/// `cma`, the CMA options of the chain, the joint CMA stage of step 4 first).
JointLineStep joint_line_estimate(const Trace& trace, const PreprocessOptions& popt,
                                  const LineDelayOptions& lopt, const RetrievalProblem& single,
                                  const PreprocessSummary& summary,
                                  const Reconstruction& single_rec, const EngineOptions& eo,
                                  const EngineRunner& run, const EngineOptions* cma = nullptr);
/// Step 2, per bootstrap replica: the joint fit on replica `index` (< step.replicas.size())
/// from its single-line result `single_rec` (its problem `single`, summary `summary`), started
/// from the estimate's centre-of-energy values (through the joint CMA stage first when `cma` is
/// given, as the estimate). Records the replica's line values in its slot; returns its
/// reconstruction (std::nullopt when the replica's joint problem could not be built or the fit
/// failed).
std::optional<Reconstruction> joint_line_replica(
    JointLineStep& step, int index, const Trace& replica, const PreprocessOptions& popt,
    const RetrievalProblem& single, const PreprocessSummary& summary,
    const Reconstruction& single_rec, const EngineOptions& eo, const std::string& stage,
    const EngineRunner& run, const EngineOptions* cma = nullptr);
/// Step 3: the lines section. Without the joint fit, the centre-of-energy lines; with it, each
/// joint line's relative_delay_as / relative_strength from the joint fit with sigma from the
/// replicas (bootstrap_estimate of retrieval/analysis/quality.h, as the headline numbers; the
/// delay's never below the joint fit's curvature sigma, its Cramer-Rao bound at the fit, and the
/// strength's never below the centre-of-energy sigma), the centre-of-energy values beside them,
/// the Coulomb-laser correction applied to the joint delay.
void joint_line_report(const JointLineStep& step, int bootstrap, std::vector<LineEntry>* lines,
                       std::vector<Param>* extra, std::vector<LineCurve>* curves);

}  // namespace sw
