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
#include <cmath>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <type_traits>
#include <vector>

#include <Eigen/Core>

#include "retrieval/dipole.h"
#include "retrieval/error.h"
#include "retrieval/ir_field.h"
#include "retrieval/option_spec.h"
#include "retrieval/trace.h"
#include "retrieval/xuv_field.h"

namespace sw {

/// The reference photoelectron spectrum of a RetrievalProblem:
///   kFieldFree    measured without IR (or on edge rows spanning an IR period): fixes
///                 |E_X| and the frequency-shift ambiguity (its centroid);
///   kEdgeRows     weakly streaked edge rows: fixes the shape of |E_X| only; the centroid comes
///                 from a zero time-average of A(t) over the scan;
///   kDelayAverage the delay-averaged, streaking-broadened spectrum: an initial guess only;
///                 the centroid as for kEdgeRows.
enum class ReferenceSpectrum { kFieldFree, kEdgeRows, kDelayAverage };

/// A further photoelectron line of the same XUV and IR fields (joint fit of several lines,
/// retrieval/multi_line_fit.h): its own binding energy, relative strength and relative
/// photoemission delay; its counts lie at kinetic energies [energy_lo_au, energy_hi_au].
struct ExtraLine {
  std::string name;                 ///< "2s", "Kr 4p", ...
  double ionization_energy_au = 0;  ///< > 0
  double energy_lo_au = 0, energy_hi_au = 0;  ///< kinetic band of its counts (a.u.)
  double strength = 1.0;            ///< initial |d_line|^2 / |d_reference|^2 (> 0)
  double delay_au = 0.0;            ///< initial relative delay (+ = emitted later)
};

/// What an engine is asked to explain: a preprocessed trace on engine-ready axes.
/// Built by retrieval/preprocess.h from a measured Trace.
struct RetrievalProblem {
  /// Measured photoelectron energy density after background subtraction, divided by the
  /// energy Jacobian p (so it is comparable to |a|^2); rows = delays, cols = energies.
  Eigen::MatrixXd intensity;
  /// Poisson variance estimate of each element of `intensity` (same layout; > 0). May be
  /// empty (noise-free synthetic data): the noise-floor rule is then off.
  Eigen::MatrixXd variance;
  std::vector<double> energy_au;  ///< uniform, step == grid.dw()
  std::vector<double> delay_au;   ///< ascending, any spacing
  TimeGrid grid;                  ///< XUV grid matched to the energy step
  double ionization_energy_au = 0.0;
  double central_momentum_au = 0.0;  ///< p0 at the photoelectron-spectrum centroid
  double ir_omega_au = 0.0;          ///< IR angular frequency from the sidecar
  /// Field-free (or delay-averaged) photoelectron spectrum on energy_au, |a|^2 units:
  /// constrains |E_X(Omega = W + Ip)|^2.
  std::vector<double> field_free_spectrum;
  /// What field_free_spectrum is, and so what it may fix (retrieval/cma_problem.h).
  ReferenceSpectrum reference = ReferenceSpectrum::kFieldFree;
  DipoleModel dipole;
  /// Energy support of the signal (photoelectron kinetic energy, a.u.): the band where the
  /// delay-integrated signal stands above the noise (retrieval/preprocess.h). Engines keep the
  /// XUV spectrum zero at photon energies outside [support_lo + Ip, support_hi + Ip]; both 0 =
  /// no support known (the whole axis).
  double support_lo_au = 0.0, support_hi_au = 0.0;
  /// Spectrometer resolution, Gaussian FWHM in energy (a.u.; 0 = not known): from the
  /// sidecar's energy_resolution_eV. The full model convolves its model counts with it
  /// (retrieval/forward_adjoint.h); the CMA engines, which project measured amplitudes, do not.
  double energy_resolution_au = 0.0;
  /// Per-element weight of `intensity` in [0, 1] (same layout); empty = every element 1. A
  /// weight of 0 (saturated bins) means the element is not data: projections keep the model
  /// there and least squares ignore it.
  Eigen::MatrixXd weight;
  /// Further lines fitted jointly with the reference (full-model engine only; empty = one line).
  std::vector<ExtraLine> extra_lines;
};

/// Options shared by every engine; engine-specific settings go in `extra` as name=value
/// strings documented by each engine. Defaults validate (tests/test_engine.cpp checks it).
struct EngineOptions {
  int max_iterations = 300;  ///< > 0
  /// Stop when the relative change of the trace error G over the last `patience` iterations
  /// is below this: |G_k - G_{k-patience}| / G_k < relative_tolerance.
  double relative_tolerance = 1e-4;  ///< >= 0
  int patience = 20;                 ///< > 0
  /// Stop when G reaches the noise floor estimated from the variances (G_noise) times this,
  /// G_k <= noise_floor_factor * G_noise, and has settled there: the relative change over the
  /// last `patience` iterations is below noise_floor_relative_tolerance. (A fit reaches the
  /// floor long before its parameters settle, so the floor alone is no stopping rule.)
  double noise_floor_factor = 1.0;               ///< >= 0 (0 disables)
  double noise_floor_relative_tolerance = 1e-3;  ///< >= 0
  unsigned long long seed = 1;                   ///< random delay order, initial guesses
  int threads = 1;                               ///< >= 1
  double max_seconds = 600.0;                    ///< wall-time budget (> 0)
  /// Warm start (used by bootstrap and chaining); empty = engine's own initial guess.
  std::optional<XuvField> initial_xuv;
  std::optional<IrField> initial_ir;
  std::vector<std::pair<std::string, std::string>> extra;

