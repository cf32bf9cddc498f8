#pragma once
// Reading a synthetic-scan configuration (YAML or JSON) into sw::synthetic::ScanConfig, with
// cv::FileStorage (OpenCV core).
//
// Keys mirror the struct fields as nested maps (synthetic/config_fields.h lists them all):
//
//   preset: neon-150as          # optional base; every other key overrides it
//   seed: 42                    # optional; returned through `seed` (the CLI may override it)
//   gas: Ne
//   xuv: {kind: gaussian, gaussian: {center_eV: 95, transform_limited_fwhm_as: 150}}
//   ir: {kind: gaussian, wavelength_nm: 800, fwhm_fs: 5, peak_intensity_Wcm2: 5e12}
//   energy_eV: {first: 40, step: 0.25, count: 300}
//   delay_fs: {first: -6, step: 0.1, count: 121}     # or an explicit list: delay_fs: [..]
//   noise: {peak_counts: 500, poisson: true}
//   lines: [{name: "2p"}, {name: "2s", relative_strength: 0.3, delay_as: 10}]   # optional;
//                               # quote names that start with a digit (OpenCV's YAML parser)
//   tof: {length_m: 1.0, t0_ns: 0, bins: 400}   # optional: record on a flight-time axis
//
// Format: `.json` files are JSON, `.yaml`/`.yml` YAML, anything else is sniffed ('{' first means
// JSON). YAML files need no `%YAML:1.0` header (it is supplied when missing). Booleans are
// true/false (also yes/no, 1/0). Numbers may be written as integers or reals; integer fields
// (counts) accept reals only when integral.
//
// Every problem is an sw::Error (kInput) naming the file and the key: an unreadable file, a
// document that does not parse, an unknown key (with the closest known key as a hint), a value
// of the wrong type or outside its allowed names, an unknown preset, and any failure of
// ScanConfig::validate().

#include <string>

#include "synthetic/scan_config.h"

namespace sw::cli {

/// Loads and validates the config file at `path`. When the file has a `seed` key, its value is
/// stored in *seed (if seed is not null).
sw::synthetic::ScanConfig load_scan_config(const std::string& path,
                                           unsigned long long* seed = nullptr);

/// The same for a document held in memory; `name` stands for the file in messages and `json`
/// selects the syntax.
sw::synthetic::ScanConfig parse_scan_config(const std::string& text, const std::string& name,
                                            bool json, unsigned long long* seed = nullptr);

}  // namespace sw::cli
