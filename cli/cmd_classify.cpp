// `streakwright classify SCAN.json --out DIR`: isolated pulse, isolated pulse with satellites,
// pulse train or undetermined, with every piece of evidence reported (the analysis itself:
// analyse_classify, retrieval/analysis/analyses.h).
#include <cstdio>
#include <memory>
#include <sstream>

#include "cli/analysis.h"
#include "cli/commands.h"
#include "cli/option_checks.h"
#include "cli/option_registry.h"
#include "cli/scan_command.h"
#include "retrieval/analysis/analyses.h"
#include "retrieval/core/error.h"
#include "retrieval/engines/engine.h"
#include "retrieval/preprocess/lines.h"

namespace sw::cli {

namespace {

struct ClassifyArgs : ScanCommandArgs {
  std::string gas;
  double wavelength_nm = 0.0;
  ClassifyAnalysisOptions options;  ///< the flags of ClassifyAnalysisOptions::describe
};

int run_classify(ClassifyArgs& a) {
  ScanJob job = scan_command_job(a, AnalysisKind::kClassify);
  job.classify = a.options;
  // The retrieval's options, with the satellite thresholds (one place for them, analysis.h).
  job.retrieve = a.options.retrieve_options;
  apply_energy_window(a, job.retrieve.preprocess);
  job.retrieve.bootstrap = 0;
  if (const std::string e = a.options.validate(); !e.empty()) throw usage_error(e);
  if (job.retrieve.engine != "auto") (void)make_engine(job.retrieve.engine);   // names listed
  if (a.wavelength_nm != 0) job.overrides.ir_wavelength_nm = a.wavelength_nm;  // checked by CLI11
  if (!a.gas.empty()) job.overrides.gas = a.gas;
  const ScanOutcome o = run_scan_or_throw(job);
  const VerdictSection& v = *o.result.verdict;
  std::printf("class: %s\n", to_string(v.pulse_class));
  std::printf("reason: %s\n", v.reason.c_str());
  for (const Param& p : v.evidence)
    std::printf("  %s = %s\n", p.key.c_str(), param_text(p, 5, " ").c_str());
  return finish_scan_command("classify", a, o);
}

}  // namespace

void add_classify_command(CLI::App& app) {
  const auto [cmd, a] = add_command<ClassifyArgs>(
      app, "classify", run_classify,
      "Decide isolated pulse, isolated with satellites, or pulse train from a scan",
      R"(Evidence (each value printed and written to result.json verdict.evidence):
  spectrum.*   fringe contrast of the photoelectron spectrum at 2 hbar omega (bursts
               T/2 apart) and hbar omega (T apart): a satellite-ratio estimate, or a
               harmonic comb;
  delay.*      share of 2 omega (sideband) versus omega (streaking) oscillation in delay;
  retrieval.*  with --retrieve: satellites of the reconstructed XUV field (the streaking
               retrieval runs first, without bootstrap).
Classes: isolated (largest satellite <= --isolated-max of the main burst's peak),
isolated_with_satellites (below --satellites-max), train (>= --comparable-bursts bursts
or a harmonic comb), undetermined (evidence disagrees or signal too weak). Default
thresholds: common practice, no published standard.
An xuv_only scan without ir_wavelength_nm is read with 800 nm (warned).
Writes into DIR: result.json, evidence.csv, PNG figures and report.html.
Exit 0 ok, 2 bad usage, 3 bad input, 4 numerical failure.)");
  add_scan_and_out_options(cmd, *a);
  // The options of ClassifyAnalysisOptions::describe (retrieval/analysis/analyses.h).
  add_described_options(cmd, a->options);
  cmd->add_option("--ir-wavelength", a->wavelength_nm,
                  "IR (driver) wavelength in nm (overrides the sidecar)")
      ->check(ir_wavelength_nm_check());
  cmd->add_option("--gas", a->gas, "target gas (overrides the sidecar; used by --retrieve)");
  cmd->add_option(
      "--energy-window", a->energy_window,
      "analyse only photoelectron energies LO:HI (eV); overrides the sidecar's energy_window_eV");
  add_figure_format_option(cmd, &a->figure_format);
  cmd->add_flag("--quiet,-q", a->quiet, "no progress or warnings on stderr");
  cmd->add_flag("--allow-outside-data", a->allow_outside_data,
                "read a data file outside the sidecar's folder tree (refused by default)");
  check_numeric_options(cmd);
}

}  // namespace sw::cli
