#pragma once
// Options described once (issue 12). An options struct lists each of its fields a single time --
// name, the field itself (its default is the struct's in-class initialiser), bounds, unit, help,
// command-line flag, config-file key -- in a static `describe` walk:
//
//   struct FooOptions {
//     double step_rad = 0.5;  ///< one comment per field, as everywhere
//     template <class Self, class Visitor>
//     static void describe(Self& self, Visitor& v) {  // Self = FooOptions or const FooOptions
//       v(OptionSpec{.name = "step_rad", .unit = "rad", .help = "step of ...", .min = 0,
//                    .min_open = true, .flag = "--step"},
//         self.step_rad);
//     }
//     std::string validate() const { return validate_described(*this); }
//   };
//
// Every consumer walks that one list: validate_described() below (bounds, choices), the CLI
// (cli/option_registry.h: flags and --help text with units), the batch config file (same
// header: config keys), the settings echo in result.json (`settings.<name>`, for fields with
// echo = true) and the canonical batch option strings (cli/batch_runner.cpp, batch = true).
// The visitor is called as v(spec, field) with field a (const) reference of one of the types
// double, int, long long, unsigned long long, bool, std::string or an enum with the overloads
// `to_string(E)` and `parse_option(const std::string&, E*)` (found by argument-dependent
// lookup). Fields of nested structs may be described (self.preprocess.dipole).
//
// Library header: no CLI, JSON or OpenCV (retrieval/ rule).

#include <charconv>
#include <cmath>
#include <limits>
#include <sstream>
#include <string>
#include <string_view>
#include <type_traits>
#include <vector>

#include "retrieval/core/result.h"

