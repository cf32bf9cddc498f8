#include "retrieval/gas.h"

#include <algorithm>
#include <cctype>

#include "retrieval/error.h"

namespace sw {

const std::vector<Gas>& gas_table() {
  // First ionization energies: NIST Atomic Spectra Database, "Ground levels and ionization
  // energies for the neutral atoms" (values as tabulated there, quoted from memory of the
  // table to the digits shown; checked to 1 meV in tests/test_gas.cpp against the NIST SRD 111
  // four-decimal table).
  static const std::vector<Gas> table = {
      {"H", "hydrogen", 13.598434599702, 0},
      {"He", "helium", 24.587389011, 0},
      {"Ne", "neon", 21.564541, 1},
      {"Ar", "argon", 15.7596119, 1},
      {"Kr", "krypton", 13.9996055, 1},
      {"Xe", "xenon", 12.1298437, 1},
  };
  return table;
}

const Gas& find_gas(const std::string& key) {
  auto lower = [](std::string s) {
    std::transform(s.begin(), s.end(), s.begin(), [](unsigned char c) { return std::tolower(c); });
    return s;
  };
  const std::string k = lower(key);
  for (const Gas& g : gas_table())
    if (lower(g.symbol) == k || lower(g.name) == k) return g;
  std::string known;
  for (const Gas& g : gas_table()) known += (known.empty() ? "" : ", ") + g.symbol;
  throw input_error("gas '" + key + "' is not in the gas table; expected one of " + known);
}

}  // namespace sw
