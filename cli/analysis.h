#pragma once
// One scan, one analysis, one output folder: the unit of work shared by the single-scan
// subcommands (retrieve, rabbitt, classify) and by batch. run_scan() never throws: a failure
// comes back as ok = false with the message a physicist needs (file, field, expectation).

#include <optional>
#include <string>
#include <vector>

#include "io/plot.h"
#include "io/trace_reader.h"
#include "retrieval/analysis/analyses.h"
#include "retrieval/analysis/classifier.h"
#include "retrieval/analysis/rabbitt.h"
#include "retrieval/analysis/retrieve.h"
#include "retrieval/analysis/train_burst.h"
#include "retrieval/core/error.h"
#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"

namespace sw::cli {

/// Which analysis to run; kAuto picks from the sidecar's kind (rabbitt -> rabbitt, streaking ->
/// retrieve, xuv_only -> classify) or, without a kind, from the classifier's verdict
/// (train -> rabbitt, otherwise retrieve).
enum class AnalysisKind { kAuto, kRetrieve, kRabbitt, kClassify };
const char* to_string(AnalysisKind k);
bool parse_analysis_kind(const std::string& s, AnalysisKind* out);

/// Per-scan overrides of sidecar values (batch manifests, --config).
struct ScanOverrides {
  std::optional<std::string> gas;
  std::optional<double> ir_wavelength_nm;
  std::optional<std::string> engine;
  std::optional<std::string> kind;
};

struct ScanJob {
  std::string sidecar;  ///< input sidecar path
  std::string out_dir;  ///< output folder of this scan
  AnalysisKind analysis = AnalysisKind::kAuto;
  ScanOverrides overrides;
  RetrieveOptions retrieve;  ///< options of the streaking retrieval
  bool quiet = true;         ///< no progress output
  /// Figures as PNG (default) or SVG (--figure-format); report.html embeds whichever.
  plot::FigureFormat figure_format = plot::FigureFormat::kPng;
  /// Called with (stage, message) during long work; may be empty.
  std::function<void(const std::string&, const std::string&)> progress;
  std::vector<Param> extra_provenance;  ///< e.g. batch options, appended to the result
  /// Where data files may lie (io/trace_reader.h): batch input roots, --allow-outside-data.
  TraceReadPolicy read_policy;
  /// Called with the trace right after reading, before any analysis (e.g. the output-folder
  /// check against the data file's folder); may throw sw::Error. May be empty.
  std::function<void(const Trace&)> after_read;
  // --- rabbitt and classify (retrieval/analysis/analyses.h) ---
  /// rabbitt: sidecar of a field-free (XUV-only) scan whose spectrum gives the harmonic
  /// amplitudes of the average burst; "" = use the delay-integrated RABBITT spectrum.
  std::string xuv_only_sidecar;
  /// rabbitt: analysis options (retrieval/analysis/analyses.h). The two satellite-ratio
  /// thresholds, the preprocessing, the quality limits and the xuv-only name are taken from
  /// this job (retrieve, xuv_only_sidecar: one place for every analysis and for batch); the
  /// fields of the same meaning here are ignored (rabbitt_options).
  RabbittAnalysisOptions rabbitt;
  /// classify: analysis options; its retrieve_options are this job's retrieve (with the engine
  /// override; classify_options), the fields here are ignored.
  ClassifyAnalysisOptions classify;
};

struct ScanOutcome {
  bool ok = false;
  std::string message;                          ///< failure reason ("" when ok)
  int exit_code = 0;                            ///< the single-scan exit code it corresponds to
  ErrorKind error_kind = ErrorKind::kInternal;  ///< kind of the failure when !ok
  AnalysisKind analysis_run = AnalysisKind::kAuto;
  AnalysisResult result;  ///< filled when ok (also written to out_dir/result.json)
  double seconds = 0.0;
};

/// Reads the scan, applies overrides, runs the analysis, writes out_dir (result.json last).
/// A numerical failure that leaves no estimate at all (an sw::Error of kind kNumeric thrown by
/// an analysis) is reported as bad input (exit 3): exit 4 always means an estimate was written.
/// Written files holding NaN or infinity are a failure of the same kind (the analysis could
/// not produce finite numbers from this input); the caller discards the folder.
ScanOutcome run_scan(const ScanJob& job);

/// run_scan for the single-scan subcommands: checks the output folder against every input
/// before any work (cli/output_folder.h, exit 2), writes into a temporary sibling that replaces
/// the output folder only when complete, stops at SIGINT/SIGTERM (InterruptedError, exit
/// 128 + signal, nothing written), shows progress on stderr unless job.quiet, and throws a
/// failure as sw::Error of its kind (so guarded() prints it and exits with its code).
ScanOutcome run_scan_or_throw(ScanJob job);

/// An analysis' error as run_scan reports it: the message names the scan's sidecar (prefix
/// "scan 'PATH': " unless it already does; no prefix when `sidecar` is empty), and a numerical
/// failure that left no estimate (kNumeric) is bad input (kInput, exit 3) with a note that
/// nothing was written.
Error scan_error(const Error& e, const std::string& sidecar);

/// Thrown by run_scan_or_throw when a SIGINT/SIGTERM stopped the analysis.
class InterruptedError : public std::runtime_error {
 public:
  InterruptedError(const std::string& m, int code) : std::runtime_error(m), code_(code) {}
  int exit_code() const { return code_; }

 private:
  int code_;
};

/// The first file under `dir` (recursively) whose text holds a non-finite number ("nan",
/// "inf", "infinity" as a token, any case) among .csv/.json/.html files; "" if none.
std::string find_non_finite_output(const std::string& dir);

/// The reader's overrides (io/trace_reader.h) of a job's overrides: the reader applies them
/// once, before anything uses them. Throws sw::Error(kUsage) for an unknown kind.
TraceReadOverrides read_overrides(const ScanOverrides& o);

/// The analysis kAuto picks for a scan that has been read (see AnalysisKind).
AnalysisKind auto_analysis(const Trace& trace);

/// The library options of a job's rabbitt and classify analyses (retrieval/analysis/analyses.h):
/// the satellite-ratio thresholds come from job.retrieve, the engine override applies.
RabbittAnalysisOptions rabbitt_options(const ScanJob& job);
ClassifyAnalysisOptions classify_options(const ScanJob& job);

}  // namespace sw::cli
