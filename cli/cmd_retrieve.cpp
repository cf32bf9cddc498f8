// `streakwright retrieve SCAN.json --out DIR`: reconstruct the XUV pulse and the IR field.
#include <algorithm>
#include <cstdio>
#include <memory>
#include <sstream>

#include "cli/analysis.h"
#include "cli/commands.h"
#include "cli/option_checks.h"
#include "cli/option_registry.h"
#include "cli/scan_command.h"
#include "retrieval/analysis/retrieve.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/engines/engine.h"
#include "retrieval/physics/dipole.h"
#include "retrieval/preprocess/lines.h"

namespace sw::cli {

namespace {

struct RetrieveArgs : ScanCommandArgs {
  RetrieveOptions options;
  std::string lines;  ///< --lines NAME[,NAME...] or none; "" = every line found
};

std::string summary_line(const AnalysisResult& r) {
  // Numbers by the one precision policy of retrieval/core/format.h.
  const auto g = [](double v) { return format_g(v, kDisplayDigits); };
  std::ostringstream s;
  const auto& x = *r.xuv;
  s << "XUV FWHM " << format_value_sigma(*x.fwhm_as, x.fwhm_as_sigma, "as") << " (TL "
    << g(*x.transform_limited_fwhm_as) << " as), GDD "
    << format_value_sigma(*x.gdd_as2, x.gdd_as2_sigma, "as^2") << ", centre "
    << g(*x.center_photon_energy_eV) << " eV";
  if (r.ir && r.ir->peak_vector_potential_au)
    s << "; IR A0 "
      << format_value_sigma(*r.ir->peak_vector_potential_au, r.ir->peak_vector_potential_au_sigma,
                            "a.u.");
  s << "; " << to_string(r.verdict->pulse_class) << " (satellite "
    << g(100 * r.verdict->satellite_intensity_ratio.value_or(0)) << " %); G "
    << g(r.fit->trace_error.value_or(0))
    << (r.fit->converged.value_or(false) ? "" : " NOT CONVERGED") << "; " << r.engine;
  // Photoelectron lines with their relative delays (retrieval/analysis/line_delays.h).
  if (r.lines.size() >= 2) {
    s << "\nlines:";
    for (const LineEntry& l : r.lines) {
      s << " " << (l.gas.empty() ? "" : l.gas + " ") << l.name;
      if (l.reference)
        s << " (reference)";
      else if (l.relative_delay_as) {
        s << " delay " << format_value_sigma(*l.relative_delay_as, l.relative_delay_as_sigma, "as");
        if (l.relative_delay_as_corrected)
          s << " (" << g(*l.relative_delay_as_corrected) << " as Coulomb-laser corrected)";
        if (l.relative_strength) s << ", strength " << g(*l.relative_strength);
      } else {
        s << " (no delay)";
      }
      s << ";";
    }
  }
  return s.str();
}

int run_retrieve(RetrieveArgs& a) {
  apply_energy_window(a, a.options.preprocess);
  if (!a.lines.empty()) parse_line_names(a.lines, "--lines", &a.options.line_delays.names);
  if (a.options.engine != "auto") (void)make_engine(a.options.engine);  // unknown names listed
  if (const std::string e = a.options.validate(); !e.empty()) throw usage_error(e);
  ScanJob job = scan_command_job(a, AnalysisKind::kRetrieve);
  job.retrieve = a.options;
  const ScanOutcome o = run_scan_or_throw(job);
  std::printf("%s\n", summary_line(o.result).c_str());
  print_report_path(a);
  if (o.exit_code == 4)
    std::fprintf(stderr,
                 "streakwright retrieve: warning: the engine did not converge; the best estimate "
                 "was written with converged: false\n");
  return o.exit_code;
}

}  // namespace

void add_retrieve_command(CLI::App& app) {
  std::ostringstream limit;  // the default of --cma-phase-limit (RetrieveOptions)
  limit << RetrieveOptions{}.cma_phase_error_max_rad;
  std::string engines =
      R"(Engines:
  auto           ptychographic first; full-model refinement when the CMA's own phase error
                 (estimated from the retrieved field) exceeds )" +
      limit.str() + R"( rad (broadband pulses)
  ptychographic  ePIE applied to streaking (CMA): XUV = object, phase gate = probe
  projections    generalized projections (CMA): PCGPA on matched grids, LSGPA otherwise
  full-model     least-squares fit of the full SFA model without the CMA (Ceres, L-BFGS)
Writes into DIR: result.json, report.html, CSVs (with units) and PNG (or SVG) figures.
Prints a one-line summary. Exit 0 ok, 2 bad usage, 3 bad input, 4 not converged
(best estimate written, converged: false).)";
  const auto [cmd, a] = add_command<RetrieveArgs>(
      app, "retrieve", run_retrieve,
      "Reconstruct the XUV pulse and the IR streaking field from a scan", engines);
  add_scan_and_out_options(cmd, *a);
  // The options of RetrieveOptions::describe (retrieval/analysis/retrieve.h).
  add_described_options(cmd, a->options);
  cmd->add_option(
      "--energy-window", a->energy_window,
      "analyse only photoelectron energies LO:HI (eV); overrides the sidecar's energy_window_eV "
      "and the automatic window around the strongest line");
  add_figure_format_option(cmd, &a->figure_format);
  cmd->add_option(
      "--lines", a->lines,
      "photoelectron lines whose delay relative to the reference (strongest) line is measured: "
      "names such as 2s (comma-separated; a line of another gas as 'Kr 4p'), or none; default: "
      "every "
      "line found");
  cmd->add_flag("--quiet,-q", a->quiet, "no progress on stderr");
  cmd->add_flag("--allow-outside-data", a->allow_outside_data,
                "read a data file outside the sidecar's folder tree ('..', absolute or symlinked "
                "paths; refused by default)");
  check_numeric_options(cmd);
}

}  // namespace sw::cli
