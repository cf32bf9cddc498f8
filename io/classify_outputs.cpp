#include "io/classify_outputs.h"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <sstream>

#include "io/atomic_file.h"
#include "io/figures.h"
#include "io/report_html.h"
#include "io/result_io.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/pulse_metrics.h"
#include "streakwright_version.h"

namespace sw {

namespace fs = std::filesystem;

namespace {

// CSV cell: quoted when it contains a separator or a quote (RFC 4180).
std::string csv_cell(const std::string& s) {
  if (s.find_first_of(",\"\n") == std::string::npos) return s;
  std::string q = "\"";
  for (char c : s) q += c == '"' ? std::string("\"\"") : std::string(1, c);
  return q + "\"";
}

}  // namespace

void write_classify_outputs(const Trace& trace, const AnalysisResult& res,
                            const Reconstruction* rec, double ir_wavelength_nm,
                            const std::string& dir, plot::FigureFormat figure_format) {
  // Figures ("*.png" below) take the extension of the requested format.
  const plot::OutputPaths path = plot::make_output_folder(dir, figure_format);
  const VerdictSection& v = *res.verdict;

  {
    std::ostringstream c;
    c << "key,value\n";
    c << "class," << to_string(v.pulse_class) << '\n';
    for (const Param& p : v.evidence)
      c << csv_cell(p.key) << ',' << csv_cell(param_text(p, 10, " ")) << '\n';
    write_file_atomic(path("evidence.csv"), c.str());
  }

  std::vector<double> eev(trace.num_energies()), dfs(trace.num_delays());
  for (std::size_t j = 0; j < eev.size(); ++j) eev[j] = units::au_to_eV(trace.energy_au[j]);
  for (std::size_t i = 0; i < dfs.size(); ++i) dfs[i] = units::au_to_fs(trace.delay_au[i]);
  std::vector<std::pair<std::string, std::string>> figs;
  const double hw = units::au_to_eV(units::wavelength_nm_to_omega_au(ir_wavelength_nm));
  if (trace.num_delays() >= 2) {
    TraceFigureOptions o;
    o.title = "scan: class " + std::string(to_string(v.pulse_class));
    plot_trace_image(trace.counts, dfs, eev, o, path("scan.png"));
    figs.push_back({path("scan.png"), "The scan (counts per bin)."});
  }
  {
    std::vector<double> s(eev.size(), 0.0);
    for (Eigen::Index i = 0; i < trace.counts.rows(); ++i)
      for (Eigen::Index j = 0; j < trace.counts.cols(); ++j) s[j] += trace.counts(i, j);
    LinePlot lp;
    lp.title =
        "delay-integrated spectrum (2 hbar omega = " + format_g(2 * hw, kDisplayDigits) + " eV)";
    lp.x_label = "photoelectron energy (eV)";
    lp.y_label = "counts (summed over delays)";
    lp.series.push_back({eev, s, {}, "", std::nullopt, false, true, false, 1, false});
    plot_lines(lp, path("spectrum.png"));
    figs.push_back({path("spectrum.png"),
                    "Delay-integrated photoelectron spectrum: bursts spaced by half an IR period "
                    "interfere into fringes of period 2 hbar omega (the spectrum.* evidence)."});
  }
  if (rec && !rec->xuv.envelope().empty()) {
    const std::vector<double> t = rec->xuv.grid().times(), I = rec->xuv.intensity();
    const double T = units::period_au(units::wavelength_nm_to_omega_au(ir_wavelength_nm));
    const double Imax = *std::max_element(I.begin(), I.end());
    const std::size_t im =
        static_cast<std::size_t>(std::max_element(I.begin(), I.end()) - I.begin());
    std::vector<double> x, y;
    for (std::size_t i = 0; i < t.size(); ++i)
      if (std::abs(t[i] - t[im]) <= 1.5 * T) {
        x.push_back(units::au_to_as(t[i]));
        y.push_back(Imax > 0 ? I[i] / Imax : 0.0);
      }
    LinePlot lp;
    lp.title = "retrieved XUV intensity (" + rec->engine + "): satellite ratio " +
               format_g(res.verdict->satellite_intensity_ratio.value_or(0.0), kDisplayDigits);
    lp.x_label = "time (as), IR reference";
    lp.y_label = "intensity (norm.)";
    lp.series.push_back({x, y, {}, "retrieved", std::nullopt, false, true, false, 2, false});
    for (int k : {-1, 1}) {
      const double ts = units::au_to_as(t[im] + 0.5 * k * T);
      Series s;
      s.x = {ts, ts};
      s.y = {0.0, 1.0};
      s.label = k < 0 ? "main burst -+ T/2" : "";
      s.dashed = true;
      s.thickness_px = 1;
      s.color = plot::Rgb{200, 60, 40};
      lp.series.push_back(s);
    }
    plot_lines(lp, path("xuv_pulse.png"));
    figs.push_back({path("xuv_pulse.png"),
                    "Retrieved XUV temporal intensity over +-1.5 IR periods around the main "
                    "burst; dashed: where satellites of a half-cycle gate appear."});
  }

  HtmlReport rep(
      "streakwright classification: " +
      fs::path(trace.meta.source.empty() ? res.input : trace.meta.source).filename().string());
  rep.set_footer(std::string("streakwright ") + STREAKWRIGHT_VERSION);
  if (res.quality) rep.add_quality(*res.quality);
  rep.add_paragraph("Input: " + res.input + "\nIR wavelength used: " +
                    format_g(ir_wavelength_nm, kDisplayDigits) + " nm (T/2 = " +
                    format_g(0.5 * units::au_to_as(units::period_au(
                                       units::wavelength_nm_to_omega_au(ir_wavelength_nm))),
                             kDisplayDigits) +
                    " as)");
  for (const auto& w : res.warnings) rep.add_warning(w);
  std::vector<KeyValueRow> vr;
  vr.push_back({"class", to_string(v.pulse_class), "", std::nullopt});
  if (v.satellite_intensity_ratio)
    vr.push_back(KeyValueRow::number("largest satellite / main burst peak intensity",
                                     *v.satellite_intensity_ratio, "",
                                     v.satellite_intensity_ratio_sigma));
  if (v.main_burst_energy_fraction)
    vr.push_back(
        KeyValueRow::number("main-burst energy fraction", *v.main_burst_energy_fraction, ""));
  vr.push_back({"reason", v.reason, "", std::nullopt});
  rep.add_key_value_table("Verdict", vr);
  std::vector<std::vector<std::string>> ev;
  for (const Param& p : v.evidence) ev.push_back({p.key, param_text(p)});
  rep.add_table(
      {"evidence", "value"}, ev,
      "Evidence (retrieval/analysis/classifier.h): spectral fringes at 2 hbar omega, share of "
      "2 omega oscillation in delay, reconstructed bursts");
  rep.add_paragraph(
      "Classes (DESIGN.md; thresholds are options, defaults are common practice with no "
      "published standard): isolated when the largest satellite at about +-T/2 has at most "
      "the isolated threshold of the main burst's peak intensity; isolated_with_satellites "
      "above that while the main burst dominates; train for three or more comparable bursts "
      "or a harmonic comb; undetermined when the evidence disagrees or the signal is too weak.");
  if (res.xuv && res.xuv->fwhm_as) {
    std::vector<KeyValueRow> xr;
    xr.push_back(KeyValueRow::number("XUV FWHM (main burst)", *res.xuv->fwhm_as, "as"));
    if (res.xuv->transform_limited_fwhm_as)
      xr.push_back(
          KeyValueRow::number("transform-limited FWHM", *res.xuv->transform_limited_fwhm_as, "as"));
    if (res.fit && res.fit->trace_error)
      xr.push_back(KeyValueRow::number("trace error G", *res.fit->trace_error, ""));
    if (res.fit && res.fit->converged)
      xr.push_back({"converged", *res.fit->converged ? "yes" : "no", "", std::nullopt});
    rep.add_key_value_table("Streaking retrieval used as evidence (" + res.engine + ")", xr);
  }
  for (const auto& [p, c] : figs) rep.add_figure(p, c);
  std::vector<std::vector<std::string>> settings;
  for (const Param& p : res.extra) settings.push_back({p.key, param_text(p)});
  rep.add_table({"setting", "value"}, settings, "Settings and provenance");
  rep.write(path("report.html"));
  write_result_json(path("result.json"), res);
}

}  // namespace sw
