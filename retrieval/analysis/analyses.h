#pragma once
// One shape for every analysis of a scan:
//
//   XOutput analyse_X(const Trace& scan, const XAnalysisOptions& options,
//                     const AnalysisProgress& progress)
//
// takes a scan already read (io/trace_reader.h, or built from arrays), runs the whole pipeline
// and returns the finished AnalysisResult (every section, warnings, settings echo and the
// sidecar's unknown keys under sidecar.*) together with what the writers of io/ need for the
// output folder (io/retrieval_outputs.h, io/rabbitt_outputs.h, io/classify_outputs.h). No file
// is read or written here; provenance (program version, input hash, time) is the caller's and
// is appended to result.extra after the analysis (cli/analysis.cpp, the Python module).
//
//   analyse_retrieve  streaking retrieval (retrieval/analysis/retrieve.h) plus the reader's
//   warnings; analyse_rabbitt   sideband fits, attochirp, average burst of the train, verdict,
//   lines; analyse_classify  isolated / satellites / train verdict from the spectral and delay
//                     evidence, optionally from a streaking retrieval run first.
//
// Errors are sw::Error: kUsage for invalid options, kInput for a scan the analysis cannot use,
// kNumeric when no estimate at all can be computed. A progress callback may throw (e.g. to
// cancel): the exception leaves the analysis unchanged.

#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "retrieval/analysis/classifier.h"
#include "retrieval/analysis/quality.h"
#include "retrieval/analysis/rabbitt.h"
#include "retrieval/analysis/retrieve.h"
#include "retrieval/analysis/train_burst.h"
#include "retrieval/core/option_spec.h"
#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"
#include "retrieval/preprocess/preprocess.h"

namespace sw {

/// Progress of an analysis: stage ("ptychographic", "rabbitt", "bootstrap 3/8", ...) and a
/// one-line message for a person. May throw to cancel the analysis.
using AnalysisProgress = std::function<void(const std::string& stage, const std::string& message)>;

/// Appends the warnings about how the scan was read (TraceMeta::read_warnings, filled by the
/// reader: 8-bit images, counts outside a time-of-flight calibration window, ...) to an
/// analysis result's warnings; every analysis calls it.
void add_input_warnings(const Trace& trace, std::vector<std::string>& warnings);

/// Appends the sidecar's keys the reader does not interpret (meta.extra_json) to the result
/// as extra_json "sidecar.KEY"; every analysis calls it.
void add_sidecar_extras(const Trace& trace, AnalysisResult& result);

// ---------------------------------------------------------------------------------------------
// retrieve

/// The streaking retrieval: retrieve() (retrieval/analysis/retrieve.h), then the reader's warnings
/// and the sidecar's extra keys added to out.result. Progress messages: "iteration N, G = x, t s".
RetrieveOutput analyse_retrieve(const Trace& scan, const RetrieveOptions& options,
                                const AnalysisProgress& progress = {});

/// The verdict thresholds as rabbitt and classify describe them (retrieval/analysis/classifier.h).
inline constexpr OptionSpec kIsolatedMaxFlagSpec = command_line_only(kIsolatedMaxSpec);
inline constexpr OptionSpec kSatellitesMaxFlagSpec = command_line_only(kSatellitesMaxSpec);

// ---------------------------------------------------------------------------------------------
// rabbitt

/// The rabbitt analysis' default average-burst options: the cross section is the
/// energy-density Jacobian p alone (sfa_dipole with a constant dipole), the same division by p
/// as retrieve's preprocessing.
inline TrainBurstOptions rabbitt_train_burst_defaults() {
  TrainBurstOptions o;
  o.cross_section = CrossSectionModel::kSfaDipole;
  o.dipole = DipoleKind::kConstant;
  return o;
}

/// Options of the RABBITT analysis. The fields a user sets (the flags of `rabbitt`, the Python
/// keywords of rabbitt(), the batch config key atomic_correction) are described once, in
/// describe() below (retrieval/core/option_spec.h); the settings.* echo of the result and the
/// batch option strings are walks of that description too.
struct RabbittAnalysisOptions {
  // Not an aggregate: RabbittAnalysisOptions{} value-initialises (zeroes, then the defaults
  // below), which keeps GCC 12's -Wmaybe-uninitialized quiet about the nested text fields.
  RabbittAnalysisOptions() = default;
  /// Sideband analysis (retrieval/analysis/rabbitt.h); atomic.mode is set from atomic_correction.
  RabbittOptions rabbitt;
  /// "auto" (subtract the atomic delays of the gas) or "none".
  std::string atomic_correction = "auto";
  /// Average-burst options (default: rabbitt_train_burst_defaults()).
  TrainBurstOptions train_burst = rabbitt_train_burst_defaults();
  /// Verdict thresholds (retrieval/analysis/classifier.h), used as given. The CLI and batch set
  /// the two satellite-ratio thresholds from RetrieveOptions (cli/analysis.h).
  ClassifierOptions classifier;
  /// Only the energy window (energy_window_lo_eV/_hi_eV) and the line detection of
  /// scan_lines() are used.
  PreprocessOptions preprocess;
  /// Limits of the quality checks (retrieval/analysis/quality.h).
  QualityOptions quality;
  /// Name of the field-free (XUV-only) scan passed to analyse_rabbitt, for the settings echo
  /// (settings.xuv_only, after the described settings) and warnings; "" = none.
  std::string xuv_only_name;

