#pragma once
// Target gases: first ionization energies (NIST Atomic Spectra Database, ground-state
// ionization energies; A. Kramida, Yu. Ralchenko, J. Reader and NIST ASD Team, NIST ASD
// version 5.x) and the parameters of the smooth dipole model.

#include <string>
#include <vector>

namespace sw {

/// One photoelectron line of a gas: the ionic state left behind and its ionization (binding)
/// energy = first ionization energy + the ion's level energy (NIST ASD level tables).
struct GasLine {
  std::string name;             ///< hole orbital, e.g. "2p", "2s", "3p", "4d"
  double ionization_energy_eV;  ///< threshold of this line (eV)
  /// Rough partial cross-section relative to the outer-valence line near 100 eV photon energy
  /// (order of magnitude; used only to order detection candidates and as the generator's default
  /// strength; the analyses measure the real strength from the data).
  double typical_relative_strength;
};

struct Gas {
  std::string symbol;           ///< "He", "Ne", ...
  std::string name;             ///< "helium", ...
  double ionization_energy_eV;  ///< first ionization energy Ip (NIST ASD)
  int valence_l;                ///< orbital angular momentum of the ionized shell (s = 0, p = 1)
  /// Photoelectron lines, outer valence first (lines[0].ionization_energy_eV ==
  /// ionization_energy_eV). Spin-orbit partners of a p or d hole closer than ~1.5 eV are kept as
  /// one line at the lower threshold (they are not resolved at attosecond bandwidths).
  std::vector<GasLine> lines;
};

/// All gases in the table.
const std::vector<Gas>& gas_table();
/// Looks up by symbol or name (case-insensitive); throws sw::Error (kInput) listing the known
/// symbols when the gas is not in the table.
const Gas& find_gas(const std::string& symbol_or_name);

}  // namespace sw
