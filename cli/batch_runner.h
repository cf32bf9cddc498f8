#pragma once
// Running a batch of scans (behind `streakwright batch`; docs/batch.md).
//
// Every scan goes through run_scan() (cli/analysis.h) into a temporary folder
// OUT/.tmp-<escaped name>-<pid>; when the analysis succeeded (result.json written last) the
// folder is renamed into place as OUT/<name>, atomically exchanged with an older one when it
// exists (Linux renameat2 RENAME_EXCHANGE; else rename the old one aside first), and the old one
// is deleted (sub-folders that belong to other scans, e.g. OUT/a/b inside OUT/a, are carried
// over). A failed scan leaves no folder behind and an older result untouched; its reason goes
// into the summary row. Temporary folders of crashed runs (their pid gone) are removed at start.
//
// Parallelism: `jobs` worker threads take scans in name order; with jobs > 1 the engines run
// single-threaded. Results do not depend on the number of jobs: each scan's seed comes from the
// base seed and its name (cli/batch_inputs.h scan_seed), never from the schedule.
//
// Resume: a scan is skipped (its row rebuilt from the existing result) when OUT/<name>/result.json
// records the same input hash (provenance.input_hash_fnv1a64, FNV-1a 64 of sidecar + data file),
// the same options (batch.options_hash = FNV-1a 64 of the canonical options string
// batch.options) and the same program version (provenance.version).
//
// Interruption: the first SIGINT stops launching scans and lets the running ones finish; the
// second abandons the running analyses at their next iteration (their temporary folders are
// removed); the third exits at once (status 130). SIGTERM (a scheduler or system shutdown)
// counts twice: it abandons the running analyses at once. Scans that never started get a
// failed row "not run: ...". The summary is written in every case.
//
// A scan whose sidecar path is not valid UTF-8 (result.json and the summaries are UTF-8) gets a
// failed row with the escaped path instead of running.

#include <string>
#include <vector>

#include "cli/analysis.h"
#include "cli/batch_inputs.h"
#include "cli/batch_summary.h"
#include "retrieval/analysis/retrieve.h"

namespace sw::cli {

struct BatchOptions {
  std::string out_dir;                          ///< the batch output folder (created)
  int jobs = 1;                                 ///< parallel scans (>= 1)
  bool resume = false;                          ///< reuse unchanged results (see above)
  int shard_k = 1, shard_n = 1;                 ///< this process runs shard K of N (1-based)
  AnalysisKind analysis = AnalysisKind::kAuto;  ///< analysis unless a manifest row says otherwise
  RetrieveOptions retrieve;                     ///< base options; retrieve.seed is the base seed
  /// rabbitt: the options a batch can set (those of RabbittAnalysisOptions::describe with a
  /// config key: atomic_correction); the rest keep their defaults.
  RabbittAnalysisOptions rabbitt;
  ScanOverrides overrides;      ///< for every scan (a manifest row's values win)
  bool quiet = false;           ///< no progress on stderr
  TraceReadPolicy read_policy;  ///< data-file confinement (input roots)
  /// Figures of every scan and the trend figures: PNG (default) or SVG (--figure-format).
  plot::FigureFormat figure_format = plot::FigureFormat::kPng;
  /// Empty if usable, else a message naming the option, its value and the constraint.
  std::string validate() const;
};

struct BatchReport {
  std::vector<SummaryRow> rows;  ///< one per scan of this shard, in name order
  std::size_t ok = 0, failed = 0, reused = 0, not_run = 0;
  bool interrupted = false;  ///< a SIGINT/SIGTERM arrived
  double seconds = 0.0;      ///< wall time of the batch
};

/// The canonical options string of one scan ("analysis=retrieve;bootstrap=8;..."): every
/// setting that can change its result, with the scan's own seed and overrides.
std::string scan_options_string(const BatchScan& scan, const BatchOptions& options);

/// The options shared by all scans (for the summary and messages), without per-scan values.
std::string batch_options_string(const BatchOptions& options);

/// Runs `scans` (already filtered to this shard) as described above; never throws for a
/// scan's failure. Installs SIGINT/SIGTERM handlers for its duration.
BatchReport run_batch(const std::vector<BatchScan>& scans, const BatchOptions& options);

}  // namespace sw::cli
