#pragma once
// Keyword arguments of the Python module generated from an options description
// (retrieval/core/option_spec.h), as cli/option_registry.h generates the command-line flags: every
// described field with a flag is one keyword, named like its first flag without the dashes and
// with '-' -> '_' (--cma-phase-limit -> cma_phase_limit, --satellite-start,!--no-satellite-start
// -> satellite_start), defaulting to the struct's in-class value and held to the same bounds and
// choices. No keyword is listed here by hand.
//
// A value of the wrong type raises TypeError, a value outside the field's bounds or choices
// ValueError (through sw::Error(kUsage)); both messages name the function and the keyword.

#include <pybind11/pybind11.h>

#include <set>
#include <string>
#include <string_view>
#include <type_traits>

#include "retrieval/core/error.h"
#include "retrieval/core/option_spec.h"

namespace sw::python {

/// The keyword of a described field: its first flag without "!" and "--", '-' -> '_'; "" without
/// a flag. A field whose only flag is a negation (negated_flag: "!--no-rainbow") has the keyword
/// no_rainbow, and no_rainbow = True sets the field false.
inline std::string described_keyword(const OptionSpec& s) {
  std::string_view f = s.flag.substr(0, s.flag.find(','));
  while (!f.empty() && (f.front() == '-' || f.front() == '!')) f.remove_prefix(1);
  std::string k(f);
  for (char& c : k)
    if (c == '-') c = '_';
  return k;
}

namespace detail {

template <class T>
const char* expected_python_type() {
  if constexpr (std::is_same_v<T, bool>)
    return "True or False";
  else if constexpr (std::is_same_v<T, std::string> || std::is_enum_v<T>)
    return "a string";
  else if constexpr (std::is_integral_v<T>)
    return std::is_unsigned_v<T> ? "an integer >= 0" : "an integer";
  else
    return "a number";
}

}  // namespace detail

/// Sets the described fields of `o` from the keywords in `kwargs` (`fn` names the function in
/// messages). Numbers, booleans and text convert as pybind11 converts an argument of that C++
/// type; enums take their names. Each value is checked against its field's bounds and choices
/// at once; rules between fields stay with Options::validate(). A keyword that no described field
/// has raises TypeError like any unexpected keyword argument.
template <class Options>
void set_described_from_kwargs(Options& o, const pybind11::kwargs& kwargs, const std::string& fn) {
  namespace py = pybind11;
  std::set<std::string> used;
  auto set = [&](const OptionSpec& s, auto& field) {
    using T = std::decay_t<decltype(field)>;
    const std::string key = described_keyword(s);
    if (key.empty() || !kwargs.contains(key)) return;
    used.insert(key);
    const py::object v = kwargs[py::str(key)];
    const std::string shown = py::repr(v).cast<std::string>();
    auto wrong_type = [&] {
      throw py::type_error(fn + "(): " + key + " = " + shown + ": expected " +
                           detail::expected_python_type<T>());
    };
    if constexpr (std::is_enum_v<T>) {
      if (!py::isinstance<py::str>(v)) wrong_type();
      if (!parse_option(v.cast<std::string>(), &field))
        throw usage_error(fn + ": " + key + " = " + shown + ": expected " + std::string(s.choices));
    } else {
      if (v.is_none()) wrong_type();
      try {
        field = v.cast<T>();
        if constexpr (std::is_same_v<T, bool>)
          if (negated_flag(s)) field = !field;
      } catch (const py::cast_error&) {
        wrong_type();
      }
    }
    // The field's own bounds and choices, reported under the keyword's name.
    OptionSpec named = s;
    named.name = key;
    sw::detail::BoundsCheck check;
    check(named, static_cast<const T&>(field));
    if (!check.error.empty()) throw usage_error(fn + ": " + check.error);
  };
  Options::describe(o, set);
  for (const auto& item : kwargs) {
    const std::string key = py::str(item.first).cast<std::string>();
    if (!used.count(key))
      throw py::type_error(fn + "() got an unexpected keyword argument '" + key + "'");
  }
}

/// Docstring lines "  keyword = default: help (unit)" of the described keywords, in the
/// description's order.
template <class Options>
std::string described_kwargs_doc(const Options& defaults) {
  std::string doc;
  auto line = [&](const OptionSpec& s, const auto& value) {
    const std::string key = described_keyword(s);
    if (key.empty()) return;
    using T = std::decay_t<decltype(value)>;
    std::string shown = option_text(value);
    if constexpr (std::is_same_v<T, bool>) shown = (value != negated_flag(s)) ? "True" : "False";
    if constexpr (std::is_same_v<T, std::string> || std::is_enum_v<T>) shown = "'" + shown + "'";
    doc += "  " + key + " = " + shown + ": " + std::string(s.help);
    if (!s.unit.empty()) doc += " (" + std::string(s.unit) + ")";
    if (!s.choices.empty()) doc += ": " + std::string(s.choices);
    doc += "\n";
  };
  Options::describe(defaults, line);
  return doc;
}

}  // namespace sw::python
