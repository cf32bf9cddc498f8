#pragma once
// Command-line flags and config-file keys generated from an options description
// (retrieval/core/option_spec.h): each described field with a flag becomes one CLI11 option bound
// to the field, its --help text the description's help with the unit; each field with a config key
// can be set from a JSON/YAML value. No option is listed here by hand.

#include <map>
#include <string>
#include <type_traits>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "retrieval/core/error.h"
#include "retrieval/core/option_spec.h"

namespace sw::cli {

/// The --help text of a described field: help, then the unit in parentheses.
inline std::string described_help(const OptionSpec& s) {
  std::string h(s.help);
  if (!s.unit.empty()) h += " (" + std::string(s.unit) + ")";
  if (!s.choices.empty()) h += ": " + std::string(s.choices);
  return h;
}

/// Which described fields add_described_options registers: every field with a flag, or only
/// those that also have a config key (the options a batch can set for every scan).
enum class DescribedFlags { kAll, kConfigKeyed };

/// Registers one option of `cmd` per described field of `o` that has a flag (see `which`),
/// bound to that field (`o` must outlive the parse); defaults are shown in --help, whose text
/// starts with `help_prefix`. A text field with choices is checked at parse time, like an enum.
/// Returns config key (or, without one, the field name) -> option, so that a config file can
/// tell which options the command line set.
template <class Options>
std::map<std::string, CLI::Option*> add_described_options(
    CLI::App* cmd, Options& o, DescribedFlags which = DescribedFlags::kAll,
    const std::string& help_prefix = "") {
  std::map<std::string, CLI::Option*> added;
  auto add = [&](const OptionSpec& s, auto& field) {
    using T = std::decay_t<decltype(field)>;
    if (s.flag.empty() || (which == DescribedFlags::kConfigKeyed && s.config_key.empty())) return;
    const std::string flag(s.flag);
    const std::string help = help_prefix + described_help(s);
    CLI::Option* opt = nullptr;
    if constexpr (std::is_same_v<T, bool>) {
      if (negated_flag(s)) {
        T* target = &field;
        opt = cmd->add_flag_callback(
            flag.substr(1), [target] { *target = false; }, help);
      } else {
        opt = cmd->add_flag(flag, field, help);
      }
    } else if constexpr (std::is_same_v<T, std::string>) {
      opt = cmd->add_option(flag, field, help)->capture_default_str();
      if (!s.choices.empty())
        opt->check(
            [choices = std::string(s.choices)](const std::string& text) {
              return sw::detail::is_choice(choices, text) ? std::string()
                                                          : text + ": expected " + choices;
            },
            "");  // the choices are in the help text already
    } else if constexpr (std::is_enum_v<T>) {
      T* target = &field;
      const std::string choices(s.choices);
      opt = cmd->add_option_function<std::string>(
                   flag,
                   [target, flag, choices](const std::string& text) {
                     if (!parse_option(text, target))
                       throw CLI::ValidationError(flag, text + ": expected " + choices);
                   },
                   help)
                ->default_str(to_string(field));
    } else {
      opt = cmd->add_option(flag, field, help)->capture_default_str();
    }
    added[std::string(s.config_key.empty() ? s.name : s.config_key)] = opt;
  };
  Options::describe(o, add);
  return added;
}

/// The config keys of a description, in its order.
template <class Options>
std::vector<std::string> described_config_keys() {
  std::vector<std::string> keys;
  auto collect = [&](const OptionSpec& s, const auto&) {
    if (!s.config_key.empty()) keys.emplace_back(s.config_key);
  };
  const Options d{};
  Options::describe(d, collect);
  return keys;
}

/// Sets the field of `o` whose config key is `key` from a config-file value; false when no
/// field has that key. A value of the wrong type throws sw::Error(kUsage)
/// "<where> = <value>; expected ..." (bounds are checked later by validate()).
template <class Options>
bool set_described_from_config(Options& o, const std::string& key, const nlohmann::json& v,
                               const std::string& where) {
  bool found = false;
  auto set = [&](const OptionSpec& s, auto& field) {
    using T = std::decay_t<decltype(field)>;
    if (s.config_key.empty() || s.config_key != key) return;
    found = true;
    auto fail = [&](const std::string& expected) {
      throw usage_error(where + " = " + v.dump() + "; expected " + expected);
    };
    if constexpr (std::is_same_v<T, bool>) {
      if (!v.is_boolean()) fail("true or false");
      field = v.get<bool>();
    } else if constexpr (std::is_same_v<T, std::string>) {
      if (!v.is_string()) fail("a string");
      field = v.get<std::string>();
    } else if constexpr (std::is_enum_v<T>) {
      if (!v.is_string() || !parse_option(v.get<std::string>(), &field))
        fail(std::string(s.choices));
    } else if constexpr (std::is_integral_v<T>) {
      if (!v.is_number_integer()) fail("an integer");
      const long long x = v.get<long long>();
      if (std::is_unsigned_v<T> && x < 0) fail("an integer >= 0");
      field = static_cast<T>(x);
    } else {
      if (!v.is_number()) fail("a number");
      field = v.get<T>();
    }
  };
  Options::describe(o, set);
  return found;
}

}  // namespace sw::cli
