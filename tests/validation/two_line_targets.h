#pragma once
// The two-line scans of the line-delay validation (line_delay_sweep.cpp) and of its
// representative rows under ctest (tests/test_line_delays.cpp).

#include <string>

#include "synthetic/presets.h"
#include "synthetic/scan_config.h"

namespace sw::validation {

/// Neon ("Ne"): 2p and 2s (NIST thresholds via the gas table) at 120 eV photons, 160 as (the
/// neon-two-lines preset). Argon ("Ar"): 3p and 3s at 70 eV, 190 as, 3e12 W/cm^2, 20-90 eV.
/// 81 delays of 0.15 fs from -6 fs.
inline synthetic::ScanConfig two_line_target(const std::string& which) {
  synthetic::ScanConfig c = synthetic::find_preset("neon-two-lines").config;
  c.geometry.delay_fs = {-6.0, 0.15, 81};
  if (which == "Ar") {
    c.gas = "Ar";
    c.xuv.gaussian.center_eV = 70.0;
    c.xuv.gaussian.transform_limited_fwhm_as = 190.0;
    c.ir.pulse.peak_intensity_Wcm2 = 3e12;
    c.geometry.energy_eV = {20.0, 0.25, 280};
    c.lines[0].name = "3p";
    c.lines[1].name = "3s";
  }
  return c;
}

}  // namespace sw::validation
