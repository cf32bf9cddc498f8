#include "retrieval/physics/gas.h"

#include <algorithm>
#include <cctype>

#include "retrieval/core/error.h"

namespace sw {

const std::vector<Gas>& gas_table() {
  // First ionization energies: NIST Atomic Spectra Database, "Ground levels and ionization
  // energies for the neutral atoms" (values as tabulated there, quoted from memory of the
  // table to the digits shown; checked to 1 meV in tests/test_gas.cpp against the NIST SRD 111
  // four-decimal table).
  //
  // Inner-valence and shallow inner-shell lines: threshold = first ionization energy + the
  // level energy of the ion's hole state in the NIST ASD level tables (Ne II 2s2p6 2S1/2
  // 26.910 eV, Ar II 3s3p6 2S1/2 13.480 eV, Kr II 4s4p6 2S1/2 13.513 eV, Xe II 5s5p6 2S1/2
  // 11.268 eV; from memory of those tables, to ~10 meV). d and 2p core levels: gas-phase
  // binding energies of the X-ray Data Booklet (LBNL, 2009), from memory, to ~0.1 eV
  // (Kr 3d5/2 93.8, Xe 4d5/2 67.5, Ar 2p3/2 248.6 eV). The typical strengths are order-of-
  // magnitude guides near 100 eV (from memory of photoionization cross-section compilations).
  static const std::vector<Gas> table = {
      {"H", "hydrogen", 13.598434599702, 0, {{"1s", 13.598434599702, 1.0}}},
      {"He", "helium", 24.587389011, 0, {{"1s", 24.587389011, 1.0}}},
      {"Ne", "neon", 21.564541, 1, {{"2p", 21.564541, 1.0}, {"2s", 48.4749, 0.3}}},
      {"Ar",
       "argon",
       15.7596119,
       1,
       {{"3p", 15.7596119, 1.0}, {"3s", 29.2394, 0.2}, {"2p", 248.6, 1.0}}},
      {"Kr",
       "krypton",
       13.9996055,
       1,
       {{"4p", 13.9996055, 1.0}, {"4s", 27.5126, 0.1}, {"3d", 93.8, 1.0}}},
      {"Xe",
       "xenon",
       12.1298437,
       1,
       {{"5p", 12.1298437, 1.0}, {"5s", 23.3973, 0.1}, {"4d", 67.5, 3.0}}},
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
