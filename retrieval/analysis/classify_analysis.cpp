// analyse_classify (retrieval/analysis/analyses.h): the verdict pipeline of `streakwright
// classify`.
#include <sstream>

#include "retrieval/analysis/analyses.h"
#include "retrieval/analysis/analysis_internal.h"
#include "retrieval/core/error.h"
#include "retrieval/preprocess/lines.h"

namespace sw {

namespace {
constexpr double kFallbackWavelength_nm = 800.0;
}  // namespace

ClassifierOptions effective_classifier_options(const ClassifyAnalysisOptions& options) {
  ClassifierOptions c = options.classifier;
  c.satellite_ratio = options.retrieve_options.satellite_ratio;
  return c;
}

std::string ClassifyAnalysisOptions::validate() const {
  if (const std::string e = validate_described(*this); !e.empty()) return e;
  if (const std::string e = effective_classifier_options(*this).validate(); !e.empty())
    return "classify thresholds: " + e;
  return "";
}

double classifier_wavelength(const Trace& trace, ClassifierOptions* co,
                             std::vector<std::string>* warnings) {
  if (co->ir_wavelength_nm > 0) return co->ir_wavelength_nm;
  if (trace.meta.ir_wavelength_nm > 0) return trace.meta.ir_wavelength_nm;
  if (trace.meta.kind == TraceKind::kXuvOnly) {
    co->ir_wavelength_nm = kFallbackWavelength_nm;
    if (warnings)
      warnings->push_back(
          "the xuv_only sidecar gives no ir_wavelength_nm (the driver wavelength): 800 nm is "
          "assumed for the burst spacing T/2; give ir_wavelength_nm in the sidecar or "
          "--ir-wavelength");
    return kFallbackWavelength_nm;
  }
  return 0.0;  // classify() reports the missing field
}

ClassifyOutput analyse_classify(const Trace& scan, const ClassifyAnalysisOptions& options,
                                const AnalysisProgress& progress) {
  ClassifyOutput out;
  // An explicit window (option, else sidecar) applies to the evidence and to the retrieval alike.
  const PreprocessOptions& pp = options.retrieve_options.preprocess;
  out.trace = apply_energy_window(scan, pp.energy_window_lo_eV, pp.energy_window_hi_eV, nullptr);
  const Trace& trace = out.trace;
  if (const std::string e = options.validate(); !e.empty()) throw usage_error(e);
  ClassifierOptions co = effective_classifier_options(options);
  AnalysisResult& res = out.result;
  res.input = trace.meta.source;
  res.analysis = "classify";
  add_input_warnings(trace, res.warnings);
  const double lambda = classifier_wavelength(trace, &co, &res.warnings);
  out.ir_wavelength_nm = lambda;

  std::optional<RetrieveOutput>& ret = out.retrieval;
  if (options.retrieve) {
    if (trace.meta.kind == TraceKind::kXuvOnly || trace.num_delays() < 8) {
      res.warnings.push_back("--retrieve ignored: the scan has no delay scan to retrieve from (" +
                             std::to_string(trace.num_delays()) + " delay row(s))");
    } else {
      RetrieveOptions ro = options.retrieve_options;
      ro.bootstrap = 0;
      if (progress) progress("classify", "streaking retrieval");
      ret = retrieve(trace, ro, [&](const std::string& stage, const IterationRecord& r) {
        if (!progress) return;
        std::ostringstream m;
        m.precision(4);
        m << "iteration " << r.iteration << ", G = " << r.trace_error;
        progress(stage, m.str());
      });
      res.engine = ret->result.engine;
      res.xuv = ret->result.xuv;
      res.ir = ret->result.ir;
      res.fit = ret->result.fit;
      for (const auto& w : ret->result.warnings)
        if (w.find("bootstrap") == std::string::npos) res.warnings.push_back("retrieval: " + w);
      for (const Param& p : ret->result.extra) res.extra.push_back({"retrieval." + p.key, p.value});
    }
  }
  if (progress) progress("classify", "evidence");
  res.verdict = classify(trace, co, ret ? &ret->reconstruction : nullptr);
  // Lines (DESIGN.md "lines"): from the retrieval when it ran, else as preprocessing finds them.
  if (ret && !ret->result.lines.empty()) {
    res.lines = ret->result.lines;
  } else {
    res.lines = analysis_detail::scan_lines_or_warn(trace, pp, res.warnings);
  }
  res.quality = classify_quality(trace.counts, trace.meta.background.value_or(0.0), *res.verdict,
                                 ret && ret->result.quality ? &*ret->result.quality : nullptr,
                                 options.retrieve_options.quality);

  auto P = [&](const std::string& k, auto v) { res.extra.push_back({k, v}); };
  P("settings.ir_wavelength_nm", lambda);
  append_settings_echo(options, &res.extra);
  add_sidecar_extras(trace, res);
  return out;
}

}  // namespace sw
