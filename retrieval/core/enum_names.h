#pragma once
// Enum <-> name through one table per enum, so a name is written once for printing and parsing
// (CLI flags, config files, result files). Each enum keeps its own to_string / parse_x pair; their
// bodies are one call here:
//
//   constexpr EnumNames<DipoleKind, 2> kDipoleNames{{{DipoleKind::kConstant, "constant"},
//                                                    {DipoleKind::kHydrogenic, "hydrogenic"}}};
//   const char* to_string(DipoleKind k) { return kDipoleNames.name(k); }
//   bool parse_dipole_kind(const std::string& s, DipoleKind* out) { return kDipoleNames.parse(s,
//   out); }

#include <array>
#include <cstddef>
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