namespace sw {

/// Description of one option field. Bounds apply to numbers (bool and text ignore them);
/// `choices` to text and enums.
struct OptionSpec {
  std::string_view name =
      {};  ///< field name: messages, result key settings.<name>, batch string key
  std::string_view unit = {};  ///< "rad", "s", "as" ...; "" for a dimensionless number or a word
  std::string_view help = {};  ///< one line without the unit (the CLI appends it)
  double min = -std::numeric_limits<double>::infinity();  ///< lower bound (inclusive ...
  bool min_open = false;                                  ///< ... unless open: value > min)
  double max = std::numeric_limits<double>::infinity();   ///< upper bound (inclusive ...
  bool max_open = false;                                  ///< ... unless open: value < max)
  /// Allowed words of a text or enum field, separated by '|' ("" = any non-empty text).
  std::string_view choices = {};
  /// Command-line flag(s) in CLI11 syntax ("--cma-phase-limit"; "--despike,!--no-despike" for a
  /// boolean with its negation; "!--no-rainbow" for a boolean whose only flag turns it off);
  /// "" = not on the command line.
  std::string_view flag = {};
  std::string_view config_key = {};  ///< key in the batch config file; "" = none
  bool echo = true;                  ///< written to result.json as settings.<name>
  bool batch = true;                 ///< part of the canonical batch option strings (resume hash)
};

/// Whether the field's only flag is a negation ("!--no-rainbow"): the flag (and the Python
/// keyword no_rainbow = True) sets the boolean to false.
inline bool negated_flag(const OptionSpec& s) {
  return !s.flag.empty() && s.flag.front() == '!' && s.flag.find(',') == std::string_view::npos;
}

namespace detail {

template <class T>
inline constexpr bool kIsOptionNumber = std::is_arithmetic_v<T> && !std::is_same_v<T, bool>;

inline bool is_choice(std::string_view choices, std::string_view word) {
  std::size_t start = 0;
  while (start <= choices.size()) {
    const std::size_t bar = choices.find('|', start);
    const std::size_t end = bar == std::string_view::npos ? choices.size() : bar;
    if (choices.substr(start, end - start) == word) return true;
    if (bar == std::string_view::npos) break;
    start = bar + 1;
  }
  return false;
}

/// The rule of a numeric spec as text ("> 0", ">= 1", "in [0, 1)", "" without bounds).
inline std::string bound_rule(const OptionSpec& s) {
  std::ostringstream r;
  const bool lo = std::isfinite(s.min), hi = std::isfinite(s.max);
  if (lo && hi)
    r << "in " << (s.min_open ? "(" : "[") << s.min << ", " << s.max << (s.max_open ? ")" : "]");
  else if (lo)
    r << (s.min_open ? "> " : ">= ") << s.min;
  else if (hi)
    r << (s.max_open ? "< " : "<= ") << s.max;
  return r.str();
}

/// Walks a description and records the first violated rule (validate_described).
struct BoundsCheck {
  std::string error;
  template <class T>
  void operator()(const OptionSpec& s, const T& value) {
    if (!error.empty()) return;
    std::ostringstream m;
    if constexpr (kIsOptionNumber<T>) {
      const double x = static_cast<double>(value);
      const bool ok = std::isfinite(x) && (s.min_open ? x > s.min : x >= s.min) &&
                      (s.max_open ? x < s.max : x <= s.max);
      if (!ok) {
        m << s.name << " = " << value << ": must be ";
        const std::string rule = bound_rule(s);
        m << (rule.empty() ? "finite" : rule);
        if (!s.unit.empty()) m << " " << s.unit;
        error = m.str();
      }
    } else if constexpr (std::is_same_v<T, std::string>) {
      if (value.empty())
        error = std::string(s.name) + " is empty: expected " +
                (s.choices.empty() ? std::string(s.help) : std::string(s.choices));
      else if (!s.choices.empty() && !is_choice(s.choices, value))
        error = std::string(s.name) + " = '" + value + "': expected " + std::string(s.choices);
    } else if constexpr (std::is_enum_v<T>) {
      if (!s.choices.empty() && !is_choice(s.choices, to_string(value)))
        error = std::string(s.name) + " = '" + to_string(value) + "': expected " +
                std::string(s.choices);
    }
  }
};

}  // namespace detail

/// "" when every described field of `o` lies within its bounds and choices; else the first
/// violation, naming the field, its value and the rule ("cma_phase_error_max_rad = 0: must
/// be > 0 rad"). Cross-field rules stay in the struct's own validate().
template <class Options>
std::string validate_described(const Options& o) {
  detail::BoundsCheck check;
  Options::describe(o, check);
  return check.error;
}

/// A described value as the text of the batch option strings: numbers in the shortest form
/// that reads back to the same value (std::to_chars), booleans as 1/0, enums by name.
template <class T>
std::string option_text(const T& value) {
  if constexpr (std::is_same_v<T, std::string>) {
    return value;
  } else if constexpr (std::is_same_v<T, bool>) {
    return value ? "1" : "0";
  } else if constexpr (std::is_enum_v<T>) {
    return std::string(to_string(value));
  } else {
    char buf[32];
    const auto r = std::to_chars(buf, buf + sizeof buf, value);
    return std::string(buf, r.ptr);
  }
}

/// Sets a described field from text (a config file's value, a name=value engine option):
/// "" when done, else what was expected ("expected a number", "expected an integer",
/// "expected one of a|b"). Bounds are not checked here (validate_described does).
template <class T>
std::string set_option_from_text(const OptionSpec& s, const std::string& text, T* out) {
  if constexpr (std::is_same_v<T, std::string>) {
    *out = text;
    return "";
  } else if constexpr (std::is_same_v<T, bool>) {
    if (text == "true" || text == "1")
      *out = true;
    else if (text == "false" || text == "0")
      *out = false;
    else
      return "expected true or false";
    return "";
  } else if constexpr (std::is_enum_v<T>) {
    if (!parse_option(text, out)) return "expected " + std::string(s.choices);
    return "";
  } else if constexpr (std::is_integral_v<T>) {
    try {
      std::size_t used = 0;
      const long long v = std::stoll(text, &used);
      if (used != text.size()) return "expected an integer";
      if (std::is_unsigned_v<T> && v < 0) return "expected an integer >= 0";
      // A value outside the field's type would wrap in the cast and then pass its bounds.
      if constexpr (!std::is_unsigned_v<T> && sizeof(T) < sizeof(long long))
        if (v < static_cast<long long>(std::numeric_limits<T>::min()) ||
            v > static_cast<long long>(std::numeric_limits<T>::max()))
          return "expected an integer";
      *out = static_cast<T>(v);
    } catch (...) {
      return "expected an integer";
    }
    return "";
  } else {
    try {
      std::size_t used = 0;
      const double v = std::stod(text, &used);
      if (used != text.size()) return "expected a number";
      *out = static_cast<T>(v);
    } catch (...) {
      return "expected a number";
    }
    return "";
  }
}

/// Appends settings.<name> = value for every described field with echo = true, in the order
/// of the description (integers as long long, enums by name): the "requested" settings of
/// result.json.
template <class Options>
void append_settings_echo(const Options& o, std::vector<Param>* out,
                          const std::string& prefix = "settings.") {
  auto echo = [&](const OptionSpec& s, const auto& value) {
    using T = std::decay_t<decltype(value)>;
    if (!s.echo) return;
    const std::string key = prefix + std::string(s.name);
    if constexpr (std::is_same_v<T, bool> || std::is_same_v<T, double> ||
                  std::is_same_v<T, std::string>)
      out->push_back({key, value});
    else if constexpr (std::is_enum_v<T>)
      out->push_back({key, std::string(to_string(value))});
    else if constexpr (std::is_floating_point_v<T>)
      out->push_back({key, static_cast<double>(value)});
    else
      out->push_back({key, static_cast<long long>(value)});
  };
  Options::describe(o, echo);
}

/// (name, text) of every described field with batch = true, in the order of the description:
/// the canonical option strings of batch (cli/batch_runner.cpp) are built from these.
template <class Options>
std::vector<std::pair<std::string, std::string>> described_texts(const Options& o) {
  std::vector<std::pair<std::string, std::string>> out;
  auto text = [&](const OptionSpec& s, const auto& value) {
    if (s.batch) out.emplace_back(std::string(s.name), option_text(value));
  };
  Options::describe(o, text);
  return out;
}

}  // namespace sw
