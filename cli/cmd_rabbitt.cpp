// `streakwright rabbitt SCAN.json --out DIR`: sideband phases, group delays, attochirp and the
// average burst of a pulse train from a RABBITT scan, plus the isolated-versus-train verdict.
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
#include "retrieval/core/format.h"
#include "retrieval/preprocess/lines.h"

namespace sw::cli {

namespace {

struct RabbittArgs : ScanCommandArgs {
  std::string xuv_only;
  std::string gas;
  double wavelength_nm = 0.0;
  RabbittAnalysisOptions options;  ///< the flags of RabbittAnalysisOptions::describe
};

std::string summary_line(const AnalysisResult& r) {
  // Numbers by the one precision policy of retrieval/core/format.h.
  std::ostringstream s;
  const RabbittSection& b = *r.rabbitt;
  if (b.attochirp_as_per_eV)
    s << "attochirp "
      << format_value_sigma(*b.attochirp_as_per_eV, b.attochirp_as_per_eV_sigma, "as/eV");
  else
    s << "no attochirp";
  s << " (" << b.sidebands.size() << " sidebands";
  if (!b.sidebands.empty())
    s << ", SB" << b.sidebands.front().order << "-SB" << b.sidebands.back().order;
  s << ")";
  if (b.train_burst_fwhm_as) {
    s << "; burst FWHM "
      << format_value_sigma(*b.train_burst_fwhm_as, b.train_burst_fwhm_as_sigma, "as");
    if (b.transform_limited_burst_fwhm_as)
      s << " (TL " << format_g(*b.transform_limited_burst_fwhm_as, kDisplayDigits) << " as)";
  }
  if (r.verdict) s << "; " << to_string(r.verdict->pulse_class);
  if (!r.warnings.empty()) s << "; " << r.warnings.size() << " warning(s), see the report";
  return s.str();
}

// One logbook line per line with a RABBITT relative delay ("" when there is none).
std::string line_delay_lines(const AnalysisResult& r) {
  std::ostringstream s;
  std::string ref;
  for (const LineEntry& l : r.lines)
    if (l.reference) ref = l.gas + " " + l.name;
  for (const LineEntry& l : r.lines) {
    if (l.reference || !l.relative_delay_as || l.sidebands.empty()) continue;
    s << "relative delay " << l.gas << " " << l.name << " - " << ref << ": "
      << format_value_sigma(*l.relative_delay_as, l.relative_delay_as_sigma, "as");
    if (l.relative_delay_as_corrected)
      s << ", corrected for continuum-continuum coupling "
        << format_value_sigma(*l.relative_delay_as_corrected, l.relative_delay_as_corrected_sigma,
                              "as");
    s << " (weighted mean of " << l.sidebands.size() << " sideband"
      << (l.sidebands.size() == 1 ? "" : "s") << " SB" << l.sidebands.front().order;
    if (l.sidebands.size() > 1) s << "-SB" << l.sidebands.back().order;
    if (l.relative_delay_reduced_chi2 && l.sidebands.size() > 1)
      s << ", chi2/dof " << format_g(*l.relative_delay_reduced_chi2, 2);
    if (!l.overlapped_orders.empty())
      s << "; " << l.overlapped_orders.size() << " overlapped order(s) left out";
    s << "; positive = emitted later)\n";
  }
  return s.str();
}

int run_rabbitt(RabbittArgs& a) {
  ScanJob job = scan_command_job(a, AnalysisKind::kRabbitt);
  job.xuv_only_sidecar = a.xuv_only;
  job.rabbitt = a.options;
  // One place for the satellite thresholds (analysis.h): the retrieve options.
  job.retrieve.satellite_ratio = a.options.classifier.satellite_ratio;
  apply_energy_window(a, job.retrieve.preprocess);
  if (!a.gas.empty()) job.overrides.gas = a.gas;
  if (a.wavelength_nm != 0) job.overrides.ir_wavelength_nm = a.wavelength_nm;  // checked by CLI11
  if (const std::string e = a.options.validate(); !e.empty()) throw usage_error(e);
  const ScanOutcome o = run_scan_or_throw(job);
  std::printf("%s\n", summary_line(o.result).c_str());
  std::printf("%s", line_delay_lines(o.result).c_str());
  return finish_scan_command("rabbitt", a, o);
}

}  // namespace

void add_rabbitt_command(CLI::App& app) {
  const auto [cmd, a] = add_command<RabbittArgs>(
      app, "rabbitt", run_rabbitt,
      "Attochirp and average burst of a pulse train from a RABBITT scan",
      R"(Method: harmonic and sideband peaks are identified at q hbar omega - Ip (gas and IR
wavelength from the sidecar or --gas/--ir-wavelength); the energy axis offset and scale
that align them are reported. Each sideband is fitted over the whole delay axis with
S(tau) = A + B cos(2 omega tau + phi) (Poisson-weighted linear least squares; also per
energy bin: rainbow RABBITT), the oscillation frequency is fitted freely to check the
delay-stage calibration, and the group delay t_e = phi / (2 omega) - atomic delay gives
the attochirp (as/eV, positive = higher photon energies emitted later). The average
burst is E(t) = sum_q sqrt(I_q) exp(i phi_q - i q omega t) with the harmonic
intensities from the spectrum divided by the cross-section model.
Needs a weak IR field (one IR photon per path) and a harmonic comb: a streaking scan
without a comb is refused (exit 3).
With a second photoelectron line (declared in the sidecar's lines, or a line of the
gas table seen in the comb) each sideband order present for both lines gives the
relative delay (phi_line - phi_reference) / (2 omega), raw and corrected for the
continuum-continuum delay at each line's kinetic energy, and their weighted mean;
orders where the two lines' peaks overlap are left out.
Writes into DIR: result.json (rabbitt and verdict sections), sidebands.csv,
rainbow.csv, harmonics.csv, burst.csv, line_delays.csv (with a second line), PNG
figures and report.html.
Prints a one-line summary. Exit 0 ok, 2 bad usage, 3 bad input, 4 numerical failure.)");
  add_scan_and_out_options(cmd, *a, "sidecar of the RABBITT scan (NAME.json or NAME.yaml)");
  // The options of RabbittAnalysisOptions::describe (retrieval/analysis/analyses.h).
  add_described_options(cmd, a->options);
  cmd->add_option("--xuv-only", a->xuv_only,
                  "sidecar of a field-free XUV-only scan for the harmonic intensities (default: "
                  "the delay-integrated RABBITT spectrum)");
  cmd->add_option("--gas", a->gas, "target gas (overrides the sidecar)");
  cmd->add_option("--ir-wavelength", a->wavelength_nm,
                  "IR wavelength in nm (overrides the sidecar)")
      ->check(ir_wavelength_nm_check());
  cmd->add_option(
      "--energy-window", a->energy_window,
      "analyse only photoelectron energies LO:HI (eV); overrides the sidecar's energy_window_eV");
  add_figure_format_option(cmd, &a->figure_format);
  cmd->add_flag("--quiet,-q", a->quiet, "no warnings on stderr (they stay in the report)");
  cmd->add_flag("--allow-outside-data", a->allow_outside_data,
                "read data files outside the sidecars' folder trees (refused by default)");
  check_numeric_options(cmd);
}

}  // namespace sw::cli
