// `streakwright classify SCAN.json --out DIR`: isolated pulse, isolated pulse with satellites,
// pulse train or undetermined, with every piece of evidence reported. Also the automatic
// choice of analysis used by batch (auto_analysis).
#include <cstdio>
#include <filesystem>
#include <memory>
#include <sstream>

#include "cli/analysis.h"
#include "cli/commands.h"
#include "cli/option_checks.h"
#include "io/classify_outputs.h"
#include "retrieval/classifier.h"
#include "retrieval/engine.h"
#include "retrieval/error.h"
#include "retrieval/quality.h"
#include "retrieval/lines.h"
#include "retrieval/retrieve.h"

namespace sw::cli {

ClassifierOptions classifier_options_for(const ScanJob& job);  // cli/cmd_rabbitt.cpp

namespace {

constexpr double kFallbackWavelength_nm = 800.0;

// The wavelength the classifier needs: option, sidecar, or (xuv_only scans only) 800 nm.
// Returns the wavelength and appends a warning when it was assumed.
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

}  // namespace

AnalysisKind auto_analysis(const Trace& t) {
  switch (t.meta.kind) {
    case TraceKind::kRabbitt:
      return AnalysisKind::kRabbitt;
    case TraceKind::kStreaking:
      return AnalysisKind::kRetrieve;
    case TraceKind::kXuvOnly:
      return AnalysisKind::kClassify;
    default:
      break;
  }
  // No kind: the spectral evidence decides (a harmonic comb or train-like fringes -> rabbitt).
  try {
    ClassifierOptions co;
    if (!(classifier_wavelength(t, &co, nullptr) > 0)) return AnalysisKind::kRetrieve;
    const VerdictSection v = classify(t, co, nullptr);
    for (const Param& p : v.evidence)
      if (p.key == "spectrum.class") {
        const auto* s = std::get_if<std::string>(&p.value);
        return s && *s == to_string(PulseClass::kTrain) ? AnalysisKind::kRabbitt
                                                        : AnalysisKind::kRetrieve;
      }
    return v.pulse_class == PulseClass::kTrain ? AnalysisKind::kRabbitt : AnalysisKind::kRetrieve;
  } catch (const Error&) {
    return AnalysisKind::kRetrieve;  // retrieve reports what is missing
  }
}

AnalysisResult run_classify_analysis(const Trace& scan, const ScanJob& job,
                                     const std::vector<Param>& prov) {
  // An explicit window (option, else sidecar) applies to the evidence and to --retrieve alike.
  const PreprocessOptions& pp = job.retrieve.preprocess;
  const Trace trace = apply_energy_window(scan, pp.energy_window_lo_eV, pp.energy_window_hi_eV, nullptr);
  ClassifierOptions co = classifier_options_for(job);
  if (const std::string e = co.validate(); !e.empty())
    throw usage_error("classify thresholds: " + e);
  AnalysisResult res;
  res.input = trace.meta.source.empty() ? job.sidecar : trace.meta.source;
  res.analysis = "classify";
  add_input_warnings(trace, res.warnings);
  const double lambda = classifier_wavelength(trace, &co, &res.warnings);

  std::optional<RetrieveOutput> ret;
  if (job.classify_retrieve) {
    if (trace.meta.kind == TraceKind::kXuvOnly || trace.num_delays() < 8) {
      res.warnings.push_back("--retrieve ignored: the scan has no delay scan to retrieve from (" +
                             std::to_string(trace.num_delays()) + " delay row(s))");
    } else {
      RetrieveOptions ro = job.retrieve;
      if (job.overrides.engine) ro.engine = *job.overrides.engine;
      ro.bootstrap = 0;
      if (job.progress) job.progress("classify", "streaking retrieval");
      ret = retrieve(trace, ro, [&](const std::string& stage, const IterationRecord& r) {
        if (!job.progress) return;
        std::ostringstream m;
        m.precision(4);
        m << "iteration " << r.iteration << ", G = " << r.trace_error;
        job.progress(stage, m.str());
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
  if (job.progress) job.progress("classify", "evidence");
  res.verdict = classify(trace, co, ret ? &ret->reconstruction : nullptr);
  // Lines (DESIGN.md "lines"): from the retrieval when it ran, else as preprocessing finds them.
  if (ret && !ret->result.lines.empty()) {
    res.lines = ret->result.lines;
  } else {
    std::string why;
    res.lines = scan_lines(trace, pp, &why);
    if (res.lines.empty() && !why.empty()) res.warnings.push_back("photoelectron lines not listed: " + why);
  }
  res.quality = classify_quality(trace.counts, trace.meta.background.value_or(0.0), *res.verdict,
                                 ret && ret->result.quality ? &*ret->result.quality : nullptr, job.retrieve.quality);

  auto P = [&](const std::string& k, auto v) { res.extra.push_back({k, v}); };
  P("settings.ir_wavelength_nm", lambda);
  P("settings.isolated_max_satellite_ratio", co.isolated_max_satellite_ratio);
  P("settings.satellites_max_satellite_ratio", co.satellite_max_ratio);
  P("settings.train_min_comparable_bursts", static_cast<long long>(co.train_min_comparable_bursts));
  P("settings.comb_min_period_contrast", co.comb_min_period_contrast);
  P("settings.delay_train_min_share", co.delay_train_min_share);
  P("settings.delay_streaking_max_share", co.delay_streaking_max_share);
  P("settings.min_total_counts", co.min_total_counts);
  P("settings.retrieve", job.classify_retrieve);
  for (const Param& p : prov) res.extra.push_back(p);
  for (const auto& [k, v] : trace.meta.extra_json) res.extra_json["sidecar." + k] = v;
  write_classify_outputs(trace, res, ret ? &ret->reconstruction : nullptr, lambda, job.out_dir,
                         job.figure_format);
  return res;
}

namespace {

struct ClassifyArgs {
  std::string scan, out, gas, engine = "auto";
  double wavelength_nm = 0.0;
  bool retrieve = false, quiet = false;
  bool allow_outside_data = false;
  int iterations = 0;
  RetrieveOptions retrieve_options;
  ClassifierOptions options;
  std::string energy_window;
  plot::FigureFormat figure_format = plot::FigureFormat::kPng;
};

int run_classify(ClassifyArgs& a) {
  ScanJob job;
  job.sidecar = a.scan;
  job.out_dir = a.out;
  job.analysis = AnalysisKind::kClassify;
  job.classify_retrieve = a.retrieve;
  job.classifier = a.options;
  job.retrieve = a.retrieve_options;
  if (!a.energy_window.empty())
    parse_energy_window(a.energy_window, "--energy-window", &job.retrieve.preprocess.energy_window_lo_eV,
                        &job.retrieve.preprocess.energy_window_hi_eV);
  job.retrieve.engine = a.engine;
  job.retrieve.iterations = a.iterations;
  job.retrieve.bootstrap = 0;
  // One place for the satellite thresholds (analysis.h): the retrieve options.
  job.retrieve.isolated_max_satellite_ratio = a.options.isolated_max_satellite_ratio;
  job.retrieve.satellites_max_satellite_ratio = a.options.satellite_max_ratio;
  if (const std::string e = a.options.validate(); !e.empty()) throw usage_error(e);
  if (a.engine != "auto") (void)make_engine(a.engine);  // unknown names listed
  if (a.wavelength_nm != 0) job.overrides.ir_wavelength_nm = a.wavelength_nm;  // checked by CLI11
  if (!a.gas.empty()) job.overrides.gas = a.gas;
  job.quiet = a.quiet;
  job.figure_format = a.figure_format;
  job.read_policy.allow_outside_data = a.allow_outside_data;
  const ScanOutcome o = run_scan_or_throw(job);
  const VerdictSection& v = *o.result.verdict;
  std::printf("class: %s\n", to_string(v.pulse_class));
  std::printf("reason: %s\n", v.reason.c_str());
  for (const Param& p : v.evidence)
    std::printf("  %s = %s\n", p.key.c_str(), param_text(p, 5, " ").c_str());
  if (!a.quiet)
    for (const auto& w : o.result.warnings)
      std::fprintf(stderr, "streakwright classify: warning: %s\n", w.c_str());
  std::printf("report: %s\n", (std::filesystem::path(a.out) / "report.html").string().c_str());
  return o.exit_code;
}

}  // namespace

void add_classify_command(CLI::App& app) {
  auto a = std::make_shared<ClassifyArgs>();
  auto* cmd = app.add_subcommand(
      "classify", "Decide isolated pulse, isolated with satellites, or pulse train from a scan");
  cmd->footer(
      "Evidence (each value printed and written to result.json verdict.evidence):\n"
      "  spectrum.*   fringe contrast of the photoelectron spectrum at 2 hbar omega (bursts\n"
      "               T/2 apart) and hbar omega (T apart): a satellite-ratio estimate, or a\n"
      "               harmonic comb;\n"
      "  delay.*      share of 2 omega (sideband) versus omega (streaking) oscillation in delay;\n"
      "  retrieval.*  with --retrieve: satellites of the reconstructed XUV field (the streaking\n"
      "               retrieval runs first, without bootstrap).\n"
      "Classes: isolated (largest satellite <= --isolated-max of the main burst's peak),\n"
      "isolated_with_satellites (below --satellites-max), train (>= --comparable-bursts bursts\n"
      "or a harmonic comb), undetermined (evidence disagrees or signal too weak). Default\n"
      "thresholds: common practice, no published standard.\n"
      "An xuv_only scan without ir_wavelength_nm is read with 800 nm (warned).\n"
      "Writes into DIR: result.json, evidence.csv, PNG figures and report.html.\n"
      "Exit 0 ok, 2 bad usage, 3 bad input, 4 numerical failure.");
  cmd->add_option("scan", a->scan, "sidecar of the scan (NAME.json or NAME.yaml)")->required();
  cmd->add_option("--out,-o", a->out, "output folder (created)")->required();
  cmd->add_flag("--retrieve", a->retrieve,
                "run the streaking retrieval first and use the reconstructed bursts");
  cmd->add_option("--engine", a->engine, "engine of --retrieve (see `retrieve --help`)")
      ->capture_default_str();
  cmd->add_option("--iterations", a->iterations, "iterations of --retrieve; 0 = engine default")
      ->capture_default_str();
  cmd->add_option("--ir-wavelength", a->wavelength_nm,
                  "IR (driver) wavelength in nm (overrides the sidecar)")
      ->check(ir_wavelength_nm_check());
  cmd->add_option("--gas", a->gas, "target gas (overrides the sidecar; used by --retrieve)");
  cmd->add_option("--energy-window", a->energy_window,
                  "analyse only photoelectron energies LO:HI (eV); overrides the sidecar's energy_window_eV");
  cmd->add_option("--isolated-max", a->options.isolated_max_satellite_ratio,
                  "largest satellite / main-burst peak intensity for 'isolated'")
      ->capture_default_str();
  cmd->add_option("--satellites-max", a->options.satellite_max_ratio,
                  "upper limit of the satellite ratio for 'isolated_with_satellites'")
      ->capture_default_str();
  cmd->add_option("--comparable-bursts", a->options.train_min_comparable_bursts,
                  "reconstructed bursts >= 50 % of the main one that make a train")
      ->capture_default_str();
  cmd->add_option("--comb-contrast", a->options.comb_min_period_contrast,
                  "fringe contrast at period T above which the spectrum is a harmonic comb")
      ->capture_default_str();
  cmd->add_option("--delay-train-share", a->options.delay_train_min_share,
                  "2 omega share above which the delay oscillation is train-like")
      ->capture_default_str();
  cmd->add_option("--delay-streaking-share", a->options.delay_streaking_max_share,
                  "2 omega share below which the delay oscillation is streaking-like")
      ->capture_default_str();
  cmd->add_option("--min-counts", a->options.min_total_counts,
                  "fewer counts in the whole scan give 'undetermined'")
      ->capture_default_str();
  add_figure_format_option(cmd, &a->figure_format);
  cmd->add_flag("--quiet,-q", a->quiet, "no progress or warnings on stderr");
  cmd->add_flag("--allow-outside-data", a->allow_outside_data,
                "read a data file outside the sidecar's folder tree (refused by default)");
  check_numeric_options(cmd);
  cmd->callback([a] { exit_code() = guarded("classify", [&] { return run_classify(*a); }); });
}

}  // namespace sw::cli