  /// The one description of the user-facing fields. Order = order of settings.* in result.json.
  /// Only atomic_correction can be set for a whole batch (config key; batch option strings).
  template <class Self, class V>
  static void describe(Self& self, V& v) {
    v(OptionSpec{.name = "atomic_correction",
                 .help = "auto: subtract the Wigner (Coulomb phase) and continuum-continuum delays "
                         "of the gas; none: report the measured delays",
                 .choices = "auto|none",
                 .flag = "--atomic-correction",
                 .config_key = "atomic_correction"},
      self.atomic_correction);
    v(OptionSpec{.name = "window_half_width_fraction",
                 .unit = "hbar omega",
                 .help = "half width of the sideband windows",
                 .min = 0,
                 .min_open = true,
                 .max = 0.5,
                 .flag = "--window",
                 .batch = false},
      self.rabbitt.window_half_width_fraction);
    v(OptionSpec{.name = "apply_delay_calibration",
                 .help = "use the fitted 2 omega frequency for the sideband fits (rescales the "
                         "delay axis)",
                 .flag = "--apply-delay-calibration",
                 .batch = false},
      self.rabbitt.apply_delay_calibration);
    v(OptionSpec{.name = "cross_section",
                 .help = "harmonic intensity = peak area / cross section (sfa_dipole: p |d(p)|^2)",
                 .choices = "flat|sfa_dipole",
                 .flag = "--cross-section",
                 .batch = false},
      self.train_burst.cross_section);
    v(OptionSpec{.name = "dipole",
                 .help = "dipole of sfa_dipole",
                 .choices = "constant|hydrogenic",
                 .flag = "--dipole",
                 .batch = false},
      self.train_burst.dipole);
    v(OptionSpec{.name = "min_modulation_significance",
                 .help = "report a sideband when its modulation B exceeds this many sigma",
                 .min = 0,
                 .min_open = true,
                 .flag = "--min-sideband-significance",
                 .echo = false,
                 .batch = false},
      self.rabbitt.min_modulation_significance);
    v(OptionSpec{.name = "rainbow",
                 .help = "skip the per-energy-bin (rainbow) fits",
                 .flag = "!--no-rainbow",
                 .echo = false,
                 .batch = false},
      self.rabbitt.rainbow);
    v(OptionSpec{.name = "analyse_lines",
                 .help = "do not look for further photoelectron lines (no relative line delays)",
                 .flag = "!--no-lines",
                 .echo = false,
                 .batch = false},
      self.rabbitt.analyse_lines);
    v(kIsolatedMaxFlagSpec, self.classifier.satellite_ratio.isolated_max);
    v(kSatellitesMaxFlagSpec, self.classifier.satellite_ratio.satellites_max);
  }

  /// Empty when valid; otherwise names the field, its value and the rule.
  std::string validate() const;
};

struct RabbittOutput {
  AnalysisResult result;            ///< rabbitt, verdict, quality, lines, settings.*
  Trace trace;                      ///< the scan as analysed (energy window applied)
  RabbittAnalysis analysis;         ///< sideband fits (for the CSVs and figures)
  std::optional<TrainBurst> burst;  ///< empty when the average burst could not be built
};

/// RABBITT analysis of `scan`. `xuv_only` (may be nullptr): a field-free scan whose
/// delay-integrated spectrum gives the harmonic amplitudes of the average burst (its
/// meta.read_warnings are reported as "xuv-only spectrum: ..."). Throws sw::Error(kUsage)
/// for invalid options, before any work.
RabbittOutput analyse_rabbitt(const Trace& scan, const Trace* xuv_only,
                              const RabbittAnalysisOptions& options,
                              const AnalysisProgress& progress = {});

// ---------------------------------------------------------------------------------------------
// classify

/// Options of the classification. The fields a user sets (the flags of `classify`, the Python
/// keywords of classify()) are described once, in describe() below; the settings.* echo of the
/// result is a walk of that description (after settings.ir_wavelength_nm, the wavelength used).
struct ClassifyAnalysisOptions {
  /// Verdict thresholds. The two satellite-ratio thresholds are taken from
  /// retrieve_options.satellite_ratio (one place for every analysis and for batch);
  /// classifier.satellite_ratio is ignored.
  ClassifierOptions classifier;
  /// Run the streaking retrieval first (bootstrap 0) and use its reconstruction as evidence.
  bool retrieve = false;
  /// Options of that retrieval; its preprocess.energy_window_* also crops the evidence.
  RetrieveOptions retrieve_options;

