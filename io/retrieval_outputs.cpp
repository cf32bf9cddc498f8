#include "io/retrieval_outputs.h"

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
#include "retrieval/core/phase_unwrap.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/pulse_metrics.h"
#include "streakwright_version.h"

namespace sw {

namespace fs = std::filesystem;

std::vector<double> unwrapped_phase(const std::vector<std::complex<double>>& z, double threshold) {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  std::vector<double> ph(z.size(), nan);
  double mx = 0;
  std::size_t imax = 0;
  for (std::size_t i = 0; i < z.size(); ++i)
    if (std::norm(z[i]) > mx) {
      mx = std::norm(z[i]);
      imax = i;
    }
  if (!(mx > 0)) return ph;
  auto ok = [&](std::size_t i) { return std::norm(z[i]) >= threshold * mx; };
  ph[imax] = std::arg(z[imax]);
  for (std::size_t i = imax + 1; i < z.size() && ok(i); ++i)
    ph[i] = unwrap_next(ph[i - 1], std::arg(z[i]));
  for (std::size_t i = imax; i-- > 0 && ok(i);) ph[i] = unwrap_next(ph[i + 1], std::arg(z[i]));
  return ph;
}

void write_retrieval_outputs(const Trace& trace, const RetrieveOutput& out, const std::string& dir,
                             plot::FigureFormat figure_format) {
  // Figures ("*.png" below) take the extension of the requested format.
  const plot::OutputPaths path = plot::make_output_folder(dir, figure_format);
  const Reconstruction& rec = out.reconstruction;
  const RetrievalProblem& pr = out.problem;
  const AnalysisResult& res = out.result;

  // XUV about its centre photon energy (so the temporal phase shows the chirp, not the carrier).
  const double wc = res.xuv && res.xuv->center_photon_energy_eV
                        ? units::eV_to_au(*res.xuv->center_photon_energy_eV)
                        : rec.xuv.carrier_au();
  const XuvField x = rec.xuv.with_carrier(wc);
  const std::vector<double> t = x.grid().times();
  const std::vector<double> I = x.intensity();
  const double Imax = *std::max_element(I.begin(), I.end());
  const std::vector<std::complex<double>> env(x.envelope().begin(), x.envelope().end());
  const std::vector<double> tph = unwrapped_phase(env, 0.01);
  std::vector<double> t_as(t.size()), In(t.size());
  for (std::size_t i = 0; i < t.size(); ++i) {
    t_as[i] = units::au_to_as(t[i]);
    In[i] = Imax > 0 ? I[i] / Imax : 0.0;
  }
  {
    std::ostringstream c;
    c << "time_as,intensity_norm,phase_rad\n";
    for (std::size_t i = 0; i < t.size(); ++i)
      c << format_cell(t_as[i]) << ',' << format_cell(In[i]) << ',' << format_cell(tph[i]) << '\n';
    write_file_atomic(path("xuv_temporal.csv"), c.str());
  }
  const CVec spec = x.spectrum();
  const std::vector<double> Wph = x.photon_energies_au();
  std::vector<std::complex<double>> sp(spec.begin(), spec.end());
  std::vector<double> sph = unwrapped_phase(sp, 0.01);
  // Remove the constant and linear (group-delay) terms for display: the fit's c0 + c1 (W - W0).
  const SpectralPhaseFit pf = fit_spectral_phase(x);
  std::vector<double> Weig(Wph.size()), Sn(Wph.size());
  double Smax = 0;
  for (const auto& v : spec) Smax = std::max(Smax, std::norm(v));
  {
    double ref = std::numeric_limits<double>::quiet_NaN();
    for (std::size_t j = 0; j < Wph.size(); ++j) {
      Weig[j] = units::au_to_eV(Wph[j]);
      Sn[j] = Smax > 0 ? std::norm(spec[j]) / Smax : 0.0;
      if (std::isfinite(sph[j])) sph[j] -= pf.group_delay * (Wph[j] - pf.center_photon_energy);
    }
    // Offset so that the phase is 0 at the centre energy.
    std::size_t jc = 0;
    for (std::size_t j = 0; j < Wph.size(); ++j)
      if (std::abs(Wph[j] - pf.center_photon_energy) < std::abs(Wph[jc] - pf.center_photon_energy))
        jc = j;
    ref = sph[jc];
    if (std::isfinite(ref))
      for (double& v : sph)
        if (std::isfinite(v)) v -= ref;
    std::ostringstream c;
    c << "photon_energy_eV,spectral_intensity_norm,spectral_phase_rad\n";
    for (std::size_t j = 0; j < Wph.size(); ++j)
      c << format_cell(Weig[j]) << ',' << format_cell(Sn[j]) << ',' << format_cell(sph[j]) << '\n';
    write_file_atomic(path("xuv_spectral.csv"), c.str());
  }
  const IrField& ir = rec.ir;
  std::vector<double> irt(ir.size()), irA = ir.vector_potential(), irE = ir.electric_field();
  for (std::size_t i = 0; i < ir.size(); ++i) irt[i] = units::au_to_fs(ir.time(i));
  {
    std::ostringstream c;
    c << "time_fs,vector_potential_au,electric_field_au\n";
    for (std::size_t i = 0; i < ir.size(); ++i)
      c << format_cell(irt[i]) << ',' << format_cell(irA[i]) << ',' << format_cell(irE[i]) << '\n';
    write_file_atomic(path("ir_field.csv"), c.str());
  }
  {
    std::ostringstream c;
    c << "engine,iteration,trace_error,seconds\n";
    for (const auto& r : out.chain)
      for (const auto& h : r.history)
        c << r.engine << ',' << h.iteration << ',' << format_cell(h.trace_error) << ','
          << format_cell(h.seconds) << '\n';
    write_file_atomic(path("convergence.csv"), c.str());
  }

  // Figures.
  std::vector<double> dfs(pr.delay_au.size()), eev(pr.energy_au.size());
  for (std::size_t i = 0; i < dfs.size(); ++i) dfs[i] = units::au_to_fs(pr.delay_au[i]);
  for (std::size_t j = 0; j < eev.size(); ++j) eev[j] = units::au_to_eV(pr.energy_au[j]);
  ComparisonFigureOptions co;
  co.title = "measured vs retrieved (" + rec.engine + ", " + rec.model +
             " model), G = " + format_g(rec.trace_error, kDisplayDigits);
  co.colorbar_label = "|a|^2 (arb. u.)";
  plot_trace_comparison(pr.intensity, rec.retrieved, dfs, eev, co, path("trace_comparison.png"));

  // Zoom the temporal plot to where the pulse lives.
  double tlo = 1e300, thi = -1e300;
  for (std::size_t i = 0; i < t.size(); ++i)
    if (In[i] > 1e-3) {
      tlo = std::min(tlo, t_as[i]);
      thi = std::max(thi, t_as[i]);
    }
  const double pad = 0.25 * (thi - tlo);
  LinePlot lp;
  lp.title = "XUV pulse: FWHM " +
             format_value_sigma(res.xuv->fwhm_as.value_or(0), res.xuv->fwhm_as_sigma, "as") +
             " (transform limit " +
             format_g(res.xuv->transform_limited_fwhm_as.value_or(0), kDisplayDigits) + " as)";
  lp.x_label = "time (as), XUV reference";
  lp.y_label = "intensity (norm.)";
  lp.y2_label = "temporal phase (rad)";
  lp.series.push_back({t_as, In, {}, "intensity", std::nullopt, false, true, false, 2, false});
  lp.series.push_back({t_as, tph, {}, "phase", std::nullopt, true, true, false, 2, true});
  if (thi > tlo) {
    lp.x_min = tlo - pad;
    lp.x_max = thi + pad;
  }
  plot_lines(lp, path("xuv_pulse.png"));

  LinePlot ls;
  ls.title = "XUV spectrum: centre " +
             format_g(res.xuv->center_photon_energy_eV.value_or(0), kDisplayDigits) + " eV, GDD " +
             format_value_sigma(res.xuv->gdd_as2.value_or(0), res.xuv->gdd_as2_sigma, "as^2");
  ls.x_label = "photon energy (eV)";
  ls.y_label = "spectral intensity (norm.)";
  ls.y2_label = "spectral phase, linear part removed (rad)";
  ls.series.push_back(
      {Weig, Sn, {}, "retrieved spectrum", std::nullopt, false, true, false, 2, false});
  {
    // Field-free photoelectron spectrum shifted by Ip, for comparison.
    std::vector<double> fx(pr.energy_au.size()), fy(pr.energy_au.size());
    double fm = 0;
    for (double v : pr.field_free_spectrum) fm = std::max(fm, v);
    for (std::size_t j = 0; j < fx.size(); ++j) {
      fx[j] = units::au_to_eV(pr.energy_au[j] + pr.ionization_energy_au);
      fy[j] = fm > 0 ? pr.field_free_spectrum[j] / fm : 0.0;
    }
    ls.series.push_back({fx,
                         fy,
                         {},
                         "field-free photoelectron spectrum + Ip",
                         std::nullopt,
                         true,
                         true,
                         false,
                         1,
                         false});
  }
  ls.series.push_back({Weig, sph, {}, "spectral phase", std::nullopt, false, true, false, 2, true});
  double elo = 1e300, ehi = -1e300;
  for (std::size_t j = 0; j < Weig.size(); ++j)
    if (Sn[j] > 1e-3) {
      elo = std::min(elo, Weig[j]);
      ehi = std::max(ehi, Weig[j]);
    }
  if (ehi > elo) {
    ls.x_min = elo - 0.15 * (ehi - elo);
    ls.x_max = ehi + 0.15 * (ehi - elo);
  }
  plot_lines(ls, path("xuv_spectrum.png"));

  LinePlot li;
  li.title = "IR streaking field: A0 = " +
             format_value_sigma(res.ir->peak_vector_potential_au.value_or(0),
                                res.ir->peak_vector_potential_au_sigma, "a.u.") +
             ", I = " + format_g(res.ir->peak_intensity_Wcm2.value_or(0), kDisplayDigits) +
             " W/cm^2";
  li.x_label = "IR time (fs)";
  li.y_label = "vector potential A (a.u.)";
  li.y2_label = "electric field E (a.u.)";
  li.zero_line = true;
  li.series.push_back({irt, irA, {}, "A(t)", std::nullopt, false, true, false, 2, false});
  li.series.push_back({irt, irE, {}, "E(t) = -dA/dt", std::nullopt, true, true, false, 2, true});
  plot_lines(li, path("ir_field.png"));

  LinePlot lc;
  lc.title = "convergence: trace error G (noise floor " +
             format_g(rec.noise_floor_trace_error, kDisplayDigits) + ")";
  lc.x_label = "iteration";
  lc.y_label = "trace error G";
  lc.log_y = true;
  int offset = 0;
  for (const auto& r : out.chain) {
    Series s;
    for (const auto& h : r.history) {
      s.x.push_back(h.iteration + offset);
      s.y.push_back(h.trace_error);
    }
    s.label = r.engine;
    lc.series.push_back(s);
    offset += static_cast<int>(r.history.size());
  }
  if (!out.chain.empty() && !out.chain.front().history.empty()) {
    Series nf;
    nf.x = {0.0, static_cast<double>(std::max(offset, 1))};
    nf.y = {rec.noise_floor_trace_error, rec.noise_floor_trace_error};
    nf.label = "noise floor";
    nf.dashed = true;
    lc.series.push_back(nf);
  }
  plot_lines(lc, path("convergence.png"));

  // Each analysed line's first moment versus delay (minus its fitted field-free centre) with
  // the joint fit (retrieval/analysis/line_delays.h).
  if (out.line_curves.size() >= 2) {
    LinePlot ll;
    ll.title = "photoelectron lines: first moment versus delay, centre-of-energy fit";
    for (std::size_t k = 1; k < out.line_curves.size(); ++k)
      ll.title += (k == 1 ? " (" : ", ") + out.line_curves[k].name + " shifted " +
                  format_g(out.line_curves[k].shift_as, kDisplayDigits) + " as";
    ll.title += ")";
    ll.x_label = "delay (fs)";
    ll.y_label = "first moment - field-free centre (eV)";
    ll.zero_line = true;
    for (std::size_t k = 0; k < out.line_curves.size(); ++k) {
      const LineCurve& cv = out.line_curves[k];
      Series pts, fit;
      pts.x = cv.delay_fs;
      fit.x = cv.delay_fs;
      for (std::size_t i = 0; i < cv.delay_fs.size(); ++i) {
        pts.y.push_back(cv.centroid_eV[i] - cv.field_free_eV);
        fit.y.push_back(cv.model_eV[i] - cv.field_free_eV);
      }
      pts.y_err = cv.sigma_eV;
      pts.label = cv.name + (k == 0 ? " (reference)" : "") + ": measured";
      pts.line = false;
      pts.markers = true;
      pts.thickness_px = 1;
      pts.color = plot::Rgb{static_cast<std::uint8_t>(k == 0 ? 40 : 200), 80,
                            static_cast<std::uint8_t>(k == 0 ? 200 : 40)};
      fit.label = cv.name + ": fit (a + g [-p A(tau + delta) + A^2/2])";
      fit.color = pts.color;
      ll.series.push_back(pts);
      ll.series.push_back(fit);
    }
    plot_lines(ll, path("line_streaking.png"));
  }

  // Report.
  HtmlReport rep("streakwright retrieval: " + fs::path(trace.meta.source).filename().string());
  rep.set_footer(std::string("streakwright ") + STREAKWRIGHT_VERSION);
  if (res.quality) rep.add_quality(*res.quality);
  rep.add_paragraph("Input: " + trace.meta.source + "\nEngine chain: " + [&] {
    std::string c;
    for (const auto& r : out.chain)
      c += (c.empty() ? "" : " -> ") + r.engine + " (" + r.model + ")";
    return c;
  }());
  for (const auto& w : res.warnings) rep.add_warning(w);
  std::vector<KeyValueRow> xr, irr, vr, fr;
  const XuvSection& xs = *res.xuv;
  xr.push_back(KeyValueRow::number("intensity FWHM", *xs.fwhm_as, "as", xs.fwhm_as_sigma));
  xr.push_back(KeyValueRow::number("transform-limited FWHM", *xs.transform_limited_fwhm_as, "as"));
  xr.push_back(KeyValueRow::number("rms duration", xs.rms_duration_as.value_or(0), "as"));
  xr.push_back(KeyValueRow::number("GDD", *xs.gdd_as2, "as^2", xs.gdd_as2_sigma));
  if (xs.tod_as3) xr.push_back(KeyValueRow::number("TOD", *xs.tod_as3, "as^3"));
  xr.push_back(KeyValueRow::number("centre photon energy", *xs.center_photon_energy_eV, "eV"));
  xr.push_back(KeyValueRow::number("bandwidth FWHM", xs.bandwidth_fwhm_eV.value_or(0), "eV"));
  rep.add_key_value_table("XUV pulse", xr);
  const IrSection& is = *res.ir;
  if (is.peak_vector_potential_au)
    irr.push_back(KeyValueRow::number("peak vector potential A0", *is.peak_vector_potential_au,
                                      "a.u.", is.peak_vector_potential_au_sigma));
  if (is.peak_intensity_Wcm2)
    irr.push_back(KeyValueRow::number("peak intensity", *is.peak_intensity_Wcm2, "W/cm^2"));
  if (is.wavelength_nm) irr.push_back(KeyValueRow::number("wavelength", *is.wavelength_nm, "nm"));
  if (is.fwhm_fs) irr.push_back(KeyValueRow::number("intensity envelope FWHM", *is.fwhm_fs, "fs"));
  rep.add_key_value_table("IR streaking field", irr);
  const VerdictSection& vs = *res.verdict;
  vr.push_back({"class", to_string(vs.pulse_class), "", std::nullopt});
  vr.push_back(KeyValueRow::number("satellite intensity ratio",
                                   vs.satellite_intensity_ratio.value_or(0), "",
                                   vs.satellite_intensity_ratio_sigma));
  vr.push_back(KeyValueRow::number("main-burst energy fraction",
                                   vs.main_burst_energy_fraction.value_or(0), ""));
  vr.push_back({"reason", vs.reason, "", std::nullopt});
  rep.add_key_value_table("Isolated or train (thresholds: common practice, options)", vr);
  const FitSection& f = *res.fit;
  fr.push_back(KeyValueRow::number("trace error G", f.trace_error.value_or(0), ""));
  fr.push_back(KeyValueRow::number("noise-floor G", rec.noise_floor_trace_error, ""));
  fr.push_back({"iterations", std::to_string(f.iterations.value_or(0)), "", std::nullopt});
  fr.push_back({"converged", f.converged.value_or(false) ? "yes" : "no", "", std::nullopt});
  fr.push_back({"termination", f.termination, "", std::nullopt});
  fr.push_back(KeyValueRow::number("wall time", f.seconds.value_or(0), "s"));
  rep.add_key_value_table("Fit", fr);
  rep.add_figure(
      path("trace_comparison.png"),
      "Measured (background-subtracted, divided by the Jacobian p), retrieved, and difference.");
  rep.add_figure(path("xuv_pulse.png"),
                 "Retrieved XUV temporal intensity and phase (about the centre photon energy).");
  rep.add_figure(path("xuv_spectrum.png"),
                 "Retrieved XUV spectrum and spectral phase; dashed: field-free photoelectron "
                 "spectrum shifted by Ip.");
  rep.add_figure(path("ir_field.png"),
                 "Retrieved IR vector potential and electric field on the IR time axis (delay "
                 "convention tau = t_XUV - t_IR).");
  rep.add_figure(path("convergence.png"),
                 "Trace error per iteration for each engine of the chain.");
  if (out.line_curves.size() >= 2) {
    std::vector<std::vector<std::string>> lt;
    for (const LineEntry& l : res.lines) {
      auto num = [](const std::optional<double>& v, const std::optional<double>& sg) {
        if (!v) return std::string("-");
        return format_value_sigma(*v, sg);
      };
      lt.push_back(
          {l.gas + " " + l.name + (l.reference ? " (reference)" : ""),
           format_g(l.ionization_energy_eV, kDisplayDigits),
           num(l.relative_strength, l.relative_strength_sigma),
           num(l.relative_delay_as, l.relative_delay_as_sigma),
           num(l.clc_correction_as, std::nullopt),
           num(l.relative_delay_as_corrected, l.relative_delay_as_sigma),
           num(l.relative_delay_as_centre_of_energy, l.relative_delay_as_centre_of_energy_sigma),
           l.delay_method.empty() ? std::string("-") : l.delay_method});
    }
    rep.add_table(
        {"line", "Ip (eV)", "relative strength", "relative delay (as)",
         "Coulomb-laser correction (as)", "corrected delay (as)", "centre of energy (as)",
         "method"},
        lt,
        "Photoelectron lines: relative delays (positive = emitted later than the reference); the "
        "joint "
        "full-model fit when it ran, the centre-of-energy value beside it as the cross-check");
    rep.add_figure(path("line_streaking.png"),
                   "First moment of each line's band versus delay, minus its field-free centre, "
                   "with the centre-of-energy "
                   "fit of a common vector potential shifted by each line's delay (the cross-check "
                   "of the joint fit).");
  }
  std::vector<std::vector<std::string>> settings;
  for (const Param& p : res.extra) settings.push_back({p.key, param_text(p)});
  rep.add_table({"setting / step", "value"}, settings, "Preprocessing, settings and provenance");
  rep.add_preformatted(rec.full_report());
  rep.add_paragraph(
      "Safety: this report analyses recorded data only. Local laser-safety rules and the "
      "facility's procedures for intense lasers, XUV beams and detector high voltage come first.");
  rep.write(path("report.html"));
  write_result_json(path("result.json"), res);
}

}  // namespace sw
