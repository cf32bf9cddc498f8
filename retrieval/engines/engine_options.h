#pragma once
// Options shared by every engine (EngineOptions) and the engines' own typed settings read from
// its name=value extras through their one description (retrieval/core/option_spec.h).
#include <optional>
#include <string>
#include <type_traits>
#include <utility>
#include <vector>

#include "retrieval/core/error.h"
#include "retrieval/core/option_spec.h"
#include "retrieval/physics/ir_field.h"
#include "retrieval/physics/xuv_field.h"

namespace sw {

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
/// (retrieval/core/option_spec.h; kind from the field's type, defaults from `defaults`, the unit
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
void read_described_extras(const EngineOptions& options, const std::string& engine,
                           Settings* settings) {
  auto read = [&](const OptionSpec& s, auto& field) {
    const std::string name(s.name);
    if (!options.has_extra(name)) return;
    const std::string text = options.extra_string(name, "");
    if (const std::string e = set_option_from_text(s, text, &field); !e.empty())
      throw usage_error(engine + ": engine option " + name + " = '" + text + "': " + e);
  };
  Settings::describe(*settings, read);
}

/// read_described_extras over the defaults, then the settings' validate(): throws
/// sw::Error(kUsage) "<engine>: <validate() message>" when a bound is broken.
template <class Settings>
Settings read_validated_extras(const EngineOptions& options, const std::string& engine) {
  Settings settings;
  read_described_extras(options, engine, &settings);
  if (const std::string e = settings.validate(); !e.empty()) throw usage_error(engine + ": " + e);
  return settings;
}

}  // namespace sw
