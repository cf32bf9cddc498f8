// `streakwright info SCAN.json`: what was loaded, and what a physicist should worry about.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <sstream>

#include "cli/commands.h"
#include "io/input_guard.h"
#include "io/trace_reader.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/gas.h"
#include "retrieval/preprocess/preprocess.h"

namespace sw::cli {

namespace {

struct AxisStats {
  double first = 0, last = 0, min_step = 0, max_step = 0;
  bool uniform = true;
};

AxisStats axis_stats(const std::vector<double>& v, double (*conv)(double)) {
  AxisStats a;
  a.first = conv(v.front());
  a.last = conv(v.back());
  a.min_step = 1e300;
  a.max_step = 0;
  for (std::size_t i = 1; i < v.size(); ++i) {
    const double s = conv(v[i]) - conv(v[i - 1]);
    a.min_step = std::min(a.min_step, s);
    a.max_step = std::max(a.max_step, s);
  }
  if (v.size() < 2) a.min_step = a.max_step = 0;
  a.uniform = a.max_step - a.min_step <= 1e-6 * std::abs(a.max_step);
  return a;
}

int run_info(const std::string& path, bool allow_outside_data) {
  std::vector<std::string> warnings;
  TraceReadPolicy policy;
  policy.allow_outside_data = allow_outside_data;
  const Trace t = read_trace(path, &warnings, {}, policy);
  // Legal but suspicious values the reader accepts.
  if (!t.energy_au.empty() && t.energy_au.front() < 0) {
    std::size_t negative = 0;
    for (double e : t.energy_au) negative += e < 0 ? 1 : 0;
    std::ostringstream w;
    w << negative << " energy bins lie below 0 eV (from " << units::au_to_eV(t.energy_au.front())
      << " eV): photoelectron kinetic energies are >= 0; check energy_eV or the calibration";
    warnings.push_back(w.str());
  }
  if (t.meta.ir_wavelength_nm > 0 &&
      (t.meta.ir_wavelength_nm < 400 || t.meta.ir_wavelength_nm > 12000)) {
    std::ostringstream w;
    w << "ir_wavelength_nm = " << t.meta.ir_wavelength_nm
      << " nm is outside the usual drivers (400 nm .. 12 um); check the unit (nm)";
    warnings.push_back(w.str());
  }
  const AxisStats E = axis_stats(t.energy_au, units::au_to_eV);
  const AxisStats D = axis_stats(t.delay_au, units::au_to_fs);
  const double total = t.counts.sum(), peak = t.counts.maxCoeff();
  long long at_peak = 0;
  for (Eigen::Index i = 0; i < t.counts.size(); ++i) at_peak += t.counts.data()[i] >= peak ? 1 : 0;

  std::printf("scan        %s\n", printable_path(path).c_str());
  std::printf("image       %s\n", printable_path(t.meta.image).c_str());
  std::printf("kind hint   %s\n",
              *to_string(t.meta.kind) ? to_string(t.meta.kind) : "(none: the analysis decides)");
  std::printf("size        %zu delays x %zu energies\n", t.num_delays(), t.num_energies());
  std::printf("energy      %.3f .. %.3f eV, step %s%.4f eV\n", E.first, E.last,
              E.uniform ? "" : "~", E.max_step);
  if (!E.uniform)
    std::printf("            non-uniform: steps %.4f .. %.4f eV\n", E.min_step, E.max_step);
  std::printf("delay       %.3f .. %.3f fs, step %s%.4f fs%s\n", D.first, D.last,
              D.uniform ? "" : "~", D.max_step, D.uniform ? "" : " (non-uniform)");
  if (!D.uniform)
    std::printf("            non-uniform: steps %.4f .. %.4f fs\n", D.min_step, D.max_step);
  std::printf("counts      total %.6g, peak %.6g per bin, mean %.4g per bin\n", total, peak,
              total / static_cast<double>(t.counts.size()));
  if (!t.meta.gas.empty()) {
    try {
      const Gas& g = find_gas(t.meta.gas);
      std::printf("gas         %s (%s), Ip = %.4f eV (NIST ASD)\n", g.symbol.c_str(),
                  g.name.c_str(), g.ionization_energy_eV);
    } catch (const Error& e) {
      warnings.push_back(e.what());
    }
  } else {
    warnings.push_back(
        "no 'gas' in the sidecar: retrieval and RABBITT analysis need the ionization energy");
  }
  if (t.meta.ir_wavelength_nm > 0) {
    const double w = units::wavelength_nm_to_omega_au(t.meta.ir_wavelength_nm);
    const double T_fs = units::au_to_fs(units::period_au(w));
    std::printf("IR          %.1f nm, period %.3f fs, photon %.4f eV\n", t.meta.ir_wavelength_nm,
                T_fs, units::au_to_eV(w));
    // 2 omega oscillation has period T/2: Nyquist needs steps < T/4; practical sampling ~T/8.
    if (D.max_step > T_fs / 4)
      warnings.push_back("delay step " + std::to_string(D.max_step) +
                         " fs exceeds T/4 = " + std::to_string(T_fs / 4) +
                         " fs: a 2 omega (sideband) oscillation is undersampled");
    else if (D.max_step > T_fs / 8)
      warnings.push_back(
          "delay step " + std::to_string(D.max_step) +
          " fs is coarser than T/8 = " + std::to_string(T_fs / 8) +
          " fs: 2 omega phases will be noisy (common practice: >= 8 steps per 2 omega period)");
  } else {
    warnings.push_back("no 'ir_wavelength_nm' in the sidecar");
  }
  if (t.meta.energy_resolution_eV)
    std::printf("resolution  %.3f eV (sidecar)\n", *t.meta.energy_resolution_eV);
  if (t.meta.background)
    std::printf("background  %.4g counts per bin (sidecar)\n", *t.meta.background);
  else if (t.meta.background_auto)
    std::printf("background  auto (sidecar): the fitted model is below\n");
  if (t.meta.energy_window_eV.size() == 2)
    std::printf("window      %.3f .. %.3f eV (sidecar energy_window_eV)\n",
                t.meta.energy_window_eV[0], t.meta.energy_window_eV[1]);
  if (t.meta.saturation_counts)
    std::printf("saturation  %.6g counts per bin (sidecar)\n", *t.meta.saturation_counts);
  for (const DeclaredLine& d : t.meta.lines)
    std::printf("line        %s%s%s, Ip %s (sidecar)\n", d.gas.empty() ? "" : d.gas.c_str(),
                d.gas.empty() ? "" : " ", d.name.c_str(),
                d.ionization_energy_eV ? (std::to_string(*d.ionization_energy_eV) + " eV").c_str()
                                       : "auto");
  if (!t.meta.notes.empty())
    std::printf("notes       %s\n", escape_excerpt(t.meta.notes, 400).c_str());
  for (const auto& [k, v] : t.meta.extra_json)
    std::printf("extra       %s = %s\n", escape_excerpt(k, 64).c_str(),
                escape_excerpt(v, 200).c_str());

  // What retrieve's preprocessing finds (retrieval/preprocess/preprocess.h, default options).
  if (!t.meta.gas.empty() && t.meta.ir_wavelength_nm > 0 && t.num_delays() >= 4) {
    try {
      PreprocessSummary ps;
      (void)preprocess(t, PreprocessOptions{}, &ps);
      const BackgroundModel& b = ps.background;
      std::printf("bg model    %s", b.model.c_str());
      if (ps.background_source == "fit") {
        std::printf(
            ": %s per bin",
            format_value_sigma(b.constant_counts, b.constant_counts_sigma, "counts").c_str());
        if (b.has_tail)
          std::printf(
              " + (%s) exp(-W / (%s))",
              format_value_sigma(b.tail_counts_at_zero, b.tail_counts_at_zero_sigma).c_str(),
              format_value_sigma(b.tail_decay_eV, b.tail_decay_eV_sigma, "eV").c_str());
        if (b.has_tof)
          std::printf(" + (%s) (W_ref / W)^1.5",
                      format_value_sigma(b.tof_counts, b.tof_counts_sigma).c_str());
        std::printf(" (Poisson ML over %zu energy bins)", b.background_bins);
        if (!b.below_onset_W_eV.empty())
          std::printf("; below %.4g eV (the tail's onset) each bin's own delay average",
                      b.onset_eV);
      }
      std::printf("\n");
      std::printf("hot pixels  %zu replaced (isolated in delay and energy)\n",
                  ps.hot_pixels_replaced);
      std::printf("saturated   %zu bins", ps.saturated_bins);
      if (ps.saturated_bins)
        std::printf(" at %.6g counts (%s): zero weight", ps.saturation_level_counts,
                    ps.saturation_source.c_str());
      std::printf("\n");
      if (ps.photon_energy_eV > 0)
        std::printf("photon      %.2f eV (from the line pattern)\n", ps.photon_energy_eV);
      for (const LineEntry& l : ps.lines) {
        std::printf("line        %s %s: Ip %.4f eV, W %.2f eV", l.gas.c_str(), l.name.c_str(),
                    l.ionization_energy_eV, l.kinetic_energy_eV.value_or(0.0));
        if (l.relative_strength)
          std::printf(", strength %s",
                      format_value_sigma(*l.relative_strength, l.relative_strength_sigma).c_str());
        std::printf("%s (%s)\n", l.reference ? ", reference" : "", l.source.c_str());
      }
      for (const UnseenLine& u : ps.unseen_lines) {
        std::printf("not seen    %s %s expected at W %.2f eV, inside the signal's support",
                    u.gas.c_str(), u.name.c_str(), u.kinetic_energy_eV);
        if (u.separable)
          std::printf(": strength %s, upper limit %.3g (2 sigma)\n",
                      format_value_sigma(u.strength, u.strength_sigma).c_str(), u.upper_limit);
        else
          std::printf(": inside the reference line's own band, not separable\n");
      }
      if (!ps.window_source.empty())
        std::printf("analysed    %.3f .. %.3f eV (%s)\n", ps.window_lo_eV, ps.window_hi_eV,
                    ps.window_source.c_str());
      for (const auto& w : ps.warnings) warnings.push_back("preprocessing: " + w);
    } catch (const Error& e) {
      warnings.push_back(std::string("preprocessing not possible: ") + e.what());
    }
  }
  if (peak < 20)
    warnings.push_back("peak of " + std::to_string(peak) +
                       " counts per bin: Poisson noise will dominate (< 20 counts)");
  if (at_peak > 3 && static_cast<double>(at_peak) > 1e-3 * static_cast<double>(t.counts.size()))
    warnings.push_back(std::to_string(at_peak) +
                       " bins sit exactly at the maximum value: detector saturation likely");
  if (t.num_delays() < 2 && t.meta.kind != TraceKind::kXuvOnly)
    warnings.push_back("only one delay row: no streaking information");
  for (const auto& w : warnings) std::printf("warning     %s\n", escape_excerpt(w, 1000).c_str());
  return 0;
}

}  // namespace

void add_info_command(CLI::App& app) {
  auto* cmd = app.add_subcommand(
      "info", "Describe a scan: sizes, axes, counts, gas, kind hint, and warnings");
  cmd->footer(
      "Reads SCAN.json (or .yaml) and its data image without modifying them and prints what was\n"
      "loaded, with warnings a physicist would want (delay step versus the 2 omega period,\n"
      "saturation, low counts, missing gas or wavelength) and what the preprocessing finds: the\n"
      "background model, hot pixels, saturated bins, the photoelectron lines and the analysed\n"
      "energy window. Exit 3 when the files are bad.");
  auto path = std::make_shared<std::string>();
  auto outside = std::make_shared<bool>(false);
  cmd->add_option("scan", *path, "sidecar of the scan (NAME.json or NAME.yaml)")->required();
  cmd->add_flag("--allow-outside-data", *outside,
                "read a data file outside the sidecar's folder tree (refused by default)");
  cmd->callback([path, outside] {
    exit_code() = guarded("info", [&] { return run_info(*path, *outside); });
  });
}

}  // namespace sw::cli
