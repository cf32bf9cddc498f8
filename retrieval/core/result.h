#pragma once
// The analysis result: the in-memory mirror of result.json (DESIGN.md "The result contract").
// Every analysis (retrieve, rabbitt, classify) and the synthetic truth record fill this one
// struct; io/result_io writes it. Sections an analysis did not compute stay std::nullopt and
// are absent from the file (never zero). Keys and units are those of the contract.

#include <map>
#include <optional>
#include <string>
#include <variant>
#include <vector>

namespace sw {

/// A value under a dotted key ("preprocess.background_counts") for everything beyond the
/// typed sections: settings, provenance, preprocessing steps, generator parameters.
/// io expands dotted keys into nested JSON objects; a vector<double> becomes an array.
struct Param {
  std::string key;
  std::variant<double, long long, bool, std::string, std::vector<double>> value;
};

/// The Param under `key`, or nullptr.
const Param* find_param(const std::vector<Param>& params, const std::string& key);
/// String value under `key`; "" when absent or not a string.
std::string param_string(const std::vector<Param>& params, const std::string& key);
/// Numeric value (double or integer) under `key`; nullopt when absent or not a number.
std::optional<double> param_number(const std::vector<Param>& params, const std::string& key);
/// The value as text for tables and terminals: numbers with `precision` significant digits
/// ("" for a non-finite number), booleans as true/false, arrays as "[a<sep>b]".
std::string param_text(const Param& p, int precision = 6, const char* separator = ", ");

struct XuvSection {
  std::optional<double> fwhm_as, fwhm_as_sigma;
  std::optional<double> transform_limited_fwhm_as;
  std::optional<double> rms_duration_as;
  std::optional<double> gdd_as2, gdd_as2_sigma;
  std::optional<double> tod_as3, tod_as3_sigma;
  std::optional<double> center_photon_energy_eV;
  std::optional<double> bandwidth_fwhm_eV;
};

struct IrSection {
  std::optional<double> peak_vector_potential_au, peak_vector_potential_au_sigma;
  std::optional<double> peak_intensity_Wcm2, peak_intensity_Wcm2_sigma;
  std::optional<double> wavelength_nm;
  std::optional<double> fwhm_fs;
};

/// verdict.class values of DESIGN.md.
enum class PulseClass { kIsolated, kIsolatedWithSatellites, kTrain, kUndetermined };
const char* to_string(PulseClass c);
bool parse_pulse_class(const std::string& s, PulseClass* out);

struct VerdictSection {
  PulseClass pulse_class = PulseClass::kUndetermined;
  std::optional<double> satellite_intensity_ratio, satellite_intensity_ratio_sigma;
  std::optional<double> main_burst_energy_fraction;
  std::string reason;           ///< why this class (always filled)
  std::vector<Param> evidence;  ///< each piece of evidence with its value
};

struct FitSection {
  std::optional<double> trace_error;  ///< G of Fittinghoff et al. (JOSA B 12, 1955 (1995))
  std::optional<long long> iterations;
  std::optional<bool> converged;
  std::optional<double> seconds;
  std::string noise_model;  ///< "poisson", "gaussian", ...
  std::string termination;  ///< human message of the termination
};

struct Sideband {
  int order = 0;         ///< sideband order q (even for odd-harmonic trains)
  double energy_eV = 0;  ///< photoelectron energy of the sideband
  double phase_rad = 0, phase_rad_sigma = 0;
  double group_delay_as = 0, group_delay_as_sigma = 0;
  std::optional<double> modulation_depth;
  std::optional<double> atomic_delay_as;  ///< correction applied (as), if any
};

struct RabbittSection {
  std::optional<double> attochirp_as_per_eV, attochirp_as_per_eV_sigma;
  std::optional<double> train_burst_fwhm_as, train_burst_fwhm_as_sigma;
  std::optional<double> transform_limited_burst_fwhm_as;
  std::vector<Sideband> sidebands;
};

/// One quality check (DESIGN.md "quality"): a measured value against its limit. `rule` says how
/// they compare ("<=" : pass when value <= limit, ">=" : pass when value >= limit). A check that
/// does not guard a headline number (`guards_headline` false) is reported but does not decide
/// `trusted`.
struct QualityCheck {
  std::string name;         ///< snake_case, stable (e.g. "fwhm_vs_transform_limit")
  double value = 0;         ///< finite; what was measured
  double limit = 0;         ///< the threshold (an option with a documented default)
  std::string rule = "<=";  ///< "<=" or ">="
  bool pass = true;
  bool guards_headline = true;
  std::string detail;  ///< one human sentence: what it measures, in which units
};

/// quality section: trusted is false when any headline-guarding check fails; the numbers are
/// still written. `failed` names every failing check (guarding or not).
struct QualitySection {
  bool trusted = true;
  std::vector<std::string> failed;
  std::vector<QualityCheck> checks;
  /// Adds a check, evaluating pass from value, limit and rule (a non-finite value fails and is
  /// recorded as its limit's opposite extreme is not representable: value is stored as 0 with
  /// the detail saying so).
  QualityCheck& add(const std::string& name, double value, double limit, const std::string& rule,
                    const std::string& detail, bool guards_headline = true);
  /// Recomputes trusted and failed from the checks.
  void finalize();
};

/// One sideband order of a line's RABBITT relative delay (retrieval/analysis/rabbitt_lines.h):
/// the line's sideband phase minus the reference's at the same order.
struct LineSideband {
  int order = 0;
  double energy_eV = 0;  ///< the line's sideband kinetic energy q hbar omega - Ip
  double relative_phase_rad = 0, relative_phase_rad_sigma = 0;
  double relative_delay_as = 0, relative_delay_as_sigma = 0;
  /// Minus the continuum-continuum delay difference of the two lines' sidebands (absent when a
  /// sideband lies below hbar omega, where tau_cc is not defined).
  std::optional<double> relative_delay_as_corrected;
  std::optional<double> cc_correction_as;  ///< tau_cc(line) - tau_cc(reference), subtracted
};

/// One photoelectron line of the scan (DESIGN.md "lines"). `relative_*` are relative to the
/// line with reference = true; a line found but not analysed carries no delay.
struct LineEntry {
  std::string name;                 ///< "2p", "2s", "3p", ... (or the sidecar's name)
  double ionization_energy_eV = 0;  ///< binding energy used (NIST ASD or sidecar)
  std::string gas;                  ///< gas symbol the line belongs to
  std::optional<double> relative_strength, relative_strength_sigma;
  std::optional<double> relative_delay_as, relative_delay_as_sigma;
  std::optional<double> kinetic_energy_eV;  ///< expected/found line centre (photon - Ip)
  bool reference = false;  ///< the line the pulse was retrieved from / delays refer to
  bool analysed = false;   ///< true for the line(s) the analysis used
  std::string source;      ///< "sidecar", "gas table", "detected"
  /// Line-delay analysis (retrieval/analysis/line_delays.h), added beside the contract's keys:
  std::string delay_method;                 ///< "centre of energy" when a delay was measured
  std::optional<double> clc_delay_as;       ///< this line's Coulomb-laser coupling delay
  std::optional<double> clc_correction_as;  ///< t_CLC(line) - t_CLC(reference), subtracted
  std::optional<double> relative_delay_as_corrected;  ///< relative_delay_as - clc_correction_as
  /// The centre-of-energy values kept beside a joint fit's (retrieval/analysis/multi_line_fit.h) as
  /// the cross-check; absent when the delay itself is the centre-of-energy one.
  std::optional<double> relative_delay_as_centre_of_energy,
      relative_delay_as_centre_of_energy_sigma;
  std::optional<double> relative_strength_centre_of_energy,
      relative_strength_centre_of_energy_sigma;
  /// RABBITT (retrieval/analysis/rabbitt_lines.h), added beside the contract's keys: per sideband
  /// order the relative phase and delay; the weighted mean's sigma of the corrected delays and
  /// the chi^2 / dof of the raw ones about their mean; orders left out because the two lines'
  /// peaks overlap; the smallest distance of a sideband to another line's peak.
  std::vector<LineSideband> sidebands;
  std::optional<double> relative_delay_as_corrected_sigma;
  std::optional<double> relative_delay_reduced_chi2;
  std::vector<int> overlapped_orders;
  std::optional<double> nearest_other_peak_eV;
};

struct AnalysisResult {
  std::string input;     ///< sidecar path as given
  std::string analysis;  ///< "retrieve", "rabbitt", "classify", "simulate"
  std::string engine;    ///< engine name ("" when none)
  std::optional<XuvSection> xuv;
  std::optional<IrSection> ir;
  std::optional<VerdictSection> verdict;
  std::optional<FitSection> fit;
  std::optional<RabbittSection> rabbitt;
  std::optional<QualitySection> quality;  ///< always set by retrieve, rabbitt and classify
  std::vector<LineEntry> lines;           ///< written as "lines" when not empty
  std::vector<Param> extra;               ///< further keys beside the contract's
  /// Further values given as JSON text under a dotted key (e.g. "sidecar.operator" ->
  /// "\"A. N. Other\""), written verbatim at that position; used to echo unknown sidecar keys
  /// (TraceMeta::extra_json) into result.json.
  std::map<std::string, std::string> extra_json;
  std::vector<std::string> warnings;  ///< physicist-facing warnings, written as "warnings"
};

}  // namespace sw
