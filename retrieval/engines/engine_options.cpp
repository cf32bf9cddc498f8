#include "retrieval/engines/engine_options.h"

#include <algorithm>
#include <cmath>
#include <sstream>
#include <type_traits>

namespace sw {

namespace {

// Each built-in engine's settings with the engine's name, in member order; `engine` names the
// full model's member when it is "cma-least-squares" (the same settings under the CMA).
template <class Settings, class F>
void for_each_engine(Settings& s, const std::string& engine, F&& f) {
  f("ptychographic", s.ptychographic);
  f("projections", s.projections);
  f(engine == "cma-least-squares" ? "cma-least-squares" : "full-model", s.full_model);
}

// Whether the member named `owner` (for_each_engine) holds `engine`'s own settings; "auto" (the
// retrieve chain) owns every member.
bool owns(const std::string& engine, const std::string& owner) {
  return engine == "auto" || engine == owner;
}

// for_each_engine over `engine`'s own members first, then over the others (so that a message
// names `engine` whenever its own settings are at fault).
template <class Settings, class F>
void for_each_engine_own_first(Settings& s, const std::string& engine, F&& f) {
  for (const bool own : {true, false})
    for_each_engine(s, engine, [&](const std::string& owner, auto& member) {
      if (owns(engine, owner) == own) f(owner, member);
    });
}

// The closed range of a numeric description, "[lo, hi]" (an open end listed as its closed end,
// an infinite one as -inf / inf).
std::string closed_range(const OptionSpec& s) {
  auto bound = [](double b, const char* inf) {
    if (!std::isfinite(b)) return std::string(inf);
    std::ostringstream r;
    r << b;
    return r.str();
  };
  return "[" + bound(s.min, "-inf") + ", " + bound(s.max, "inf") + "]";
}

template <class T>
inline constexpr bool kIsChoice = std::is_same_v<T, std::string> || std::is_enum_v<T>;

// What the text form of a field of type T must be: "a number in [lo, hi]", "an integer in
// [lo, hi]", "one of a|b" (a text field without choices: any word).
template <class T>
std::string text_rule(const OptionSpec& s) {
  if constexpr (kIsChoice<T>)
    return s.choices.empty() ? std::string("any text") : "one of " + std::string(s.choices);
  else if constexpr (std::is_same_v<T, bool>)
    return "true or false";
  else if constexpr (std::is_integral_v<T>)
    return "an integer in " + closed_range(s);
  else
    return "a number in " + closed_range(s);
}

// Whether `text` suits the field of type T described by `s` (within the closed ends of its
// bounds, among its choices).
template <class T>
bool text_suits(const OptionSpec& s, const std::string& text) {
  if constexpr (kIsChoice<T>) {
    return s.choices.empty() ? !text.empty() : detail::is_choice(s.choices, text);
  } else if constexpr (std::is_same_v<T, bool>) {
    bool b = false;
    return set_option_from_text(s, text, &b).empty();
  } else {
    // Read as the widest type of its kind, so the bounds see the value as written.
    std::conditional_t<std::is_integral_v<T>, long long, double> x{};
    if (!set_option_from_text(s, text, &x).empty()) return false;
    const double v = static_cast<double>(x);
    return std::isfinite(v) && v >= s.min && v <= s.max;
  }
}

std::string join(const std::vector<std::string>& v) {
  std::string s;
  for (const auto& x : v) s += (s.empty() ? "" : ", ") + x;
  return s;
}

// The names of `engine`'s own settings, in description order, each once.
std::vector<std::string> own_names(const std::string& engine) {
  std::vector<std::string> names;
  const EngineSettings defaults;
  for_each_engine(defaults, engine, [&](const std::string& owner, const auto& member) {
    if (!owns(engine, owner)) return;
    auto add = [&](const OptionSpec& s, const auto&) {
      const std::string n(s.name);
      if (std::find(names.begin(), names.end(), n) == names.end()) names.push_back(n);
    };
    std::decay_t<decltype(member)>::describe(member, add);
  });
  return names;
}

}  // namespace

bool EngineSettings::is_given(const std::string& name) const {
  return std::find(given.begin(), given.end(), name) != given.end();
}

void EngineSettings::set_spectrum_constraint(CmaSpectrum spectrum) {
  ptychographic.cma.spectrum = spectrum;
  projections.cma.spectrum = spectrum;
  full_model.spectrum_constraint = to_string(spectrum);
  if (!is_given("spectrum_constraint")) given.emplace_back("spectrum_constraint");
}

void EngineSettings::set_momentum_bands(int nodes) {
  ptychographic.cma.momentum_bands = nodes;
  if (!is_given("momentum_bands")) given.emplace_back("momentum_bands");
}

std::string EngineSettings::text(const std::string& name) const {
  std::optional<std::string> out;
  for_each_engine(*this, "", [&](const std::string&, const auto& member) {
    auto find = [&](const OptionSpec& s, const auto& value) {
      if (!out && s.name == name) out = option_text(value);
    };
    std::decay_t<decltype(member)>::describe(member, find);
  });
  return out.value_or("");
}

std::string EngineSettings::validate() const {
  std::string error;
  for_each_engine(*this, "", [&](const std::string& owner, const auto& member) {
    if (error.empty())
      if (const std::string e = member.validate(); !e.empty()) error = owner + ": " + e;
  });
  return error;
}

void apply_engine_option_text(const std::string& engine,
                              const std::vector<std::pair<std::string, std::string>>& pairs,
                              EngineSettings* settings) {
  for (const auto& [name, text] : pairs) {
    bool found = false;
    for_each_engine_own_first(*settings, engine, [&](const std::string& owner, auto& member) {
      auto set = [&](const OptionSpec& s, auto& field) {
        using T = std::decay_t<decltype(field)>;
        if (s.name != name) return;
        found = true;
        const std::string who = owns(engine, owner) ? engine : owner;
        if (!text_suits<T>(s, text))
          throw usage_error(who + ": engine option " + name + " = '" + text + "': expected " +
                            text_rule<T>(s));
        if (const std::string e = set_option_from_text(s, text, &field); !e.empty())
          throw usage_error(who + ": engine option " + name + " = '" + text + "': " + e);
      };
      std::decay_t<decltype(member)>::describe(member, set);
    });
    if (!found) {
      const std::vector<std::string> names = own_names(engine);
      throw usage_error(engine + ": unknown engine option '" + name + "' (this engine accepts " +
                        (names.empty() ? std::string("no extra options") : join(names)) + ")");
    }
    if (!settings->is_given(name)) settings->given.push_back(name);
  }
  // The exact (open) bounds, checked on the typed values.
  for_each_engine_own_first(*settings, engine, [&](const std::string& owner, const auto& member) {
    if (const std::string e = member.validate(); !e.empty())
      throw usage_error((owns(engine, owner) ? engine : owner) + ": " + e);
  });
}

std::string engine_options_help(const std::string& engine) {
  std::ostringstream out;
  std::vector<std::string> listed;
  const EngineSettings defaults;
  for_each_engine(defaults, engine, [&](const std::string& owner, const auto& member) {
    if (!owns(engine, owner)) return;
    auto line = [&](const OptionSpec& s, const auto& value) {
      using T = std::decay_t<decltype(value)>;
      const std::string n(s.name);
      if (std::find(listed.begin(), listed.end(), n) != listed.end()) return;
      listed.push_back(n);
      out << n << " = " << option_text(value) << "  " << s.help
          << (s.unit.empty() ? "" : ", " + std::string(s.unit)) << " (" << text_rule<T>(s) << ")\n";
    };
    std::decay_t<decltype(member)>::describe(member, line);
  });
  return out.str();
}

}  // namespace sw
