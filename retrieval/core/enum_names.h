#pragma once
// Enum <-> name through one table per enum, so a name is written once for printing and parsing
// (CLI flags, config files, result files). Each enum keeps its own to_string / parse_x pair
// (declared in its header); SW_ENUM_NAME_FUNCTIONS defines both from the table:
//
//   constexpr EnumNames<DipoleKind, 2> kDipoleNames{{{DipoleKind::kConstant, "constant"},
//                                                    {DipoleKind::kHydrogenic, "hydrogenic"}}};
//   SW_ENUM_NAME_FUNCTIONS(DipoleKind, parse_dipole_kind, kDipoleNames)

#include <array>
#include <cstddef>
#include <string>
#include <string_view>
#include <utility>

namespace sw {

template <class E, std::size_t N>
struct EnumNames {
  std::array<std::pair<E, const char*>, N> entries;

  /// The name of v; "" for a value missing from the table (a programming error).
  constexpr const char* name(E v) const {
    for (const auto& [e, n] : entries)
      if (e == v) return n;
    return "";
  }
  /// Sets *out to the value named s and returns true; false (and *out untouched) otherwise.
  constexpr bool parse(std::string_view s, E* out) const {
    for (const auto& [e, n] : entries)
      if (s == n) {
        *out = e;
        return true;
      }
    return false;
  }
};

}  // namespace sw

/// Defines `const char* to_string(Enum)` (EnumNames::name) and `bool PARSE(const std::string&,
/// Enum*)` (EnumNames::parse) from the EnumNames table `NAMES`, in the enclosing namespace.
#define SW_ENUM_NAME_FUNCTIONS(Enum, PARSE, NAMES)        \
  const char* to_string(Enum v) { return NAMES.name(v); } \
  bool PARSE(const std::string& s, Enum* out) { return NAMES.parse(s, out); }
