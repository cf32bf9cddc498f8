#pragma once
// Named synthetic scenarios (demo data, tests, config-file bases via `preset: NAME`).
// Names are short, lower-case, with dashes. Each preset's config validates.
//
//   neon-150as          transform-limited 150 as at 95 eV in neon, 5 fs 800 nm at 5e12 W/cm^2
//   neon-chirped-pos    the same spectrum with GDD = +5000 as^2
//   neon-chirped-neg    the same spectrum with GDD = -5000 as^2
//   neon-150as-lab      neon-150as with spectrometer, background, readout, stage and laser noise
//   helium-70as         broadband 70 as at 130 eV in helium, 1e13 W/cm^2 (CMA regime left)
//   neon-satellites     180 as main burst with 15 % / 8 % satellites at -+T/2
//   neon-double-peak    tabulated two-peak spectrum with a cubic spectral phase
//   argon-rabbitt       odd-harmonic train (H13-H31 of 800 nm) with 15 as/eV attochirp, weak
//                       30 fs IR, 81 delays of 0.1 fs
//   neon-xuv-only       field-free spectrum of the 150 as pulse (no IR, one row)

#include <string>
#include <vector>

#include "synthetic/scan_config.h"

namespace sw::synthetic {

struct Preset {
  std::string name;
  std::string description;  ///< one line
  ScanConfig config;
};

/// All presets, in a fixed order.
const std::vector<Preset>& presets();

/// The preset of that name; throws sw::Error (kInput) listing the known names otherwise.
const Preset& find_preset(const std::string& name);

}  // namespace sw::synthetic
