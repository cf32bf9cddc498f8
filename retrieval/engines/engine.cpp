#include "retrieval/engines/engine.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <iomanip>
#include <limits>
#include <mutex>
#include <sstream>

#include "retrieval/core/enum_names.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"

namespace sw {

namespace {

constexpr EnumNames<Termination, 6> kTerminationNames{
    {{{Termination::kConverged, "converged"},
      {Termination::kNoiseFloor, "noise_floor"},
      {Termination::kMaxIterations, "max_iterations"},
      {Termination::kTimeLimit, "time_limit"},
      {Termination::kUserStopped, "user_stopped"},
      {Termination::kFailure, "failure"}}}};

}  // namespace

const char* to_string(Termination t) { return kTerminationNames.name(t); }

// --- options --------------------------------------------------------------------------------

std::string EngineOptions::validate() const {
  std::ostringstream s;
  if (max_iterations <= 0)
    s << "max_iterations = " << max_iterations << ": must be > 0";
  else if (!(relative_tolerance >= 0) || !std::isfinite(relative_tolerance))
    s << "relative_tolerance = " << relative_tolerance << ": must be finite and >= 0";
  else if (patience <= 0)
    s << "patience = " << patience << ": must be > 0";
  else if (!(noise_floor_factor >= 0) || !std::isfinite(noise_floor_factor))
    s << "noise_floor_factor = " << noise_floor_factor << ": must be finite and >= 0 (0 disables)";
  else if (!(noise_floor_relative_tolerance >= 0) || !std::isfinite(noise_floor_relative_tolerance))
    s << "noise_floor_relative_tolerance = " << noise_floor_relative_tolerance
      << ": must be finite and >= 0";
  else if (threads < 1)
    s << "threads = " << threads << ": must be >= 1";
  else if (!(max_seconds > 0))
    s << "max_seconds = " << max_seconds << ": must be > 0";
  return s.str();
}

namespace {

std::string join(const std::vector<std::string>& v, const char* sep = ", ") {
  std::string s;
  for (const auto& x : v) s += (s.empty() ? "" : sep) + x;
  return s;
}

}  // namespace

// --- registry -------------------------------------------------------------------------------

namespace {

struct Registry {
  std::mutex mutex;
  std::vector<std::pair<std::string, EngineFactory>> entries;  // registration order
  bool builtins_loaded = false;
};

Registry& registry() {
  static Registry r;
  std::lock_guard<std::mutex> lock(r.mutex);
  if (!r.builtins_loaded) {
    r.builtins_loaded = true;
    for (auto& e : detail::builtin_engines()) r.entries.push_back(std::move(e));
  }
  return r;
}

}  // namespace

bool register_engine(const std::string& name, EngineFactory factory) {
  Registry& r = registry();
  std::lock_guard<std::mutex> lock(r.mutex);
  if (name.empty() || !factory) return false;
  for (const auto& e : r.entries)
    if (e.first == name) return false;
  r.entries.emplace_back(name, std::move(factory));
  return true;
}

std::vector<std::string> engine_names() {
  Registry& r = registry();
  std::lock_guard<std::mutex> lock(r.mutex);
  std::vector<std::string> n;
  for (const auto& e : r.entries) n.push_back(e.first);
  return n;
}

std::unique_ptr<Engine> make_engine(const std::string& name) {
  EngineFactory f;
  {
    Registry& r = registry();
    std::lock_guard<std::mutex> lock(r.mutex);
    for (const auto& e : r.entries)
      if (e.first == name) f = e.second;
  }
  if (!f)
    throw usage_error("unknown engine '" + name + "': registered engines are " +
                      join(engine_names()));
  return f();
}

// --- the loop -------------------------------------------------------------------------------

namespace {

using Clock = std::chrono::steady_clock;

double since(Clock::time_point t0) {
  return std::chrono::duration<double>(Clock::now() - t0).count();
}

// Stopping rules, one predicate each (the order of use is documented in engine.h).
bool at_noise_floor(double G, double G_noise, const EngineOptions& o) {
  return o.noise_floor_factor > 0 && G_noise > 0 && G <= o.noise_floor_factor * G_noise;
}

/// Relative change of G over the last `patience` iterations; < 0 when not yet defined.
double relative_change(const std::vector<IterationRecord>& h, const EngineOptions& o) {
  const std::size_t p = static_cast<std::size_t>(o.patience);
  if (h.size() <= p) return -1.0;
  const double g = h.back().trace_error, g0 = h[h.size() - 1 - p].trace_error;
  if (g == 0.0) return 0.0;
  return std::abs(g - g0) / g;
}

bool settled_at_noise_floor(const std::vector<IterationRecord>& h, double G_noise,
                            const EngineOptions& o) {
  if (!at_noise_floor(h.back().trace_error, G_noise, o)) return false;
  const double r = relative_change(h, o);
  return r >= 0 && r < o.noise_floor_relative_tolerance;
}

bool stalled(const std::vector<IterationRecord>& h, const EngineOptions& o) {
  const double r = relative_change(h, o);
  return r >= 0 && r < o.relative_tolerance;
}

bool reached_max_iterations(int k, const EngineOptions& o) { return k >= o.max_iterations; }

bool out_of_time(double elapsed, const EngineOptions& o) { return elapsed >= o.max_seconds; }

}  // namespace

Reconstruction run_engine(Engine& engine, const RetrievalProblem& problem,
                          const EngineOptions& options,
                          const std::vector<IterationCallback>& callbacks) {
  if (const std::string e = options.validate(); !e.empty())
    throw usage_error(engine.name() + ": EngineOptions." + e);

  const Clock::time_point t0 = Clock::now();
  engine.prepare(problem, options);
  const double t_prepared = since(t0);
  const double G_noise =
      noise_floor_trace_error(problem.intensity, problem.variance, &problem.weight);

  std::vector<IterationRecord> history;
  Termination term = Termination::kMaxIterations;
  std::ostringstream why;
  double best = std::numeric_limits<double>::infinity();
  int best_k = 0;
  for (int k = 1;; ++k) {
    IterationRecord rec;
    try {
      rec = engine.iterate(k);
    } catch (const Error& e) {
      if (e.kind() != ErrorKind::kNumeric) throw;
      term = Termination::kFailure;
      why << "numerical failure at iteration " << k << ": " << e.what();
      break;
    }
    rec.iteration = k;
    rec.seconds = since(t0);
    history.push_back(rec);
    const double G = rec.trace_error;
    if (!std::isfinite(G)) {
      term = Termination::kFailure;
      why << "the trace error became " << G << " at iteration " << k << " (numerical failure)";
      break;
    }
    if (G < best) {
      best = G;
      best_k = k;
    }
    CallbackResult cb = CallbackResult::kContinue;
    for (const auto& f : callbacks) {
      cb = f(rec);
      if (cb != CallbackResult::kContinue) break;
    }
    if (cb == CallbackResult::kAbort) {
      term = Termination::kFailure;
      why << "aborted by a callback at iteration " << k;
      break;
    }
    if (cb == CallbackResult::kStop) {
      term = Termination::kUserStopped;
      why << "stopped by a callback at iteration " << k;
      break;
    }
    if (settled_at_noise_floor(history, G_noise, options)) {
      term = Termination::kNoiseFloor;
      why << "G = " << format_g(G) << " settled at the noise floor ("
          << format_g(options.noise_floor_factor)
          << " x G_noise = " << format_g(options.noise_floor_factor * G_noise)
          << ", relative change over the last " << options.patience << " iterations "
          << format_g(relative_change(history, options)) << ") at iteration " << k;
      break;
    }
    if (stalled(history, options)) {
      term = Termination::kConverged;
      why << "relative change of G over the last " << options.patience << " iterations "
          << format_g(relative_change(history, options)) << " < relative_tolerance "
          << format_g(options.relative_tolerance) << " at iteration " << k;
      break;
    }
    if (reached_max_iterations(k, options)) {
      if (at_noise_floor(G, G_noise, options)) {
        term = Termination::kNoiseFloor;
        why << "reached max_iterations = " << options.max_iterations << " with G = " << format_g(G)
            << " at the noise floor (" << format_g(options.noise_floor_factor)
            << " x G_noise = " << format_g(options.noise_floor_factor * G_noise) << ")";
      } else {
        term = Termination::kMaxIterations;
        why << "reached max_iterations = " << options.max_iterations
            << " before any convergence rule held";
      }
      break;
    }
    if (out_of_time(rec.seconds, options)) {
      term = Termination::kTimeLimit;
      why << "wall time " << format_g(rec.seconds)
          << " s reached max_seconds = " << format_g(options.max_seconds) << " at iteration " << k;
      break;
    }
  }
  const double t_iterated = since(t0);

  Reconstruction r = engine.finalize();
  if (r.engine.empty()) r.engine = engine.name();
  if (r.reference.empty()) r.reference = engine.reference();
  r.history = std::move(history);
  r.iterations = static_cast<int>(r.history.size());
  r.best_iteration = best_k;
  r.termination = term;
  if (std::isfinite(best) && best_k > 0)
    why << "; best G = " << format_g(best) << " at iteration " << best_k;
  r.message = why.str();
  r.noise_floor_trace_error = G_noise;
  r.seconds = since(t0);
  r.prepare_seconds = t_prepared;
  r.iterate_seconds = t_iterated - t_prepared;
  r.finalize_seconds = r.seconds - t_iterated;
  return r;
}

// --- reports --------------------------------------------------------------------------------

std::string Reconstruction::brief_report() const {
  std::ostringstream s;
  s << engine << " (" << (model.empty() ? "?" : model) << "): " << to_string(termination)
    << " after " << iterations << " iterations in " << format_g(seconds)
    << " s, G = " << format_g(trace_error) << " (noise floor " << format_g(noise_floor_trace_error)
    << "), scale " << format_g(scale) << "; " << message;
  return s.str();
}

std::string Reconstruction::full_report() const {
  std::ostringstream s;
  s << "engine        " << engine << " (forward model: " << model << ")\n";
  if (!reference.empty()) s << "reference     " << reference << "\n";
  s << "termination   " << to_string(termination) << ": " << message << "\n";
  s << "trace error   G = " << format_g(trace_error, kDisplayDigits)
    << ", noise floor G_noise = " << format_g(noise_floor_trace_error, kDisplayDigits)
    << ", scale mu = " << format_g(scale, kDisplayDigits) << ", best iteration " << best_iteration
    << " of " << iterations << "\n";
  s << "time          " << format_g(seconds) << " s total = " << format_g(prepare_seconds)
    << " s prepare + " << format_g(iterate_seconds) << " s iterations + "
    << format_g(finalize_seconds) << " s finalize";
  if (iterations > 0) s << " (" << format_g(1e3 * iterate_seconds / iterations) << " ms/iteration)";
  s << "\n";
  for (const auto& [k, v] : settings) s << "setting       " << k << " = " << v << "\n";
  s << "\n  iteration   trace error G     seconds   step size\n";
  // At most ~60 rows: the first 10, then evenly spaced, always the best and the last.
  const std::size_t n = history.size();
  const std::size_t stride = n > 60 ? (n - 10) / 50 + 1 : 1;
  for (std::size_t i = 0; i < n; ++i) {
    const IterationRecord& h = history[i];
    const bool keep =
        i < 10 || (i - 10) % stride == 0 || i + 1 == n || h.iteration == best_iteration;
    if (!keep) continue;
    char line[128];
    std::snprintf(line, sizeof line, "  %9d   %13.6e   %9.4f   %9.3g%s\n", h.iteration,
                  h.trace_error, h.seconds, h.step_size,
                  h.iteration == best_iteration ? "   <- best" : "");
    s << line;
  }
  return s.str();
}

}  // namespace sw
