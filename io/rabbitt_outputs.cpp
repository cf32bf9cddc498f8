#include "io/rabbitt_outputs.h"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <limits>
#include <sstream>

#include "io/atomic_file.h"
#include "io/figures.h"
#include "io/report_html.h"
#include "io/result_io.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"
#include "streakwright_version.h"

namespace sw {

namespace fs = std::filesystem;

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Writes rows of cells (already formatted) under a header line.
void write_csv(const std::string& path, const std::vector<std::string>& header,
               const std::vector<std::vector<std::string>>& rows) {
  std::ostringstream c;
  for (std::size_t k = 0; k < header.size(); ++k) c << (k ? "," : "") << header[k];
  c << '\n';
  for (const auto& r : rows) {
    for (std::size_t k = 0; k < r.size(); ++k) c << (k ? "," : "") << r[k];
    c << '\n';
  }
  write_file_atomic(path, c.str());
}

// A vertical line as a two-point series (LinePlot has no vertical markers).
Series vertical(double x, double y0, double y1, const std::string& label, plot::Rgb color,
                bool dashed) {
  Series s;
  s.x = {x, x};
  s.y = {y0, y1};
  s.label = label;
  s.color = color;
  s.dashed = dashed;
  s.thickness_px = 1;
  return s;
}

}  // namespace

