#pragma once
// Target gases: first ionization energies (NIST Atomic Spectra Database, ground-state
// ionization energies; A. Kramida, Yu. Ralchenko, J. Reader and NIST ASD Team, NIST ASD
// version 5.x) and the parameters of the smooth dipole model.

#include <string>
#include <vector>

namespace sw {

struct Gas {
  std::string symbol;            ///< "He", "Ne", ...
  std::string name;              ///< "helium", ...
  double ionization_energy_eV;   ///< first ionization energy Ip (NIST ASD)
  int valence_l;                 ///< orbital angular momentum of the ionized shell (s = 0, p = 1)
};

/// All gases in the table.
const std::vector<Gas>& gas_table();
/// Looks up by symbol or name (case-insensitive); throws sw::Error (kInput) listing the known
/// symbols when the gas is not in the table.
const Gas& find_gas(const std::string& symbol_or_name);

}  // namespace sw