  /// The one description of the user-facing fields. Order = order of settings.* in result.json.
  template <class Self, class V>
  static void describe(Self& self, V& v) {
    v(kIsolatedMaxFlagSpec, self.retrieve_options.satellite_ratio.isolated_max);
    v(kSatellitesMaxFlagSpec, self.retrieve_options.satellite_ratio.satellites_max);
    v(OptionSpec{.name = "train_min_comparable_bursts",
                 .help = "reconstructed bursts >= 50 % of the main one that make a train",
                 .min = 2,
                 .flag = "--comparable-bursts"},
      self.classifier.train_min_comparable_bursts);
    v(OptionSpec{.name = "comb_min_period_contrast",
                 .help = "fringe contrast at period T above which the spectrum is a harmonic comb",
                 .min = 1.0 / 3.0,
                 .min_open = true,
                 .max = 1,
                 .max_open = true,
                 .flag = "--comb-contrast"},
      self.classifier.comb_min_period_contrast);
    v(OptionSpec{.name = "delay_train_min_share",
                 .help = "2 omega share above which the delay oscillation is train-like",
                 .min = 0,
                 .min_open = true,
                 .max = 1,
                 .max_open = true,
                 .flag = "--delay-train-share"},
      self.classifier.delay_train_min_share);
    v(OptionSpec{.name = "delay_streaking_max_share",
                 .help = "2 omega share below which the delay oscillation is streaking-like",
                 .min = 0,
                 .min_open = true,
                 .max = 1,
                 .max_open = true,
                 .flag = "--delay-streaking-share"},
      self.classifier.delay_streaking_max_share);
    v(OptionSpec{.name = "min_total_counts",
                 .help = "fewer counts in the whole scan give 'undetermined'",
                 .min = 0,
                 .min_open = true,
                 .flag = "--min-counts"},
      self.classifier.min_total_counts);
    v(OptionSpec{.name = "retrieve",
                 .help = "run the streaking retrieval first and use the reconstructed bursts",
                 .flag = "--retrieve"},
      self.retrieve);
    v(OptionSpec{.name = "engine",
                 .help = "engine of --retrieve (see `retrieve --help`)",
                 .flag = "--engine",
                 .echo = false},
      self.retrieve_options.engine);
    v(OptionSpec{.name = "iterations",
                 .help = "iterations of --retrieve; 0 = engine default",
                 .min = 0,
                 .flag = "--iterations",
                 .echo = false},
      self.retrieve_options.iterations);
  }

  /// Empty when valid; otherwise names the field, its value and the rule.
  std::string validate() const;
};

struct ClassifyOutput {
  AnalysisResult result;                    ///< verdict, quality, lines, settings.*
  Trace trace;                              ///< the scan as analysed (energy window applied)
  std::optional<RetrieveOutput> retrieval;  ///< with options.retrieve on a delay scan
  double ir_wavelength_nm = 0.0;            ///< the wavelength the classifier used
};

/// The verdict thresholds of a classify analysis (satellite ratios from retrieve_options).
ClassifierOptions effective_classifier_options(const ClassifyAnalysisOptions& options);

/// The IR wavelength (nm) the classifier uses for a scan: co->ir_wavelength_nm when > 0, the
/// sidecar's, or for an xuv_only scan without one 800 nm (then stored in *co and a warning
/// appended when `warnings` is given); 0 when unknown (classify() reports the missing field).
double classifier_wavelength(const Trace& scan, ClassifierOptions* co,
                             std::vector<std::string>* warnings);

/// Classification of `scan` with every piece of evidence (retrieval/analysis/classifier.h).
ClassifyOutput analyse_classify(const Trace& scan, const ClassifyAnalysisOptions& options,
                                const AnalysisProgress& progress = {});

}  // namespace sw