void write_rabbitt_outputs(const Trace& trace, const RabbittAnalysis& rb, const TrainBurst* burst,
                           const AnalysisResult& res, const std::string& dir,
                           plot::FigureFormat figure_format) {
  // Figures ("*.png" below) take the extension of the requested format.
  const plot::OutputPaths path = plot::make_output_folder(dir, figure_format);
  const double hw_eV = rb.ir_photon_energy_eV;

  // --- CSV files ---------------------------------------------------------------------------
  {
    std::vector<std::vector<std::string>> rows;
    for (const SidebandDetail& d : rb.sidebands) {
      const bool a = d.atomic.applied;
      rows.push_back(
          {std::to_string(d.order), format_cell(d.energy_eV), format_cell(d.phase_unwrapped_rad),
           format_cell(d.fit.phase_rad_sigma), format_cell(d.group_delay_as),
           format_cell(d.group_delay_as_sigma), format_cell(d.fit.modulation_depth),
           a ? format_cell(d.atomic.total_as) : "", format_cell(d.photon_energy_eV),
           format_cell(d.measured_delay_as), a ? format_cell(d.atomic.wigner_as) : "",
           a ? format_cell(d.atomic.continuum_continuum_as) : "", format_cell(d.fit.reduced_chi2),
           format_cell(d.window_low_eV), format_cell(d.window_high_eV)});
    }
    write_csv(path("sidebands.csv"),
              {"order", "energy_eV", "phase_rad", "phase_rad_sigma", "group_delay_as",
               "group_delay_as_sigma", "modulation_depth", "atomic_delay_as", "photon_energy_eV",
               "measured_delay_as", "wigner_delay_as", "continuum_continuum_delay_as",
               "reduced_chi2", "window_low_eV", "window_high_eV"},
              rows);
  }
  {
    std::vector<std::vector<std::string>> rows;
    for (const SidebandDetail& d : rb.sidebands)
      for (std::size_t k = 0; k < d.rainbow_energy_eV.size(); ++k)
        rows.push_back(
            {std::to_string(d.order), format_cell(d.rainbow_energy_eV[k]),
             format_cell(d.rainbow_phase_rad[k]),
             k < d.rainbow_phase_rad_sigma.size() ? format_cell(d.rainbow_phase_rad_sigma[k]) : "",
             k < d.rainbow_modulation_depth.size() ? format_cell(d.rainbow_modulation_depth[k])
                                                   : ""});
    write_csv(path("rainbow.csv"),
              {"order", "energy_eV", "phase_rad", "phase_rad_sigma", "modulation_depth"}, rows);
  }
  {
    // Relative delays of further lines (retrieval/analysis/rabbitt_lines.h), one row per order.
    std::vector<std::vector<std::string>> rows;
    auto opt_cell = [](const std::optional<double>& v) { return v ? format_cell(*v) : ""; };
    for (const LineEntry& l : res.lines)
      for (const LineSideband& b : l.sidebands)
        rows.push_back({l.gas, l.name, std::to_string(b.order), format_cell(b.energy_eV),
                        format_cell(b.relative_phase_rad), format_cell(b.relative_phase_rad_sigma),
                        format_cell(b.relative_delay_as), format_cell(b.relative_delay_as_sigma),
                        opt_cell(b.relative_delay_as_corrected), opt_cell(b.cc_correction_as)});
    if (!rows.empty())
      write_csv(path("line_delays.csv"),
                {"gas", "line", "order", "energy_eV", "relative_phase_rad",
                 "relative_phase_rad_sigma", "relative_delay_as", "relative_delay_as_sigma",
                 "relative_delay_as_corrected", "cc_correction_as"},
                rows);
  }
  if (burst) {
    std::vector<std::vector<std::string>> rows;
    for (std::size_t h = 0; h < burst->harmonic_orders.size(); ++h)
      rows.push_back({std::to_string(burst->harmonic_orders[h]),
                      format_cell(burst->harmonic_photon_energy_eV[h]),
                      format_cell(burst->harmonic_intensity[h]),
                      format_cell(burst->harmonic_phase_rad[h])});
    write_csv(path("harmonics.csv"), {"order", "photon_energy_eV", "intensity_norm", "phase_rad"},
              rows);
    rows.clear();
    for (std::size_t i = 0; i < burst->time_as.size(); ++i)
      rows.push_back({format_cell(burst->time_as[i]), format_cell(burst->intensity[i]),
                      format_cell(burst->transform_limited_intensity[i])});
    write_csv(path("burst.csv"), {"time_as", "intensity_norm", "transform_limited_intensity_norm"},
              rows);
  }

  // --- figures -----------------------------------------------------------------------------
  const std::vector<double>& eev = rb.energy_eV;
  const std::vector<double>& dfs = rb.delay_fs;
  std::vector<std::string> captions;
  std::vector<std::string> figures;
  auto add_fig = [&](const std::string& name, const std::string& caption) {
    figures.push_back(path(name));
    captions.push_back(caption);
  };
  {
    TraceFigureOptions o;
    o.title = "RABBITT scan: " + std::to_string(rb.sidebands.size()) + " sidebands fitted (" +
              rb.gas + ", " + format_g(rb.ir_wavelength_nm, kDisplayDigits) + " nm)";
    for (const SidebandDetail& d : rb.sidebands)
      o.markers.push_back({0.5 * (d.window_low_eV + d.window_high_eV),
                           "SB" + std::to_string(d.order), plot::Rgb{255, 255, 255}});
    plot_trace_image(trace.counts, dfs, eev, o, path("scan.png"));
    add_fig("scan.png",
            "The scan (counts per bin) with the centres of the sideband integration windows "
            "(dashed, after the energy-axis alignment).");
  }
  {
    LinePlot lp;
    lp.title = "delay-integrated spectrum: offset " +
               format_g(rb.alignment.offset_eV, kDisplayDigits) + " eV, scale " +
               format_g(rb.alignment.scale, kDisplayDigits);
    lp.x_label = "photoelectron energy (eV)";
    lp.y_label = "counts (summed over delays)";
    lp.series.push_back(
        {eev, rb.integrated_spectrum, {}, "spectrum", std::nullopt, false, true, false, 1, false});
    double smax = 0;
    for (double v : rb.integrated_spectrum) smax = std::max(smax, v);
    bool first_h = true, first_s = true;
    for (const SpectralPeak& p : rb.peaks) {
      if (p.predicted_eV < eev.front() || p.predicted_eV > eev.back()) continue;
      const bool sb = p.sideband;
      std::string label;
      if (sb && first_s) label = "predicted sideband q hw - Ip";
      if (!sb && first_h) label = "predicted harmonic q hw - Ip";
      (sb ? first_s : first_h) = false;
      lp.series.push_back(vertical(p.predicted_eV, 0.0, smax, label,
                                   sb ? plot::Rgb{200, 60, 40} : plot::Rgb{120, 120, 120}, true));
    }
    Series obs;
    obs.label = "observed centroids";
    obs.line = false;
    obs.markers = true;
    obs.color = plot::Rgb{0, 0, 0};
    for (const SpectralPeak& p : rb.peaks) {
      if (!(p.observed_eV > 0) || p.area_counts <= 0) continue;
      // Height of the spectrum at the observed centroid.
      const auto it = std::lower_bound(eev.begin(), eev.end(), p.observed_eV);
      if (it == eev.end()) continue;
      obs.x.push_back(p.observed_eV);
      obs.y.push_back(rb.integrated_spectrum[static_cast<std::size_t>(it - eev.begin())]);
    }
    if (!obs.x.empty()) lp.series.push_back(obs);
    plot_lines(lp, path("spectrum.png"));
    add_fig("spectrum.png",
            "Delay-integrated photoelectron spectrum with the predicted harmonic (grey) and "
            "sideband (red) energies q hbar omega - Ip and the observed peak centroids: the "
            "energy-axis alignment check.");
  }
  if (!rb.sidebands.empty()) {
    Series ph;
    ph.label = "sideband phase (unwrapped)";
    ph.markers = true;
    ph.line = false;
    for (const SidebandDetail& d : rb.sidebands) {
      ph.x.push_back(d.energy_eV);
      ph.y.push_back(d.phase_unwrapped_rad);
      ph.y_err.push_back(d.fit.phase_rad_sigma);
    }
    LinePlot lp;
    lp.title = "sideband phases: S = A + B cos(2 omega tau + phase), tau = t_XUV - t_IR";
    lp.x_label = "photoelectron energy of the sideband (eV)";
    lp.y_label = "phase (rad)";
    lp.series.push_back(ph);
    plot_lines(lp, path("phase.png"));
    add_fig("phase.png",
            "Fitted phase of each sideband (unwrapped across sidebands) with 1-sigma error bars "
            "from the weighted least-squares covariance.");

    Series gd;
    gd.label = "group delay t_e (corrected)";
    gd.markers = true;
    gd.line = false;
    Series meas;
    meas.label = "measured delay (no atomic correction)";
    meas.markers = true;
    meas.line = false;
    meas.color = plot::Rgb{150, 150, 150};
    bool any_atomic = false;
    double xlo = 1e300, xhi = -1e300;
    for (const SidebandDetail& d : rb.sidebands) {
      gd.x.push_back(d.photon_energy_eV);
      gd.y.push_back(d.group_delay_as);
      gd.y_err.push_back(d.group_delay_as_sigma);
      meas.x.push_back(d.photon_energy_eV);
      meas.y.push_back(d.measured_delay_as);
      any_atomic = any_atomic || d.atomic.applied;
      xlo = std::min(xlo, d.photon_energy_eV);
      xhi = std::max(xhi, d.photon_energy_eV);
    }
    LinePlot lg;
    std::string t = "group delay per sideband";
    if (res.rabbitt && res.rabbitt->attochirp_as_per_eV) {
      t = "attochirp " + format_value_sigma(*res.rabbitt->attochirp_as_per_eV,
                                            res.rabbitt->attochirp_as_per_eV_sigma, "as/eV");
      Series fit;
      fit.label = "weighted linear fit (attochirp)";
      fit.color = plot::Rgb{200, 40, 40};
      const double pad = 0.5 * hw_eV;
      for (double x : {xlo - pad, xhi + pad}) {
        fit.x.push_back(x);
        fit.y.push_back(rb.attochirp_intercept_as +
                        *res.rabbitt->attochirp_as_per_eV * (x - rb.attochirp_reference_eV));
      }
      lg.series.push_back(fit);
    }
    lg.title = t;
    lg.x_label = "photon energy q hbar omega (eV)";
    lg.y_label = "emission time t_e (as)";
    if (any_atomic) lg.series.push_back(meas);
    lg.series.push_back(gd);
    plot_lines(lg, path("group_delay.png"));
    add_fig("group_delay.png",
            "XUV group delay (emission time) per sideband with 1-sigma error bars and the "
            "weighted linear fit whose slope is the attochirp (positive: higher photon "
            "energies emitted later)" +
                std::string(any_atomic ? "; grey: the measured delays before the atomic-delay "
                                         "correction."
                                       : "."));

    LinePlot lr;
    lr.title = "rainbow RABBITT: phase across each sideband";
    lr.x_label = "photoelectron energy (eV)";
    lr.y_label = "phase (rad)";
    bool any = false;
    for (const SidebandDetail& d : rb.sidebands) {
      if (d.rainbow_energy_eV.empty()) continue;
      // Bins where the sideband has too little signal for a phase (sigma above 0.3 rad)
      // are left out of the figure (they stay in rainbow.csv).
      Series s;
      for (std::size_t k = 0; k < d.rainbow_energy_eV.size(); ++k) {
        const double sg =
            k < d.rainbow_phase_rad_sigma.size() ? d.rainbow_phase_rad_sigma[k] : kNaN;
        if (!(sg < 0.3)) continue;
        s.x.push_back(d.rainbow_energy_eV[k]);
        s.y.push_back(d.rainbow_phase_rad[k]);
        s.y_err.push_back(sg);
      }
      if (s.x.empty()) continue;
      s.markers = true;
      s.thickness_px = 1;
      s.color = plot::palette_color(0);
      any = true;
      lr.series.push_back(s);
    }
    if (any) {
      plot_lines(lr, path("rainbow.png"));
      add_fig("rainbow.png",
              "Phase fitted per energy bin across each sideband window (rainbow RABBITT, "
              "V. Gruson et al., Science 354, 734 (2016)), bins with a phase sigma below "
              "0.3 rad; its slope within a sideband measures the chirp of the burst across "
              "2 hbar omega.");
    }
  }
  if (burst) {
    LinePlot lb;
    lb.title =
        "average burst: FWHM " + format_value_sigma(burst->fwhm_as, burst->fwhm_as_sigma, "as") +
        " (transform limit " + format_g(burst->transform_limited_fwhm_as, kDisplayDigits) + " as)";
    lb.x_label = "time on the IR axis (as)";
    lb.y_label = "intensity (norm.)";
    lb.series.push_back({burst->time_as,
                         burst->intensity,
                         {},
                         "reconstructed burst",
                         std::nullopt,
                         false,
                         true,
                         false,
                         2,
                         false});
    lb.series.push_back({burst->time_as,
                         burst->transform_limited_intensity,
                         {},
                         "transform limit (flat phases, same harmonics)",
                         std::nullopt,
                         true,
                         true,
                         false,
                         2,
                         false});
    plot_lines(lb, path("burst.png"));
    add_fig("burst.png",
            "Average burst of the train, E(t) = sum_q sqrt(I_q) exp(i phi_q - i q omega t), "
            "and its transform limit (shifted onto the burst).");
  }

  // --- report ------------------------------------------------------------------------------
  HtmlReport rep(
      "streakwright RABBITT analysis: " +
      fs::path(trace.meta.source.empty() ? res.input : trace.meta.source).filename().string());
  rep.set_footer(std::string("streakwright ") + STREAKWRIGHT_VERSION);
  if (res.quality) rep.add_quality(*res.quality);
  rep.add_paragraph("Input: " + res.input + "\nGas: " + rb.gas +
                    " (Ip = " + format_g(rb.ionization_energy_eV, kDisplayDigits) + " eV), IR " +
                    format_g(rb.ir_wavelength_nm, kDisplayDigits) +
                    " nm (hbar omega = " + format_g(hw_eV, kDisplayDigits) + " eV)");
  for (const auto& w : res.warnings) rep.add_warning(w);

  std::vector<KeyValueRow> sr;
  if (res.rabbitt) {
    const RabbittSection& s = *res.rabbitt;
    if (s.attochirp_as_per_eV)
      sr.push_back(KeyValueRow::number("attochirp (positive: higher energies later)",
                                       *s.attochirp_as_per_eV, "as/eV",
                                       s.attochirp_as_per_eV_sigma));
    if (s.attochirp_as_per_eV)
      sr.push_back(KeyValueRow::number(
          "equivalent burst GDD (attochirp x hbar)",
          *s.attochirp_as_per_eV * units::au_to_as(1.0) * units::au_to_eV(1.0), "as^2",
          s.attochirp_as_per_eV_sigma
              ? std::optional<double>(*s.attochirp_as_per_eV_sigma * units::au_to_as(1.0) *
                                      units::au_to_eV(1.0))
              : std::nullopt));
    sr.push_back(
        KeyValueRow::number("reduced chi^2 of the attochirp fit", rb.attochirp_reduced_chi2, ""));
    if (s.train_burst_fwhm_as)
      sr.push_back(KeyValueRow::number("average burst FWHM", *s.train_burst_fwhm_as, "as",
                                       s.train_burst_fwhm_as_sigma));
    if (s.transform_limited_burst_fwhm_as)
      sr.push_back(KeyValueRow::number("transform-limited burst FWHM",
                                       *s.transform_limited_burst_fwhm_as, "as"));
    sr.push_back({"sidebands fitted", std::to_string(s.sidebands.size()), "", std::nullopt});
  }
  if (res.verdict) sr.push_back({"class", to_string(res.verdict->pulse_class), "", std::nullopt});
  rep.add_key_value_table("Result", sr);

  rep.add_heading("Method and assumptions");
  rep.add_paragraph(
      "Per sideband q (even, between harmonics q-1 and q+1 of an odd-harmonic train) the counts "
      "in a window of +-" +
      format_g(rb.sidebands.empty() ? 0.0
                                    : 0.5 * (rb.sidebands.front().window_high_eV -
                                             rb.sidebands.front().window_low_eV),
               kDisplayDigits) +
      " eV are fitted over the whole delay axis with S(tau) = A + B cos(2 omega tau + phi) by "
      "weighted linear least squares with Poisson weights (P. M. Paul et al., Science 292, "
      "1689 (2001); H. G. Muller, Appl. Phys. B 74, S17 (2002)). tau = t_XUV - t_IR, so "
      "phi = phi_{q+1} - phi_{q-1} + atomic phase, and the emission time of photon energy "
      "q hbar omega is t_e = phi / (2 omega) - tau_atomic. The attochirp is the slope of a "
      "weighted linear fit of t_e versus q hbar omega; positive means higher photon energies "
      "are emitted later. Sigmas come from the fit covariance, scaled by sqrt(reduced chi^2) "
      "where it exceeds 1. The perturbative two-path picture holds for a weak IR field "
      "(one IR photon per path); at higher IR intensity higher-order sidebands bias the "
      "phases (docs/validation.md).");
  if (burst) rep.add_paragraph("Average burst: " + burst->assumptions + ".");

  {
    const EnergyAxisAlignment& a = rb.alignment;
    std::vector<KeyValueRow> ar;
    ar.push_back(
        {"fitted", a.fitted ? "yes" : "no (fewer than 2 significant peaks)", "", std::nullopt});
    ar.push_back(KeyValueRow::number("offset W_obs - W_pred at the reference", a.offset_eV, "eV",
                                     a.offset_eV_sigma));
    ar.push_back(KeyValueRow::number("scale", a.scale, "", a.scale_sigma));
    ar.push_back(KeyValueRow::number("reference energy", a.reference_eV, "eV"));
    ar.push_back(KeyValueRow::number("coarse offset (2 hbar omega Fourier phase)",
                                     a.coarse_offset_eV, "eV"));
    ar.push_back(KeyValueRow::number("resolution compared with", a.resolution_eV, "eV"));
    ar.push_back({"peaks used", std::to_string(a.peaks_used), "", std::nullopt});
    ar.push_back({"within the resolution", a.within_resolution ? "yes" : "NO", "", std::nullopt});
    rep.add_key_value_table(
        "Energy-axis alignment check: W_obs = W_ref + offset + scale (W_pred - W_ref), "
        "W_pred = q hbar omega - Ip",
        ar);
  }
  {
    const DelayAxisCheck& d = rb.delay_check;
    std::vector<KeyValueRow> dr;
    if (d.performed) {
      dr.push_back(KeyValueRow::number("calibration factor kappa (tau_true = kappa tau_axis)",
                                       d.calibration_factor, "", d.calibration_factor_sigma, 6));
      dr.push_back(KeyValueRow::number("nominal 2 omega", d.nominal_frequency_au, "a.u.", {}, 6));
      dr.push_back(KeyValueRow::number("fitted frequency", d.fitted_frequency_au, "a.u.", {}, 6));
      std::string used;
      for (int q : d.sidebands_used) used += (used.empty() ? "SB" : ", SB") + std::to_string(q);
      dr.push_back({"sidebands used", used, "", std::nullopt});
      dr.push_back({"applied to the sideband fits", d.applied ? "yes" : "no (reported only)", "",
                    std::nullopt});
    } else {
      dr.push_back({"performed", "no", "", std::nullopt});
    }
    rep.add_key_value_table(
        "Delay-axis calibration check: oscillation frequency fitted freely around 2 omega", dr);
  }
  {
    std::vector<std::vector<std::string>> rows;
    std::string desc;
    for (const SidebandDetail& d : rb.sidebands) {
      if (desc.empty()) desc = d.atomic.description;
      rows.push_back(
          {"SB" + std::to_string(d.order), format_g(d.energy_eV, kDisplayDigits),
           d.atomic.applied ? "yes" : "no",
           d.atomic.applied ? format_g(d.atomic.wigner_as, kDisplayDigits) : "",
           d.atomic.applied ? format_g(d.atomic.continuum_continuum_as, kDisplayDigits) : "",
           d.atomic.applied ? format_g(d.atomic.total_as, kDisplayDigits) : "",
           format_g(d.measured_delay_as, kDisplayDigits),
           format_g(d.group_delay_as, kDisplayDigits)});
    }
    rep.add_heading("Atomic-delay corrections");
    rep.add_paragraph(
        (desc.empty() ? std::string("No correction applied.") : desc) +
        "\nModels: Wigner delay of the hydrogenic Coulomb phase and the continuum-continuum "
        "delay of the asymptotic formula of J. M. Dahlstrom, A. L'Huillier and A. Maquet, "
        "J. Phys. B 45, 183001 (2012) (retrieval/physics/atomic_delay.h). t_e = measured - total.");
    rep.add_table({"sideband", "energy (eV)", "applied", "Wigner (as)", "cc (as)", "total (as)",
                   "measured delay (as)", "group delay t_e (as)"},
                  rows, "Atomic delays subtracted per sideband");
  }
  {
    std::vector<std::vector<std::string>> rows;
    for (const SidebandDetail& d : rb.sidebands)
      rows.push_back({"SB" + std::to_string(d.order), format_g(d.energy_eV, kDisplayDigits),
                      format_value_sigma(d.phase_unwrapped_rad, d.fit.phase_rad_sigma),
                      format_value_sigma(d.group_delay_as, d.group_delay_as_sigma),
                      format_g(d.fit.modulation_depth, kDisplayDigits),
                      format_g(d.fit.reduced_chi2, kDisplayDigits)});
    rep.add_table({"sideband", "energy (eV)", "phase (rad)", "group delay (as)",
                   "modulation depth B/A", "reduced chi^2"},
                  rows, "Sidebands");
    if (!rb.skipped_sidebands.empty()) {
      std::string s;
      for (const auto& k : rb.skipped_sidebands) s += k + "\n";
      rep.add_paragraph("Skipped sidebands:\n" + s);
    }
  }
  if (res.verdict) {
    const VerdictSection& v = *res.verdict;
    std::vector<KeyValueRow> vr;
    vr.push_back({"class", to_string(v.pulse_class), "", std::nullopt});
    if (v.satellite_intensity_ratio)
      vr.push_back(
          KeyValueRow::number("satellite intensity ratio", *v.satellite_intensity_ratio, ""));
    vr.push_back({"reason", v.reason, "", std::nullopt});
    for (const Param& p : v.evidence) vr.push_back({p.key, param_text(p), "", std::nullopt});
    rep.add_key_value_table("Isolated or train (thresholds: common practice, options)", vr);
  }
  for (std::size_t k = 0; k < figures.size(); ++k) rep.add_figure(figures[k], captions[k]);
  std::vector<std::vector<std::string>> settings;
  for (const Param& p : res.extra) settings.push_back({p.key, param_text(p)});
  rep.add_table({"setting / diagnostic", "value"}, settings,
                "Settings, diagnostics and provenance");
  rep.add_paragraph(
      "Safety: this report analyses recorded data only. Local laser-safety rules and the "
      "facility's procedures for intense lasers, XUV beams and detector high voltage come "
      "first.");
  rep.write(path("report.html"));
  write_result_json(path("result.json"), res);
}

}  // namespace sw
