#pragma once
// result.json (DESIGN.md "The result contract") <-> sw::AnalysisResult.
//
// Writing: "streakwright_result": 1, then input, analysis, engine, and the sections xuv, ir,
// verdict (class, satellite_intensity_ratio[_sigma], main_burst_energy_fraction, reason,
// evidence{...}), fit (trace_error, iterations, converged, seconds, noise_model, termination),
// rabbitt (attochirp_as_per_eV[_sigma], train_burst_fwhm_as[_sigma],
// transform_limited_burst_fwhm_as, sidebands[{order, energy_eV, phase_rad, phase_rad_sigma,
// group_delay_as, group_delay_as_sigma, modulation_depth, atomic_delay_as}]), quality
// (trusted, failed[], checks[{name, value, limit, pass, rule, guards_headline, detail}]), lines
// ([{name, ionization_energy_eV, gas, relative_strength[_sigma], relative_delay_as[_sigma],
// kinetic_energy_eV, reference, analysed, source}]), then every
// AnalysisResult::extra Param with its dotted key expanded into nested objects
// ("generator.xuv.center_eV" -> {"generator": {"xuv": {"center_eV": ...}}}), then
// AnalysisResult::extra_json (raw JSON text placed at its dotted key), then "warnings".
// Sections that are std::nullopt, optional values that are absent and empty strings are
// omitted, never written as zero. JSON (RFC 8259) has no NaN or infinity: a non-finite value
// throws sw::Error(kNumeric) naming its dotted key. A dotted key that collides with an existing
// value throws sw::Error(kInternal) naming it.
//
// Reading parses the typed sections back; every other value becomes an extra Param under its
// dotted key (integers -> long long, other numbers -> double, bool, string, arrays of numbers
// -> vector<double>); values of other shapes (null, mixed arrays, arrays of objects) go to
// extra_json as JSON text.

#include <string>

#include "retrieval/core/result.h"

namespace sw {

/// result.json text (2-space indented, trailing newline).
std::string result_to_json(const AnalysisResult& r);

/// Writes result_to_json(r) to `path` atomically (io/atomic_file.h).
void write_result_json(const std::string& path, const AnalysisResult& r);

/// Parses result.json text; `where` names the file in messages. Throws sw::Error(kInput) on
/// invalid JSON, a missing or unsupported "streakwright_result", or a typed key of wrong type.
AnalysisResult result_from_json(const std::string& text, const std::string& where);

/// Reads and parses a result.json file.
AnalysisResult read_result_json(const std::string& path);

}  // namespace sw
