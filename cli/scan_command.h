#pragma once
// The part the single-scan subcommands (retrieve, rabbitt, classify) share: the arguments every
// one of them takes, the ScanJob they make of them, and what they print at the end.

#include <string>

#include <CLI/CLI.hpp>

#include "cli/analysis.h"
#include "io/plot.h"
#include "retrieval/preprocess/preprocess.h"

namespace sw::cli {

/// The arguments every single-scan subcommand binds (its own come beside them).
struct ScanCommandArgs {
  std::string scan;           ///< sidecar of the scan
  std::string out;            ///< output folder
  std::string energy_window;  ///< --energy-window LO:HI (eV), "" = none
  bool quiet = false;
  bool allow_outside_data = false;
  plot::FigureFormat figure_format = plot::FigureFormat::kPng;
};

/// The positional `scan` (help: `scan_help`) and --out,-o of a single-scan subcommand, both
/// required.
void add_scan_and_out_options(
    CLI::App* cmd, ScanCommandArgs& a,
    const std::string& scan_help = "sidecar of the scan (NAME.json or NAME.yaml)");

/// A ScanJob of `analysis` with the scan, output folder, quietness, figure format and read
/// policy of `a`; the caller sets the analysis' options.
ScanJob scan_command_job(const ScanCommandArgs& a, AnalysisKind analysis);

/// --energy-window (when given) into the preprocessing's energy window; throws sw::Error(kUsage)
/// for text that is not LO:HI.
void apply_energy_window(const ScanCommandArgs& a, PreprocessOptions& preprocess);

/// The end of a single-scan subcommand: the result's warnings on stderr ("streakwright
/// <command>: warning: ...") unless quiet, then "report: OUT/report.html" on stdout. Returns
/// the outcome's exit code.
int finish_scan_command(const char* command, const ScanCommandArgs& a, const ScanOutcome& o);

/// "report: OUT/report.html" on stdout.
void print_report_path(const ScanCommandArgs& a);

}  // namespace sw::cli