  std::string validate() const;  ///< "" when valid; else names field, value, constraint
  /// Value of an extra option, or fallback. The last entry of a repeated name wins. A value
  /// that is not a number throws sw::Error(kUsage) naming the option.
  double extra_double(const std::string& name, double fallback) const;
  std::string extra_string(const std::string& name, const std::string& fallback) const;
  /// Integer-valued extra (throws sw::Error(kUsage) when the value is not an integer).
  long long extra_int(const std::string& name, long long fallback) const;
  bool has_extra(const std::string& name) const;
};

/// Description of one engine-specific option (EngineOptions::extra), given once by the engine
/// and used for validation, --help text and documentation.
struct ExtraOption {
  enum class Kind { kNumber, kInteger, kChoice };
  std::string name;  ///< key in EngineOptions::extra
  Kind kind = Kind::kNumber;
  std::string default_value;  ///< as text, e.g. "0.25"
  std::string help;           ///< one line; units in the text
  double min = -1e308;        ///< inclusive bounds for kNumber / kInteger
  double max = 1e308;
  std::vector<std::string> choices;  ///< allowed values for kChoice
  /// "" when `value` is acceptable; else a message naming the option, the value and the rule.
  std::string validate(const std::string& value) const;
};

/// The ExtraOption list of an engine's typed settings, generated from their description
/// (retrieval/option_spec.h; kind from the field's type, defaults from `defaults`, the unit
/// appended to the help). Open bounds are listed as their closed ends; the typed validate()
/// enforces them after reading.
template <class Settings>
std::vector<ExtraOption> described_extra_options(const Settings& defaults) {
  std::vector<ExtraOption> out;
  auto add = [&](const OptionSpec& s, const auto& value) {
    using T = std::decay_t<decltype(value)>;
    ExtraOption x;
    x.name = std::string(s.name);
    x.default_value = option_text(value);
    x.help = std::string(s.help) + (s.unit.empty() ? "" : ", " + std::string(s.unit));
    x.min = std::isfinite(s.min) ? s.min : -1e308;
    x.max = std::isfinite(s.max) ? s.max : 1e308;
    if constexpr (std::is_same_v<T, std::string> || std::is_enum_v<T>) {
      x.kind = ExtraOption::Kind::kChoice;
      std::string_view c = s.choices;
      for (std::size_t bar; (bar = c.find('|')) != std::string_view::npos; c.remove_prefix(bar + 1))
        x.choices.emplace_back(c.substr(0, bar));
      x.choices.emplace_back(c);
    } else {
      x.kind = std::is_integral_v<T> ? ExtraOption::Kind::kInteger : ExtraOption::Kind::kNumber;
    }
    out.push_back(std::move(x));
  };
  Settings::describe(defaults, add);
  return out;
}

/// Typed settings from an engine's extras (`name=value` text): every described field whose
/// name appears in options.extra is set from its text (the last entry wins); the others keep
/// the value in `*settings`. Throws sw::Error(kUsage) "<engine>: engine option <name> = '<text>':
/// expected ..." for text of the wrong type; bounds are checked by the settings' validate().
template <class Settings>
void read_described_extras(const EngineOptions& options, const std::string& engine, Settings* settings) {
  auto read = [&](const OptionSpec& s, auto& field) {
    const std::string name(s.name);
    if (!options.has_extra(name)) return;
    const std::string text = options.extra_string(name, "");
    if (const std::string e = set_option_from_text(s, text, &field); !e.empty())
      throw usage_error(engine + ": engine option " + name + " = '" + text + "': " + e);
  };
  Settings::describe(*settings, read);
}

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
  std::string engine;         ///< registered name
  std::string model;          ///< forward model it assumed: "cma" (central momentum), "banded-cma"
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
  /// The engine-specific options it reads from EngineOptions::extra. run_engine() checks every
  /// extra against this list before prepare(): a declared name must have a valid value; a name
  /// no registered engine declares is a usage error (names declared only by other engines
  /// are ignored, so one option set can drive an engine chain).
  virtual std::vector<ExtraOption> extra_options() const { return {}; }
  /// Throws sw::Error(kUsage) for bad engine-specific extras, sw::Error(kInput) for a
  /// problem the engine cannot use (naming the RetrievalProblem field).
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
/// Checks options.extra against engine.extra_options() (see Engine::extra_options); throws
/// sw::Error(kUsage) naming the option. Called by run_engine().
void validate_extras(const Engine& engine, const EngineOptions& options);

namespace detail {
/// The built-in engines (defined in retrieval/engine_registry.cpp), registered on first use.
std::vector<std::pair<std::string, EngineFactory>> builtin_engines();
}  // namespace detail

/// G = sqrt( sum (I_meas - mu I_model)^2 / (N max(I_meas)^2) ) with the optimal scale
/// mu = sum I_meas I_model / sum I_model^2 (Fittinghoff et al. 1995, normalised to the
/// measured peak). Also returns mu. With `weight` (RetrievalProblem::weight, same layout, not
/// empty) every sum carries the element's weight, N = sum of the weights and the peak is taken
/// over elements of weight > 0 (weight-0 elements, e.g. saturated bins, are not data).
double trace_error(const Eigen::MatrixXd& measured, const Eigen::MatrixXd& model,
                   double* mu = nullptr, const Eigen::MatrixXd* weight = nullptr);
/// G expected from noise alone: sqrt(sum variance / (N max^2)); with `weight` as above.
double noise_floor_trace_error(const Eigen::MatrixXd& measured, const Eigen::MatrixXd& variance,
                               const Eigen::MatrixXd* weight = nullptr);

/// The shared iteration loop: prepare, iterate until a stopping rule fires, finalize.
/// Validates options first (throws sw::Error(kUsage) naming the field), then the extras.
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
