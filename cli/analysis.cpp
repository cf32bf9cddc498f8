#include "cli/analysis.h"

#include <chrono>
#include <cstdio>
#include <sstream>

#include "cli/progress.h"
#include "cli/provenance.h"
#include "io/retrieval_outputs.h"
#include "io/trace_reader.h"
#include "retrieval/error.h"

namespace sw::cli {

const char* to_string(AnalysisKind k) {
  switch (k) {
    case AnalysisKind::kRetrieve: return "retrieve";
    case AnalysisKind::kRabbitt: return "rabbitt";
    case AnalysisKind::kClassify: return "classify";
    default: return "auto";
  }
}

bool parse_analysis_kind(const std::string& s, AnalysisKind* out) {
  if (s == "auto") *out = AnalysisKind::kAuto;
  else if (s == "retrieve") *out = AnalysisKind::kRetrieve;
  else if (s == "rabbitt") *out = AnalysisKind::kRabbitt;
  else if (s == "classify") *out = AnalysisKind::kClassify;
  else return false;
  return true;
}

void apply_overrides(Trace& t, const ScanOverrides& o) {
  if (o.gas) t.meta.gas = *o.gas;
  if (o.ir_wavelength_nm) t.meta.ir_wavelength_nm = *o.ir_wavelength_nm;
  if (o.kind && !parse_trace_kind(*o.kind, &t.meta.kind))
    throw usage_error("override kind '" + *o.kind + "': expected streaking, rabbitt or xuv_only");
}

// Implemented beside their subcommands (cli/cmd_rabbitt.cpp, cli/cmd_classify.cpp).
AnalysisResult run_rabbitt_analysis(const Trace& trace, const ScanJob& job, const std::vector<Param>& prov);
AnalysisResult run_classify_analysis(const Trace& trace, const ScanJob& job, const std::vector<Param>& prov);
AnalysisKind auto_analysis(const Trace& trace);

void add_input_warnings(const Trace& trace, std::vector<std::string>& warnings) {
  warnings.insert(warnings.end(), trace.meta.read_warnings.begin(), trace.meta.read_warnings.end());
}

ScanOutcome run_scan(const ScanJob& job) {
  ScanOutcome o;
  const auto t0 = std::chrono::steady_clock::now();
  try {
    // The reader sees the overrides too: a time-of-flight fit needs the gas, wavelength and
    // kind the analysis will use. An unparsable kind is left to apply_overrides' message.
    TraceReadOverrides read_overrides;
    read_overrides.gas = job.overrides.gas;
    read_overrides.ir_wavelength_nm = job.overrides.ir_wavelength_nm;
    if (TraceKind k; job.overrides.kind && parse_trace_kind(*job.overrides.kind, &k))
      read_overrides.kind = k;
    Trace trace = read_trace(job.sidecar, nullptr, read_overrides);
    apply_overrides(trace, job.overrides);
    std::vector<Param> prov = provenance(job.sidecar, trace.meta.image, "");
    // The calibration of a time-of-flight axis (calibration.*) goes into every result.
    for (const Param& p : trace.meta.calibration) prov.push_back(p);
    AnalysisKind kind = job.analysis == AnalysisKind::kAuto ? auto_analysis(trace) : job.analysis;
    o.analysis_run = kind;
    for (Param& p : prov)
      if (p.key == "provenance.command") p.value = std::string(to_string(kind));
    for (const Param& p : job.extra_provenance) prov.push_back(p);
    if (kind == AnalysisKind::kRetrieve) {
      RetrieveOptions ro = job.retrieve;
      if (job.overrides.engine) ro.engine = *job.overrides.engine;
      RetrieveOutput out = retrieve(trace, ro, [&](const std::string& stage, const IterationRecord& r) {
        if (!job.progress) return;
        std::ostringstream m;
        m.precision(4);
        m << "iteration " << r.iteration << ", G = " << r.trace_error << ", " << r.seconds << " s";
        job.progress(stage, m.str());
      });
      add_input_warnings(trace, out.result.warnings);
      write_retrieval_outputs(trace, out, job.out_dir, prov);
      o.result = out.result;
      for (const Param& p : prov) o.result.extra.push_back(p);
      o.exit_code = out.reconstruction.converged() ? 0 : 4;
    } else if (kind == AnalysisKind::kRabbitt) {
      o.result = run_rabbitt_analysis(trace, job, prov);
    } else {
      o.result = run_classify_analysis(trace, job, prov);
    }
    o.ok = true;
  } catch (const Error& e) {
    o.ok = false;
    o.message = e.what();
    o.exit_code = e.exit_code();
    o.error_kind = e.kind();
  } catch (const std::exception& e) {
    o.ok = false;
    o.message = std::string("internal error: ") + e.what();
    o.exit_code = 1;
  }
  o.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  return o;
}

ScanOutcome run_scan_or_throw(ScanJob job) {
  Progress progress(job.quiet);
  job.progress = [&](const std::string& stage, const std::string& m) { progress.update(stage, m); };
  ScanOutcome o = run_scan(job);
  progress.done();
  if (!o.ok) throw Error(o.error_kind, o.message);
  // An untrusted result is still a result (exit code unchanged, docs/cli.md), but the user is
  // told, whatever --quiet says.
  if (o.result.quality && !o.result.quality->trusted) {
    std::string failed;
    for (const auto& c : o.result.quality->checks)
      if (!c.pass && c.guards_headline) failed += (failed.empty() ? "" : ", ") + c.name;
    std::fprintf(stderr, "streakwright %s: warning: the result is not trusted (failed checks: %s); see quality in result.json\n",
                 to_string(o.analysis_run), failed.c_str());
  }
  return o;
}

}  // namespace sw::cli
