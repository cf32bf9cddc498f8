#pragma once
// Options shared by every engine (EngineOptions) and the built-in engines' own settings, typed
// (EngineSettings), with their one text form (name=value pairs: apply_engine_option_text).
//
// Why one member per engine rather than a std::variant of one engine's settings: one
// EngineOptions drives a chain of engines (retrieve's auto runs the ptychographic engine and then
// the full model from its result, the bootstrap repeats that chain, the satellite hypotheses run
// the full model), and a setting named once (spectrum_constraint) applies to every engine that
// has it. Each engine reads only its own member, already typed; the name=value text is parsed
// once, where it enters (apply_engine_option_text), never by the engines. An engine registered at
// run time (register_engine) has no member here and reads the common fields only.
//
// Each settings struct lives in a header of its own that depends only on option_spec.h
// (cma_settings.h, ptychographic_settings.h, projections_settings.h, full_model_settings.h), so
// this header includes them without including the engines.
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "retrieval/core/error.h"
#include "retrieval/core/option_spec.h"
#include "retrieval/engines/cma_settings.h"
#include "retrieval/engines/full_model_settings.h"
#include "retrieval/engines/projections_settings.h"
#include "retrieval/engines/ptychographic_settings.h"
#include "retrieval/physics/ir_field.h"
#include "retrieval/physics/xuv_field.h"

namespace sw {

/// The built-in engines' own settings, typed (see the header comment), and the names of those
/// set explicitly.
struct EngineSettings {
  PtychographicSettings ptychographic;  ///< engine "ptychographic"
  ProjectionsSettings projections;      ///< engine "projections"
  FullModelSettings full_model;         ///< engines "full-model" and "cma-least-squares"
  /// Names of the settings set explicitly, each once, in the order first set: by their text
  /// (apply_engine_option_text) or by set_spectrum_constraint / set_momentum_bands. The retrieve
  /// pipeline leaves such a setting alone (retrieval/analysis/retrieve.cpp), the full model lists
  /// them in its report ("extra.<name>") and batch option strings name them.
  std::vector<std::string> given;

  bool is_given(const std::string& name) const;
  /// Sets spectrum_constraint of every engine that has one (CmaSettings::spectrum of the CMA
  /// engines, FullModelSettings::spectrum_constraint) and records the name as given.
  void set_spectrum_constraint(CmaSpectrum spectrum);
  /// Sets the ptychographic engine's momentum nodes (the only engine that has them) and records
  /// momentum_bands as given.
  void set_momentum_bands(int nodes);
  /// The text of the setting `name` (option_text of its typed value, from the first member above
  /// that has it); "" when no engine has it.
  std::string text(const std::string& name) const;
  /// "" when every member validates; else "<engine>: <its validate() message>" of the first
  /// that does not.
  std::string validate() const;
};

/// Options shared by every engine, plus the engines' own settings (`settings`). Defaults
/// validate (tests/test_engine.cpp checks it).
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
  /// The engines' own settings; each engine validates its member when it starts (prepare).
  EngineSettings settings;

  /// "" when valid; else names field, value, constraint (the common fields; each engine checks
  /// its own settings)
  std::string validate() const;
};

/// The text form of the engines' settings: sets the settings named in `pairs` (name=value text,
/// as a command line or a config file gives them; a repeated name: the last entry wins) and
/// records each name as given. `engine` is the engine the settings are for (a registered name,
/// or "auto" for retrieve's chain, which accepts the settings of every engine); it names the
/// errors. A name sets that setting of every engine that has it; its text must suit each of them
/// (numbers and integers within the closed ends of the bounds, words among the choices).
/// Throws sw::Error(kUsage):
///   "<engine>: unknown engine option '<name>' (this engine accepts a, b, ...)" when no engine
///   has the setting;
///   "<engine>: engine option <name> = '<text>': expected a number in [lo, hi]" (an integer in
///   [lo, hi], one of a|b|c) for text that does not suit the setting;
///   "<engine>: <validate() message>" when a value breaks an exact (open) bound.
/// The error names the engine that has the setting when it is not `engine` itself.
void apply_engine_option_text(const std::string& engine,
                              const std::vector<std::pair<std::string, std::string>>& pairs,
                              EngineSettings* settings);

/// The settings of `engine` (registered name; "auto": every engine's, each name once), one line
/// each, generated from their descriptions: "<name> = <default>  <help>, <unit> (<rule>)" with
/// the rule "a number in [lo, hi]", "an integer in [lo, hi]" or "one of a|b". "" for an engine
/// without settings of its own.
std::string engine_options_help(const std::string& engine);

/// `settings` when they validate; else throws sw::Error(kUsage) "<engine>: <validate() message>".
/// Engines call it on their member of EngineOptions::settings first thing in prepare().
template <class Settings>
const Settings& validated_settings(const Settings& settings, const std::string& engine) {
  if (const std::string e = settings.validate(); !e.empty()) throw usage_error(engine + ": " + e);
  return settings;
}

}  // namespace sw
