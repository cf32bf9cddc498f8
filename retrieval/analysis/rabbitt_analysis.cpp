// analyse_rabbitt (retrieval/analysis/analyses.h): the RABBITT pipeline of `streakwright rabbitt`.
#include "retrieval/analysis/analyses.h"
#include "retrieval/analysis/analysis_internal.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/atomic_delay.h"
#include "retrieval/preprocess/lines.h"
#include "retrieval/preprocess/preprocess.h"

namespace sw {

namespace {

// The lines section of a rabbitt result from the analysis' lines (rabbitt_lines.h): every line
// present (found in the comb or declared), the reference first; the quality evidence per
// non-reference line.
std::vector<LineEntry> rabbitt_line_entries(const RabbittAnalysis& rb,
                                            std::vector<RabbittLineEvidence>* evidence) {
  std::vector<LineEntry> out;
  const double sigma_peak = rb.comb_model.peak_sigma_eV;
  for (std::size_t k = 0; k < rb.lines.size(); ++k) {
    const RabbittLine& L = rb.lines[k];
    if (!L.present) continue;
    LineEntry e;
    e.name = L.candidate.name;
    e.gas = L.candidate.gas;
    e.ionization_energy_eV = L.candidate.ionization_energy_eV;
    e.reference = L.candidate.reference;
    e.analysed = true;
    e.source = L.source;
    e.overlapped_orders = L.overlapped_orders;
    if (L.nearest_other_peak_eV > 0) e.nearest_other_peak_eV = L.nearest_other_peak_eV;
    // A line whose every sideband overlaps the other's has no separable peaks: no strength.
    const bool inseparable = !L.overlapped_orders.empty() && L.relative.empty();
    if (rb.comb_model.fitted && !(inseparable && !e.reference)) {
      e.relative_strength = L.relative_strength;
      if (!e.reference) e.relative_strength_sigma = L.relative_strength_sigma;
    }
    if (!e.reference) {
      for (const RelativeSidebandDelay& r : L.relative) {
        LineSideband b;
        b.order = r.order;
        b.energy_eV = r.energy_eV;
        b.relative_phase_rad = r.relative_phase_rad;
        b.relative_phase_rad_sigma = r.relative_phase_rad_sigma;
        b.relative_delay_as = r.relative_delay_as;
        b.relative_delay_as_sigma = r.relative_delay_as_sigma;
        if (r.corrected) {
          b.relative_delay_as_corrected = r.relative_delay_as_corrected;
          b.cc_correction_as = r.cc_correction_as;
        }
        e.sidebands.push_back(b);
      }
      if (L.delay) {
        e.delay_method = "rabbitt sidebands";
        e.relative_delay_as = L.delay->mean;
        e.relative_delay_as_sigma = L.delay->sigma;
        e.relative_delay_reduced_chi2 = L.delay->reduced_chi2;
      }
      if (L.delay && L.delay_corrected) {
        e.relative_delay_as_corrected = L.delay_corrected->mean;
        e.relative_delay_as_corrected_sigma = L.delay_corrected->sigma;
        e.clc_correction_as = L.delay->mean - L.delay_corrected->mean;
      }
      if (evidence) {
        RabbittLineEvidence ev;
        ev.line = L.candidate.gas + " " + L.candidate.name;
        ev.sidebands_with_delay = static_cast<int>(L.relative.size());
        ev.separation_sigmas = sigma_peak > 0 ? L.nearest_other_peak_eV / sigma_peak : 0.0;
        if (!L.overlapped_orders.empty())
          ev.why = std::to_string(L.overlapped_orders.size()) + " overlapped";
        const std::size_t weak = L.skipped.size() - L.overlapped_orders.size();
        if (weak > 0) ev.why += (ev.why.empty() ? "" : ", ") + std::to_string(weak) + " too weak";
        evidence->push_back(ev);
      }
    }
    out.push_back(std::move(e));
  }
  return out;
}

}  // namespace

std::string RabbittAnalysisOptions::validate() const {
  if (const std::string e = validate_described(*this); !e.empty()) return e;
  RabbittOptions ro = rabbitt;
  parse_atomic_delay_mode(atomic_correction, &ro.atomic.mode);  // one of the described choices
  if (const std::string e = ro.validate(); !e.empty()) return "rabbitt options: " + e;
  if (const std::string e = train_burst.validate(); !e.empty())
    return "average-burst options: " + e;
  if (const std::string e = classifier.validate(); !e.empty()) return "verdict thresholds: " + e;
  return "";
}

RabbittOutput analyse_rabbitt(const Trace& scan, const Trace* xuv_only,
                              const RabbittAnalysisOptions& options,
                              const AnalysisProgress& progress) {
  RabbittOutput out;
  const PreprocessOptions& pp = options.preprocess;
  std::string window_source;
  out.trace =
      apply_energy_window(scan, pp.energy_window_lo_eV, pp.energy_window_hi_eV, &window_source);
  if (const std::string e = options.validate(); !e.empty()) throw usage_error(e);
  const Trace& trace = out.trace;
  RabbittOptions ro = options.rabbitt;
  parse_atomic_delay_mode(options.atomic_correction, &ro.atomic.mode);  // checked by validate()
  const ClassifierOptions& co = options.classifier;

  if (progress) progress("rabbitt", "sideband fits");
  out.analysis = analyze_rabbitt(trace, ro);
  const RabbittAnalysis& rb = out.analysis;

  AnalysisResult& res = out.result;
  res.input = trace.meta.source;
  res.analysis = "rabbitt";
  res.rabbitt = rb.section;
  res.warnings = rb.warnings;
  add_input_warnings(trace, res.warnings);

  if (xuv_only) {
    for (const auto& w : xuv_only->meta.read_warnings)
      res.warnings.push_back("xuv-only spectrum: " + w);
    if (xuv_only->meta.kind != TraceKind::kXuvOnly && xuv_only->meta.kind != TraceKind::kUnknown)
      res.warnings.push_back("the --xuv-only sidecar " + options.xuv_only_name + " has kind '" +
                             to_string(xuv_only->meta.kind) +
                             "', not xuv_only: its delay-integrated spectrum is used anyway");
  }

  if (progress) progress("rabbitt", "average burst");
  try {
    out.burst = reconstruct_train_burst(trace, rb, options.train_burst, xuv_only);
    fill_rabbitt_section(*out.burst, &*res.rabbitt);
    for (const auto& w : out.burst->warnings) res.warnings.push_back("average burst: " + w);
  } catch (const Error& e) {
    if (e.kind() != ErrorKind::kNumeric) throw;
    res.warnings.push_back(std::string("no average burst: ") + e.what());
  }

  if (progress) progress("rabbitt", "verdict");
  res.verdict = classify(trace, co, nullptr);
  // Lines (DESIGN.md "lines"): those the RABBITT analysis assigned peaks to (rabbitt_lines.h),
  // else as retrieve's preprocessing finds them; the sidebands belong to the reference line.
  std::vector<RabbittLineEvidence> line_evidence;
  if (rb.comb_model.fitted) {
    res.lines = rabbitt_line_entries(rb, &line_evidence);
  } else {
    res.lines = analysis_detail::scan_lines_or_warn(trace, pp, res.warnings);
  }
  res.quality = rabbitt_quality(trace.counts, trace.meta.background.value_or(0.0), *res.rabbitt,
                                options.quality, line_evidence);

  res.extra = rb.params;
  // The energy window analysed (DESIGN.md: preprocess.window_*), when one was applied.
  if (!window_source.empty())
    append_window_params(window_source, units::au_to_eV(trace.energy_au.front()),
                         units::au_to_eV(trace.energy_au.back()), &res.extra);
  auto P = [&](const std::string& k, auto v) { res.extra.push_back({k, v}); };
  if (out.burst) {
    const TrainBurst& b = *out.burst;
    std::vector<double> orders(b.harmonic_orders.begin(), b.harmonic_orders.end());
    P("rabbitt.burst.harmonic_orders", orders);
    P("rabbitt.burst.harmonic_photon_energy_eV", b.harmonic_photon_energy_eV);
    P("rabbitt.burst.harmonic_intensity", b.harmonic_intensity);
    P("rabbitt.burst.harmonic_phase_rad", b.harmonic_phase_rad);
    P("rabbitt.burst.peak_time_as", b.peak_time_as);
    P("rabbitt.burst.spectrum_source", b.spectrum_source);
    P("rabbitt.burst.cross_section", b.cross_section);
    P("rabbitt.burst.monte_carlo_draws", static_cast<long long>(b.monte_carlo_draws));
    P("rabbitt.burst.assumptions", b.assumptions);
  }
  if (!rb.skipped_sidebands.empty()) {
    std::string s;
    for (const auto& k : rb.skipped_sidebands) s += (s.empty() ? "" : "; ") + k;
    P("rabbitt.skipped_sidebands", s);
  }
  append_settings_echo(options, &res.extra);
  if (!options.xuv_only_name.empty()) P("settings.xuv_only", options.xuv_only_name);
  add_sidecar_extras(trace, res);
  return out;
}

}  // namespace sw
