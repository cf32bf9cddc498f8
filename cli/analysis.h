#pragma once
// One scan, one analysis, one output folder: the unit of work shared by the single-scan
// subcommands (retrieve, rabbitt, classify) and by batch. run_scan() never throws: a failure
// comes back as ok = false with the message a physicist needs (file, field, expectation).

#include <optional>
#include <string>
#include <vector>

#include "retrieval/error.h"
#include "retrieval/result.h"
#include "retrieval/retrieve.h"
#include "retrieval/trace.h"

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
  std::string sidecar;                 ///< input sidecar path
  std::string out_dir;                 ///< output folder of this scan
  AnalysisKind analysis = AnalysisKind::kAuto;
  ScanOverrides overrides;
  RetrieveOptions retrieve;            ///< options of the streaking retrieval
  std::string atomic_correction = "auto";  ///< rabbitt: auto | none
  bool quiet = true;                   ///< no progress output
  /// Called with (stage, message) during long work; may be empty.
  std::function<void(const std::string&, const std::string&)> progress;
  std::vector<Param> extra_provenance; ///< e.g. batch options, appended to the result
};

struct ScanOutcome {
  bool ok = false;
  std::string message;                 ///< failure reason ("" when ok)
  int exit_code = 0;                   ///< the single-scan exit code it corresponds to
  ErrorKind error_kind = ErrorKind::kInternal;  ///< kind of the failure when !ok
  AnalysisKind analysis_run = AnalysisKind::kAuto;
  AnalysisResult result;               ///< filled when ok (also written to out_dir/result.json)
  double seconds = 0.0;
};

/// Reads the scan, applies overrides, runs the analysis, writes out_dir (result.json last).
ScanOutcome run_scan(const ScanJob& job);

/// Applies overrides to a loaded trace's metadata.
void apply_overrides(Trace& trace, const ScanOverrides& o);

}  // namespace sw::cli
