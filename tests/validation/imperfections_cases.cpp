// The imperfections validation set, its cases: the named scans (validation_cases) and the
// seeded held-out draws (held_out_cases), each a synthetic::ScanConfig with its seed and target.
// Running, scoring and the tables are in imperfections.cpp.
#include <algorithm>
#include <cmath>
#include <optional>
#include <random>

#include "imperfections.h"
#include "retrieval/core/error.h"
#include "retrieval/physics/gas.h"

namespace sw::validation {

namespace {

using synthetic::ScanConfig;
using synthetic::XuvKind;

// The Gaussian XUV burst: photon energy (eV), transform-limited FWHM (as), GDD (as^2).
struct Xuv {
  double photon_eV = 95, tl_as = 150, gdd_as2 = 0;
};

// The IR pulse: wavelength (nm), FWHM (fs), peak intensity (W/cm^2), CEP (rad).
struct Ir {
  double nm = 800, fs = 5, Wcm2 = 5e12, cep = 0;
};

// A Gaussian-burst streaking scan: gas, XUV, IR, energy axis, delay axis, peak counts. The
// defaults are the base case (neon, 95 eV, 150 as TL, 800 nm 5 fs 5e12, 500 counts); each case
// names only what it changes.
struct Scan {
  std::string gas = "Ne";
  Xuv xuv{};
  Ir ir{};
  synthetic::AxisSpec energy{40, 0.25, 300};
  synthetic::AxisSpec delay{-6, 0.15, 81};
  double counts = 500;
};

ScanConfig make(const std::string& name, const Scan& s) {
  ScanConfig c;
  c.name = name;
  c.gas = s.gas;
  c.xuv.kind = XuvKind::kGaussian;
  c.xuv.gaussian.center_eV = s.xuv.photon_eV;
  c.xuv.gaussian.transform_limited_fwhm_as = s.xuv.tl_as;
  c.xuv.gaussian.gdd_as2 = s.xuv.gdd_as2;
  c.ir.pulse = GaussianIrPulse{s.ir.nm, s.ir.fs, s.ir.Wcm2, s.ir.cep, 0.0, 0.0};
  c.geometry.energy_eV = s.energy;
  c.geometry.delay_fs = s.delay;
  c.noise.peak_counts = s.counts;
  return c;
}

// Turns the Gaussian burst of `c` into a satellites or train structure of the same burst.
void satellites(ScanConfig& c, double before, double after) {
  c.xuv.satellites.burst = c.xuv.gaussian;
  c.xuv.satellites.driver_wavelength_nm = c.ir.pulse.wavelength_nm;
  c.xuv.satellites.satellite_intensity_ratio_before = before;
  c.xuv.satellites.satellite_intensity_ratio_after = after;
  c.xuv.kind = XuvKind::kSatellites;
}

void train(ScanConfig& c, double train_fwhm_fs, int bursts) {
  c.xuv.train.burst = c.xuv.gaussian;
  c.xuv.train.driver_wavelength_nm = c.ir.pulse.wavelength_nm;
  c.xuv.train.train_fwhm_fs = train_fwhm_fs;
  c.xuv.train.max_bursts = bursts;
  c.xuv.kind = XuvKind::kTrain;
}

synthetic::LineSpec line(const std::string& gas, const std::string& name, double strength,
                         double delay_as) {
  synthetic::LineSpec l;
  l.gas = gas;
  l.name = name;
  l.relative_strength = strength;
  l.delay_as = delay_as;
  return l;
}

// How a case is scored (ValidationCase::good and no_field_free).
struct Scoring {
  bool good = false;           // a clean, typical scan (false-alarm count)
  bool no_field_free = false;  // the delay range stays inside the IR pulse
};

void add(std::vector<ValidationCase>& v, const std::string& group, const std::string& description,
         ScanConfig c, unsigned long long seed, Scoring scoring = {}) {
  ValidationCase k;
  k.name = c.name;
  k.imperfection = group;
  k.description = description;
  k.config = std::move(c);
  k.seed = seed;
  k.good = scoring.good;
  k.no_field_free = scoring.no_field_free;
  k.tolerance = tolerance_for(k.config, scoring.no_field_free);
  const std::string err = k.config.validate();
  if (!err.empty()) throw Error(ErrorKind::kInternal, "validation case " + k.name + ": " + err);
  v.push_back(k);
}

}  // namespace

double tolerance_for(const ScanConfig& c, bool no_field_free) {
  if (c.noise.peak_counts < 100) return 0.10;
  const GaussianXuvPulse* b = c.xuv.burst();
  const double centre = b ? b->center_eV : c.xuv.tabulated.carrier_eV;
  if ((centre >= 280 && centre <= 540) || no_field_free || c.noise.saturation_counts > 0)
    return 0.08;
  return 0.05;
}

std::vector<ValidationCase> validation_cases() {
  std::vector<ValidationCase> v;
  // --- good scans: clean, typical (false alarms) ---------------------------------------------
  add(v, "good", "neon 95 eV, 150 as TL, 800 nm 5 fs 5e12, 500 counts", make("good-ne-150as", {}),
      101, {.good = true});
  add(v, "good", "argon 80 eV, 200 as TL with GDD +6000 as^2, 6 fs 3e12, 800 counts",
      make("good-ar-chirped", {.gas = "Ar",
                               .xuv = {.photon_eV = 80, .tl_as = 200, .gdd_as2 = 6000},
                               .ir = {.fs = 6, .Wcm2 = 3e12},
                               .energy = {30, 0.25, 300},
                               .delay = {-7, 0.2, 71},
                               .counts = 800}),
      102, {.good = true});
  add(v, "good", "helium 120 eV, 110 as TL with GDD -3000 as^2, 750 nm 4.5 fs 6e12",
      make("good-he-neg-chirp", {.gas = "He",
                                 .xuv = {.photon_eV = 120, .tl_as = 110, .gdd_as2 = -3000},
                                 .ir = {.nm = 750, .fs = 4.5, .Wcm2 = 6e12, .cep = 0.5},
                                 .energy = {45, 0.33, 300},
                                 .delay = {-5, 0.125, 81},
                                 .counts = 600}),
      103, {.good = true});
  add(v, "good", "neon 130 eV, 160 as TL GDD +2000, 1300 nm 9 fs 2e12",
      make("good-ne-1300nm", {.xuv = {.photon_eV = 130, .tl_as = 160, .gdd_as2 = 2000},
                              .ir = {.nm = 1300, .fs = 9, .Wcm2 = 2e12},
                              .energy = {62, 0.3, 300},
                              .delay = {-10, 0.25, 81},
                              .counts = 700}),
      104, {.good = true});
  add(v, "good", "krypton 100 eV, 250 as TL GDD -8000, 800 nm 7 fs 2e12, 400 counts",
      make("good-kr-long", {.gas = "Kr",
                            .xuv = {.photon_eV = 100, .tl_as = 250, .gdd_as2 = -8000},
                            .ir = {.fs = 7, .Wcm2 = 2e12},
                            .energy = {55, 0.25, 260},
                            .delay = {-8, 0.2, 81},
                            .counts = 400}),
      105, {.good = true});
  {
    ScanConfig c = make("good-ne-1000counts", {.xuv = {.photon_eV = 110, .tl_as = 130},
                                               .ir = {.Wcm2 = 8e12, .cep = -0.8},
                                               .energy = {50, 0.3, 280},
                                               .counts = 1000});
    c.noise.background_counts = 1.0;
    add(v, "good", "neon 110 eV, 130 as TL, 8e12, CEP -0.8, 1000 counts on 1 count background", c,
        106, {.good = true});
  }
  // --- low counts (20-50 peak) -----------------------------------------------------------------
  {
    ScanConfig c =
        make("low25-wide-window", {.xuv = {.photon_eV = 100, .tl_as = 200, .gdd_as2 = 3000},
                                   .energy = {30, 0.3, 300},
                                   .counts = 25});
    c.noise.background_counts = 1.0;
    add(v, "low counts", "25 peak counts, 1 background count in every bin of a 90 eV window", c,
        201);
  }
  {
    ScanConfig c = make("low40-ar-wide", {.gas = "Ar",
                                          .xuv = {.photon_eV = 75, .tl_as = 170},
                                          .ir = {.fs = 6, .Wcm2 = 4e12},
                                          .energy = {20, 0.3, 300},
                                          .delay = {-7, 0.2, 71},
                                          .counts = 40});
    c.noise.background_counts = 2.0;
    add(v, "low counts", "argon 75 eV 170 as, 40 peak counts on 2 counts flat, 20-110 eV", c, 202);
  }
  add(v, "low counts", "helium 140 eV 90 as, 700 nm 4 fs 7e12, 30 peak counts, no background",
      make("low30-he-90as", {.gas = "He",
                             .xuv = {.photon_eV = 140, .tl_as = 90},
                             .ir = {.nm = 700, .fs = 4, .Wcm2 = 7e12, .cep = 0.3},
                             .energy = {60, 0.4, 300},
                             .delay = {-5, 0.125, 81},
                             .counts = 30}),
      203);
  {
    ScanConfig c =
        make("low50-ne-neg-chirp", {.xuv = {.photon_eV = 90, .tl_as = 140, .gdd_as2 = -5000},
                                    .ir = {.Wcm2 = 4e12},
                                    .energy = {35, 0.3, 300},
                                    .counts = 50});
    c.noise.background_counts = 1.5;
    add(v, "low counts", "neon 90 eV 140 as GDD -5000, 50 peak counts on 1.5 flat", c, 204);
  }
  // --- wide window with flat background, non-uniform delays
  // ---------------------------------------
  {
    ScanConfig c =
        make("wide-bg-nonuniform-delays", {.xuv = {.photon_eV = 105, .tl_as = 180, .gdd_as2 = 4000},
                                           .energy = {30, 0.3, 300},
                                           .counts = 300});
    c.noise.background_counts = 2.0;
    c.geometry.delay_values_fs.clear();
    for (int i = 0; i <= 80; ++i) {
      const double x = -6.0 + 0.15 * i;
      c.geometry.delay_values_fs.push_back(x + 0.03 * std::sin(1.7 * i));  // stage steps jitter
    }
    add(v, "background", "explicit non-uniform delay axis, 300 counts, 2 counts flat, 90 eV window",
        c, 301);
  }
  // --- IR-only low-energy electrons --------------------------------------------------------
  {
    ScanConfig c = make("lowE-tail-ne", {.energy = {2, 0.4, 300}});
    c.noise.background_exp_counts = 300;
    c.noise.background_exp_onset_eV = 3;
    c.noise.background_exp_decay_eV = 8;
    add(v, "low-energy electrons",
        "IR-only electrons from 3 eV (300 counts/bin, 8 eV decay), same in every row", c, 401);
  }
  {
    ScanConfig c = make("lowE-tail-ar", {.gas = "Ar",
                                         .xuv = {.photon_eV = 60, .tl_as = 220, .gdd_as2 = 4000},
                                         .ir = {.nm = 900, .fs = 6, .Wcm2 = 3e12},
                                         .energy = {1, 0.25, 300},
                                         .delay = {-7, 0.2, 71},
                                         .counts = 300});
    c.noise.background_exp_counts = 150;
    c.noise.background_exp_onset_eV = 3;
    c.noise.background_exp_decay_eV = 12;
    add(v, "low-energy electrons", "argon 60 eV, 900 nm, tail 150 counts at 3 eV decaying 12 eV", c,
        402);
  }
  // --- second photoelectron line, two-gas mixture
  // --------------------------------------------------
  {
    ScanConfig c =
        make("lines-ne-2s", {.xuv = {.photon_eV = 120, .tl_as = 160}, .energy = {40, 0.33, 300}});
    c.lines = {line("", "2p", 1.0, 0), line("", "2s", 0.3, 10)};
    add(v, "second line", "neon 2s (48.47 eV) beside 2p at 120 eV photons, 2s delayed 10 as", c,
        501);
  }
  {
    ScanConfig c = make("lines-ar-3s", {.gas = "Ar",
                                        .xuv = {.photon_eV = 70, .tl_as = 190, .gdd_as2 = 2000},
                                        .ir = {.fs = 6, .Wcm2 = 3e12},
                                        .energy = {20, 0.25, 300},
                                        .delay = {-7, 0.2, 71}});
    c.lines = {line("", "3p", 1.0, 0), line("", "3s", 0.2, 40)};
    add(v, "second line", "argon 3s (29.24 eV) beside 3p at 70 eV, 3s delayed 40 as", c, 502);
  }
  {
    ScanConfig c = make("mixture-he-kr", {.gas = "He",
                                          .xuv = {.photon_eV = 100, .tl_as = 250},
                                          .ir = {.fs = 7, .Wcm2 = 3e12},
                                          .energy = {50, 0.2, 300},
                                          .delay = {-8, 0.2, 81}});
    c.lines = {line("", "1s", 1.0, 0), line("Kr", "4p", 0.4, 0)};
    add(v, "two-gas mixture", "helium with krypton (4p line 10.6 eV above He 1s, strength 0.4)", c,
        503);
    // The user knows the jet's gases: the sidecar declares both lines.
    v.back().declared_lines = {{"1s", std::nullopt, std::nullopt, ""},
                               {"4p", std::nullopt, std::nullopt, "Kr"}};
  }
  // --- time-of-flight recording ------------------------------------------------------------------
  {
    ScanConfig c = make("tof-ne-1m", {.energy = {40, 0.1, 750}, .counts = 400});
    c.tof.length_m = 1.0;
    c.tof.bins = 400;
    c.noise.background_counts = 2.0;
    add(v, "time of flight", "1 m drift, 400 flight-time bins, 2 counts per time bin", c, 601);
  }
  {
    ScanConfig c = make("tof-ar-offset", {.gas = "Ar",
                                          .xuv = {.photon_eV = 65, .tl_as = 200, .gdd_as2 = -3000},
                                          .ir = {.nm = 900, .fs = 6, .Wcm2 = 3e12},
                                          .energy = {25, 0.1, 650},
                                          .delay = {-7, 0.2, 71},
                                          .counts = 600});
    c.tof.length_m = 0.5;
    c.tof.t0_ns = 3.0;
    c.tof.energy_offset_eV = 5.0;
    c.tof.bins = 300;
    c.noise.background_counts = 1.0;
    add(v, "time of flight", "0.5 m drift, t0 3 ns, 5 eV offset, 300 bins, 1 count per time bin", c,
        602);
  }
  // --- spectrometer resolution dE/E
  // ------------------------------------------------------------------
  {
    ScanConfig c =
        make("resolution-2pct-ar",
             {.gas = "Ar", .xuv = {.photon_eV = 90, .tl_as = 170}, .energy = {35, 0.3, 300}});
    c.noise.resolution = synthetic::ResolutionKind::kRelative;
    c.noise.resolution_relative = 0.02;
    add(v, "resolution", "argon 90 eV, spectrometer dE/E = 2 %", c, 701);
  }
  // --- unrecorded delay drift and jitter
  // ------------------------------------------------------------
  {
    ScanConfig c = make("drift-jitter-ne", {.xuv = {.gdd_as2 = 5000}});
    c.noise.delay_drift_fs_per_row = 0.2 / 80;
    c.noise.delay_jitter_rms_fs = 0.015;
    add(v, "delay drift", "+0.2 fs drift over the scan and 15 as jitter, unrecorded", c, 801);
  }
  {
    ScanConfig c = make("walk-laser-kr", {.gas = "Kr",
                                          .xuv = {.photon_eV = 85, .tl_as = 210},
                                          .ir = {.fs = 6, .Wcm2 = 3e12},
                                          .delay = {-7, 0.2, 71}});
    c.noise.delay_walk_rms_fs = 0.01;
    c.noise.ir_intensity_rms = 0.05;
    c.noise.cep_jitter_rms_rad = 0.3;
    add(v, "delay drift", "random-walk drift 10 as/row, IR intensity 5 % rms, CEP 0.3 rad rms", c,
        802);
  }
  // --- delay ranges without field-free rows
  // ---------------------------------------------------------------
  add(v, "no field-free rows", "350 as TL under an 8 fs IR, delays -2.5..2.5 fs only",
      make("nofieldfree-ne-350as", {.xuv = {.tl_as = 350},
                                    .ir = {.fs = 8, .Wcm2 = 3e12},
                                    .energy = {50, 0.2, 250},
                                    .delay = {-2.5, 0.1, 51}}),
      901, {.no_field_free = true});
  add(v, "no field-free rows", "argon 160 as under a 12 fs IR, delays -3..3 fs",
      make("nofieldfree-ar-12fs", {.gas = "Ar",
                                   .xuv = {.photon_eV = 85, .tl_as = 160, .gdd_as2 = 3000},
                                   .ir = {.fs = 12, .Wcm2 = 1.5e12},
                                   .energy = {45, 0.25, 240},
                                   .delay = {-3, 0.1, 61}}),
      902, {.no_field_free = true});
  // --- trains of 3-7 bursts under a few-cycle field
  // --------------------------------------------------
  {
    ScanConfig c =
        make("train3-ne", {.xuv = {.tl_as = 200}, .ir = {.Wcm2 = 3e12}, .energy = {40, 0.2, 350}});
    train(c, 4.0, 3);
    add(v, "train", "3 bursts (train FWHM 4 fs) under a 5 fs IR", c, 1001);
  }
  {
    ScanConfig c = make("train5-ar", {.gas = "Ar",
                                      .xuv = {.photon_eV = 60, .tl_as = 250},
                                      .ir = {.fs = 6, .Wcm2 = 2e12},
                                      .energy = {20, 0.15, 400},
                                      .delay = {-7, 0.2, 71}});
    train(c, 5.0, 5);
    add(v, "train", "5 bursts (train FWHM 5 fs) in argon under a 6 fs IR", c, 1002);
  }
  {
    ScanConfig c = make("train7-ne", {.xuv = {.photon_eV = 110, .tl_as = 180, .gdd_as2 = 1500},
                                      .ir = {.Wcm2 = 4e12},
                                      .energy = {55, 0.2, 400},
                                      .counts = 700});
    train(c, 8.0, 7);
    add(v, "train", "7 bursts (train FWHM 8 fs), GDD 1500, under a 5 fs IR", c, 1003);
  }
  // --- satellites 2-50 %
  // ------------------------------------------------------------------------------
  {
    ScanConfig c = make("sat2-ne", {.xuv = {.tl_as = 170}});
    satellites(c, 0.02, 0.01);
    add(v, "satellites", "satellites 2 % / 1 % at -+T/2", c, 1101);
  }
  {
    ScanConfig c = make("sat4-ar", {.gas = "Ar",
                                    .xuv = {.photon_eV = 85, .tl_as = 180, .gdd_as2 = 2000},
                                    .ir = {.fs = 6, .Wcm2 = 3e12},
                                    .energy = {35, 0.25, 300},
                                    .delay = {-7, 0.2, 71},
                                    .counts = 600});
    satellites(c, 0.04, 0.02);
    add(v, "satellites", "argon, satellites 4 % / 2 %", c, 1102);
  }
  {
    ScanConfig c = make("sat20-kr", {.gas = "Kr",
                                     .xuv = {.photon_eV = 100, .tl_as = 200},
                                     .ir = {.Wcm2 = 4e12},
                                     .energy = {50, 0.25, 280}});
    satellites(c, 0.20, 0.12);
    add(v, "satellites", "krypton, satellites 20 % / 12 %", c, 1103);
  }
  {
    ScanConfig c = make("sat50-ne", {.xuv = {.photon_eV = 110, .tl_as = 160, .gdd_as2 = -2000},
                                     .energy = {50, 0.3, 280},
                                     .counts = 800});
    satellites(c, 0.36, 0.50);
    add(v, "satellites", "neon, satellites 36 % / 50 %", c, 1104);
  }
  // --- long-wavelength drivers, water-window photon energies
  // -------------------------------------------
  add(v, "long wavelength", "helium 300 eV 100 as under 1800 nm 15 fs 1e12",
      make("lw-1800nm-300eV", {.gas = "He",
                               .xuv = {.photon_eV = 300, .tl_as = 100},
                               .ir = {.nm = 1800, .fs = 15, .Wcm2 = 1e12},
                               .energy = {205, 0.45, 310},
                               .delay = {-15, 0.3, 101}}),
      1201);
  add(v, "long wavelength", "neon 400 eV 80 as GDD 1000 under 1500 nm 12 fs 8e11",
      make("lw-1500nm-400eV", {.xuv = {.photon_eV = 400, .tl_as = 80, .gdd_as2 = 1000},
                               .ir = {.nm = 1500, .fs = 12, .Wcm2 = 8e11},
                               .energy = {300, 0.5, 320},
                               .delay = {-12, 0.25, 97}}),
      1202);
  add(v, "long wavelength", "helium 520 eV 70 as under 2000 nm 16 fs 5e11",
      make("lw-2000nm-520eV", {.gas = "He",
                               .xuv = {.photon_eV = 520, .tl_as = 70},
                               .ir = {.nm = 2000, .fs = 16, .Wcm2 = 5e11},
                               .energy = {415, 0.6, 350},
                               .delay = {-16, 0.32, 101}}),
      1203);
  // --- saturation and hot pixels
  // ------------------------------------------------------------------------
  {
    ScanConfig c = make("hot15-ne", {.xuv = {.photon_eV = 100, .tl_as = 140, .gdd_as2 = 2000},
                                     .ir = {.fs = 6, .Wcm2 = 4e12},
                                     .energy = {45, 0.25, 300},
                                     .delay = {-7, 0.175, 81},
                                     .counts = 600});
    c.noise.hot_pixels = 15;
    add(v, "hot pixels", "neon 100 eV 140 as GDD 2000, 15 hot pixels at 20-200 x the local counts",
        c, 1301);
  }
  {
    ScanConfig c =
        make("saturated-hot-ar", {.gas = "Ar",
                                  .xuv = {.photon_eV = 80, .tl_as = 190, .gdd_as2 = -2500},
                                  .ir = {.fs = 6, .Wcm2 = 3e12},
                                  .energy = {30, 0.25, 300},
                                  .delay = {-7, 0.2, 71},
                                  .counts = 1000});
    c.noise.saturation_counts = 700;
    c.noise.hot_pixels = 10;
    add(v, "saturation", "argon, detector clips at 70 % of the peak, 10 hot pixels", c, 1302);
  }
  // --- several imperfections at once
  // ---------------------------------------------------------------------
  {
    ScanConfig c = make("combined-xe-4d", {.gas = "Xe",
                                           .xuv = {.photon_eV = 90, .tl_as = 200, .gdd_as2 = 2000},
                                           .ir = {.fs = 6, .Wcm2 = 3e12},
                                           .energy = {3, 0.4, 300},
                                           .delay = {-7, 0.2, 71},
                                           .counts = 400});
    c.lines = {line("", "5p", 1.0, 0), line("", "5s", 0.1, 0), line("", "4d", 3.0, 0)};
    c.noise.background_counts = 1.0;
    c.noise.background_exp_counts = 80;
    c.noise.background_exp_onset_eV = 3;
    c.noise.background_exp_decay_eV = 6;
    c.noise.resolution = synthetic::ResolutionKind::kConstant;
    c.noise.resolution_fwhm_eV = 0.4;
    add(v, "combined",
        "xenon 5p, 5s and a strong 4d line, tail, flat background, 0.4 eV resolution", c, 1401);
  }
  {
    ScanConfig c =
        make("low40-tof-ne",
             {.xuv = {.photon_eV = 100, .tl_as = 170}, .energy = {35, 0.1, 800}, .counts = 40});
    c.tof.length_m = 0.8;
    c.tof.bins = 350;
    c.noise.background_counts = 1.0;
    add(v, "low counts", "time of flight at 40 peak counts, 1 count per time bin", c, 1402);
  }
  return v;
}

std::vector<ValidationCase> held_out_cases(int n, unsigned long long seed) {
  if (n < 0 || n > 1000)
    throw usage_error("--held-out = " + std::to_string(n) + "; expected 0..1000");
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  auto uni = [&](double a, double b) { return a + (b - a) * u(rng); };
  auto chance = [&](double p) { return u(rng) < p; };
  const char* gases[] = {"He", "Ne", "Ar", "Kr", "Xe"};
  std::vector<ValidationCase> v;
  for (int k = 0; k < n; ++k) {
    Scan s;
    s.gas = gases[static_cast<int>(uni(0, 5)) % 5];
    const double ip = find_gas(s.gas).ionization_energy_eV;
    s.xuv.photon_eV = uni(std::max(60.0, ip + 35.0), 150.0);
    s.xuv.tl_as = std::exp(uni(std::log(80.0), std::log(350.0)));
    s.xuv.gdd_as2 = uni(-1.0, 1.0) * 0.3 * s.xuv.tl_as * s.xuv.tl_as;  // up to 1.3x the TL length
    s.ir.nm = chance(0.7) ? uni(750, 850) : uni(1200, 2000);
    const double period_fs = s.ir.nm / 299.792458;
    s.ir.fs = uni(1.6, 2.6) * period_fs;
    s.ir.Wcm2 = std::exp(uni(std::log(1e12), std::log(8e12))) * (s.ir.nm > 1000 ? 0.4 : 1.0);
    s.ir.cep = uni(0, 2 * 3.14159265358979);
    s.counts = std::exp(uni(std::log(60.0), std::log(1000.0)));
    // Axes that hold the streaked line: kinetic energy +- 2.5 bandwidths + 1.3 streak amplitudes
    // (classical streaking, shift ~ p0 A0; Itatani et al., PRL 88, 173903 (2002)).
    const double w0 = s.xuv.photon_eV - ip;
    const double bw = 1825.0 / s.xuv.tl_as;  // eV: Gaussian time-bandwidth product 0.441 x h
    const double e0 = std::sqrt(s.ir.Wcm2 / 3.50945e16), om = 45.5634 / s.ir.nm;  // a.u.
    const double streak = std::sqrt(2 * w0 / 27.211386) * (e0 / om) * 27.211386;
    const double lo = std::max(2.0, w0 - 2.5 * bw - 1.3 * streak),
                 hi = w0 + 2.5 * bw + 1.3 * streak;
    const int ne = static_cast<int>(uni(180, 420));
    s.energy = {lo, (hi - lo) / (ne - 1), ne};
    const double half = uni(1.4, 2.0) * s.ir.fs, step = std::min(0.2, period_fs / 14);
    const int nd = static_cast<int>(2 * half / step) + 1;
    s.delay = {-half, step, nd};
    ScanConfig c = make("held-out-" + std::to_string(seed) + "-" + std::to_string(k), s);
    std::string what = s.gas + " " + std::to_string(static_cast<int>(s.xuv.photon_eV)) +
                       " eV, TL " + std::to_string(static_cast<int>(s.xuv.tl_as)) + " as, " +
                       std::to_string(static_cast<int>(s.ir.nm)) + " nm, " +
                       std::to_string(static_cast<int>(s.counts)) + " counts";
    if (chance(0.5)) {
      c.noise.background_counts = uni(0.3, 2.0);
      what += ", flat background";
    }
    if (chance(0.3) && lo < 25) {
      c.noise.background_exp_counts = uni(30, 200);
      c.noise.background_exp_onset_eV = uni(2, 4);
      c.noise.background_exp_decay_eV = uni(4, 10);
      what += ", low-energy tail";
    }
    if (chance(0.3)) {
      c.noise.delay_drift_fs_per_row = uni(-0.2, 0.2) / nd;
      c.noise.delay_jitter_rms_fs = uni(0, 0.015);
      what += ", delay drift and jitter";
    }
    if (chance(0.3)) {
      c.noise.resolution = synthetic::ResolutionKind::kRelative;
      c.noise.resolution_relative = uni(0.005, 0.02);
      what += ", dE/E resolution";
    }
    if (chance(0.2)) {
      c.noise.hot_pixels = static_cast<int>(uni(1, 10));
      what += ", hot pixels";
    }
    if (chance(0.25)) {
      const double r = uni(0.02, 0.2);
      satellites(c, r, r * uni(0.5, 1.0));
      what += ", satellites";
    }
    add(v, "held out", what, c, seed * 1000 + static_cast<unsigned long long>(k));
  }
  return v;
}

synthetic::ScanConfig refined_scan(synthetic::ScanConfig c, int f) {
  if (f <= 1) return c;
  const double r = f;
  c.geometry.energy_eV.step /= r;
  c.geometry.energy_eV.count *= f;
  c.tof.bins *= f;
  c.noise.peak_counts /= r;
  c.noise.background_counts /= r;
  c.noise.background_exp_counts /= r;
  c.noise.saturation_counts /= r;
  c.noise.readout_rms_counts /= std::sqrt(r);
  return c;
}

std::vector<ValidationCase> sweep_cases(const SweepOptions& o) {
  // Every path (run, --list, --write-scans) comes here before a scan is generated: a factor of
  // thousands would ask the generator for millions of bins per row.
  if (o.energy_refine < 1 || o.energy_refine > 16)
    throw usage_error("--energy-refine = " + std::to_string(o.energy_refine) +
                      "; expected 1 to 16");
  if (o.energy_combine < 0 || o.energy_combine > 64)
    throw usage_error("--energy-combine = " + std::to_string(o.energy_combine) +
                      "; expected 0 (auto), 1 (never) or up to 64");
  if (o.full_model_patience < 0 || o.full_model_patience > 1000)
    throw usage_error("--full-model-patience = " + std::to_string(o.full_model_patience) +
                      "; expected 0 (retrieve's default) or 1 to 1000 engine iterations");
  std::vector<ValidationCase> v =
      o.held_out > 0 ? held_out_cases(o.held_out, o.held_out_seed) : validation_cases();
  for (ValidationCase& c : v) c.config = refined_scan(c.config, o.energy_refine);
  return v;
}

}  // namespace sw::validation
