#include "synthetic/presets.h"

#include <cmath>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"

namespace sw::synthetic {

namespace {

// The reference streaking scan (the ScanConfig defaults): 150 as TL at 95 eV, neon.
ScanConfig reference() {
  ScanConfig c;
  c.name = "neon-150as";
  c.xuv.kind = XuvKind::kGaussian;
  c.xuv.gaussian.center_eV = 95.0;
  c.xuv.gaussian.transform_limited_fwhm_as = 150.0;
  c.ir.kind = IrKind::kGaussian;
  c.ir.pulse = GaussianIrPulse{800.0, 5.0, 5e12, 0.0, 0.0, 0.0};
  c.gas = "Ne";
  c.geometry.energy_eV = {40.0, 0.25, 300};
  c.geometry.delay_fs = {-6.0, 0.1, 121};
  c.kind = TraceKind::kStreaking;
  c.noise.peak_counts = 500.0;
  c.noise.poisson = true;
  return c;
}

// The reference scan with another Gaussian pulse (centre, transform-limited FWHM) in another gas
// and IR intensity, recorded on another energy axis.
ScanConfig retuned(const char* name, const char* gas, double center_eV, double tl_fwhm_as,
                   double ir_peak_intensity_Wcm2, AxisSpec energy_eV) {
  ScanConfig c = reference();
  c.name = name;
  c.gas = gas;
  c.xuv.gaussian.center_eV = center_eV;
  c.xuv.gaussian.transform_limited_fwhm_as = tl_fwhm_as;
  c.ir.pulse.peak_intensity_Wcm2 = ir_peak_intensity_Wcm2;
  c.geometry.energy_eV = energy_eV;
  return c;
}

ScanConfig chirped(double gdd_as2, const char* name) {
  ScanConfig c = reference();
  c.name = name;
  c.xuv.gaussian.gdd_as2 = gdd_as2;
  return c;
}

ScanConfig lab() {
  ScanConfig c = reference();
  c.name = "neon-150as-lab";
  c.noise.peak_counts = 800.0;
  c.noise.resolution = ResolutionKind::kConstant;
  c.noise.resolution_fwhm_eV = 0.5;
  c.noise.background_counts = 2.0;
  c.noise.background_exp_counts = 40.0;
  c.noise.background_exp_decay_eV = 15.0;
  c.noise.readout_rms_counts = 1.0;
  c.noise.saturation_counts = 1000.0;
  c.noise.delay_jitter_rms_fs = 0.02;
  c.noise.delay_walk_rms_fs = 0.005;
  c.noise.ir_intensity_rms = 0.03;
  c.noise.cep_jitter_rms_rad = 0.2;
  return c;
}

ScanConfig helium_broadband() {
  // W0 = 105 eV, streaking +-22 eV, spectral FWHM 26 eV: 40..171.6 eV.
  return retuned("helium-70as", "He", 130.0, 70.0, 1e13, {40.0, 0.4, 330});
}

ScanConfig satellites() {
  ScanConfig c = reference();
  c.name = "neon-satellites";
  c.xuv.kind = XuvKind::kSatellites;
  c.xuv.satellites.burst.center_eV = 90.0;
  c.xuv.satellites.burst.transform_limited_fwhm_as = 180.0;
  c.xuv.satellites.driver_wavelength_nm = 800.0;
  c.xuv.satellites.satellite_intensity_ratio_before = 0.15;
  c.xuv.satellites.satellite_intensity_ratio_after = 0.08;
  return c;
}

ScanConfig double_peak() {
  ScanConfig c = reference();
  c.name = "neon-double-peak";
  c.xuv.kind = XuvKind::kTabulated;
  TabulatedSpectrum& t = c.xuv.tabulated;
  t.carrier_eV = 95.0;
  const double gdd = units::as2_to_au(2000.0), tod = units::as3_to_au(30000.0);
  // 0.1 eV rows from 55 to 140 eV: both ends ~1e-12 of the peak, linear-interpolation echoes
  // (synthetic/xuv_source.h) at +-41 fs and ~1e-5 of the field.
  for (int i = 0; i <= 850; ++i) {
    const double e = 55.0 + 0.1 * i;
    auto peak = [&](double c0, double fwhm) {
      return std::exp(-4.0 * std::log(2.0) * (e - c0) * (e - c0) / (fwhm * fwhm));
    };
    const double x = units::eV_to_au(e - t.carrier_eV);
    t.photon_energy_eV.push_back(e);
    t.spectral_intensity.push_back(0.6 * peak(88.0, 6.0) + peak(101.0, 8.0));
    t.spectral_phase_rad.push_back(0.5 * gdd * x * x + tod / 6.0 * x * x * x);
  }
  return c;
}

ScanConfig rabbitt() {
  ScanConfig c;
  c.name = "argon-rabbitt";
  c.gas = "Ar";
  c.kind = TraceKind::kRabbitt;
  c.xuv.kind = XuvKind::kTrain;
  // Burst: 14 eV spectral FWHM about 34.1 eV (TL 130 as), GDD 9900 as^2 = 15.0 as/eV.
  c.xuv.train.burst.center_eV = 34.1;
  c.xuv.train.burst.transform_limited_fwhm_as = 130.0;
  c.xuv.train.burst.gdd_as2 = 9900.0;
  c.xuv.train.driver_wavelength_nm = 800.0;
  c.xuv.train.train_fwhm_fs = 8.0;
  c.xuv.train.max_bursts = 41;
  c.ir.pulse = GaussianIrPulse{800.0, 30.0, 1e11, 0.0, 0.0, 0.0};
  // H13 (4.4 eV) .. H31 (32.3 eV) photoelectrons; 0.05 eV bins resolve the 0.23 eV lines.
  c.geometry.energy_eV = {3.0, 0.05, 641};
  c.geometry.delay_fs = {-4.0, 0.1, 81};
  c.noise.peak_counts = 2000.0;
  return c;
}

ScanConfig xuv_only() {
  ScanConfig c = reference();
  c.name = "neon-xuv-only";
  c.kind = TraceKind::kXuvOnly;
  c.ir.kind = IrKind::kNone;
  c.geometry.delay_fs = {0.0, 1.0, 1};
  c.noise.peak_counts = 2000.0;
  return c;
}

ScanConfig two_lines() {
  // 2p at 98.4 eV and 2s at 71.5 eV kinetic energy, each streaked by about +-16 eV.
  ScanConfig c = retuned("neon-two-lines", "Ne", 120.0, 160.0, 5e12, {40.0, 0.33, 300});
  c.lines = {LineSpec{.gas = "", .name = "2p"},
             LineSpec{.gas = "", .name = "2s", .relative_strength = 0.3, .delay_as = 10.0}};
  return c;
}

ScanConfig argon_tof() {
  // 3p photoelectrons at 54 eV; a 0.1 eV grid (finer than the time bins' energy width) from
  // 25 to 90 eV recorded on 350 flight-time bins of a 0.8 m drift.
  ScanConfig c = retuned("argon-tof", "Ar", 70.0, 200.0, 3e12, {25.0, 0.1, 650});
  c.tof.length_m = 0.8;
  c.tof.bins = 350;
  c.noise.peak_counts = 600.0;
  c.noise.background_counts = 1.0;
  c.noise.background_exp_counts = 40.0;
  c.noise.background_exp_onset_eV = 25.0;
  c.noise.background_exp_decay_eV = 8.0;
  return c;
}

std::vector<Preset> make_presets() {
  return {
      {"neon-150as",
       "transform-limited 150 as pulse at 95 eV in neon, 5 fs 800 nm IR at 5e12 W/cm^2, 121 "
       "delays, 500 peak counts, Poisson noise",
       reference()},
      {"neon-chirped-pos", "as neon-150as with GDD = +5000 as^2 (176 as, positively chirped)",
       chirped(5000.0, "neon-chirped-pos")},
      {"neon-chirped-neg", "as neon-150as with GDD = -5000 as^2 (176 as, negatively chirped)",
       chirped(-5000.0, "neon-chirped-neg")},
      {"neon-150as-lab",
       "neon-150as as a real beamline records it: 0.5 eV resolution, background with a "
       "low-energy tail, readout noise, saturation, stage jitter and drift, IR intensity and "
       "CEP jitter",
       lab()},
      {"helium-70as",
       "broadband 70 as pulse at 130 eV in helium (bandwidth/energy = 0.25: the CMA is poor), "
       "5 fs IR at 1e13 W/cm^2",
       helium_broadband()},
      {"neon-satellites",
       "180 as main burst at 90 eV with satellites of 15 % (-T/2) and 8 % (+T/2) in neon",
       satellites()},
      {"neon-double-peak",
       "tabulated two-peak spectrum (88 and 101 eV) with GDD 2000 as^2 and TOD 30000 as^3 in "
       "neon",
       double_peak()},
      {"argon-rabbitt",
       "RABBITT scan in argon: odd harmonics H13-H31 of 800 nm, attochirp 15 as/eV, 30 fs IR "
       "at 1e11 W/cm^2, 81 delays of 0.1 fs over 3 IR cycles",
       rabbitt()},
      {"neon-xuv-only", "field-free photoelectron spectrum of the 150 as pulse in neon (no IR)",
       xuv_only()},
      {"neon-two-lines",
       "160 as at 120 eV in neon: the 2p line and the 2s line (NIST threshold 48.47 eV, 0.3 of "
       "the 2p cross-section, emitted 10 as later)",
       two_lines()},
      {"argon-tof",
       "200 as at 70 eV in argon recorded on 350 flight-time bins of a 0.8 m drift, 1 count per "
       "time bin and a low-energy tail",
       argon_tof()},
  };
}

}  // namespace

const std::vector<Preset>& presets() {
  static const std::vector<Preset> all = make_presets();
  return all;
}

const Preset& find_preset(const std::string& name) {
  for (const Preset& p : presets())
    if (p.name == name) return p;
  std::string known;
  for (const Preset& p : presets()) known += (known.empty() ? "" : ", ") + p.name;
  throw input_error("unknown preset '" + name + "'; known presets: " + known);
}

}  // namespace sw::synthetic
