#include "cli/scan_command.h"

#include <cstdio>
#include <filesystem>

#include "retrieval/preprocess/lines.h"

namespace sw::cli {

void add_scan_and_out_options(CLI::App* cmd, ScanCommandArgs& a, const std::string& scan_help) {
  cmd->add_option("scan", a.scan, scan_help)->required();
  cmd->add_option("--out,-o", a.out, "output folder (created)")->required();
}

ScanJob scan_command_job(const ScanCommandArgs& a, AnalysisKind analysis) {
  ScanJob job;
  job.sidecar = a.scan;
  job.out_dir = a.out;
  job.analysis = analysis;
  job.quiet = a.quiet;
  job.figure_format = a.figure_format;
  job.read_policy.allow_outside_data = a.allow_outside_data;
  return job;
}

void apply_energy_window(const ScanCommandArgs& a, PreprocessOptions& preprocess) {
  if (!a.energy_window.empty())
    parse_energy_window(a.energy_window, "--energy-window", &preprocess.energy_window_lo_eV,
                        &preprocess.energy_window_hi_eV);
}

void print_report_path(const ScanCommandArgs& a) {
  std::printf("report: %s\n", (std::filesystem::path(a.out) / "report.html").string().c_str());
}

int finish_scan_command(const char* command, const ScanCommandArgs& a, const ScanOutcome& o) {
  if (!a.quiet)
    for (const auto& w : o.result.warnings)
      std::fprintf(stderr, "streakwright %s: warning: %s\n", command, w.c_str());
  print_report_path(a);
  return o.exit_code;
}

}  // namespace sw::cli
