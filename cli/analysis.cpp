#include "cli/analysis.h"

#include <cctype>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <sstream>

#include "cli/output_folder.h"
#include "cli/progress.h"
#include "cli/provenance.h"
#include "io/classify_outputs.h"
#include "io/input_guard.h"
#include "io/rabbitt_outputs.h"
#include "io/retrieval_outputs.h"
#include "io/trace_reader.h"
#include "retrieval/core/enum_names.h"
#include "retrieval/core/error.h"

namespace sw::cli {

constexpr EnumNames<AnalysisKind, 4> kAnalysisKindNames{{{{AnalysisKind::kAuto, "auto"},
                                                          {AnalysisKind::kRetrieve, "retrieve"},
                                                          {AnalysisKind::kRabbitt, "rabbitt"},
                                                          {AnalysisKind::kClassify, "classify"}}}};

SW_ENUM_NAME_FUNCTIONS(AnalysisKind, parse_analysis_kind, kAnalysisKindNames)

TraceReadOverrides read_overrides(const ScanOverrides& o) {
  TraceReadOverrides r;
  r.gas = o.gas;
  r.ir_wavelength_nm = o.ir_wavelength_nm;
  if (o.kind) {
    TraceKind k;
    if (!parse_trace_kind(*o.kind, &k))
      throw usage_error("override kind '" + *o.kind + "': expected streaking, rabbitt or xuv_only");
    r.kind = k;
  }
  return r;
}

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

RabbittAnalysisOptions rabbitt_options(const ScanJob& job) {
  RabbittAnalysisOptions o = job.rabbitt;
  o.classifier.satellite_ratio = job.retrieve.satellite_ratio;
  o.preprocess = job.retrieve.preprocess;
  o.quality = job.retrieve.quality;
  o.xuv_only_name = job.xuv_only_sidecar;
  return o;
}

ClassifyAnalysisOptions classify_options(const ScanJob& job) {
  ClassifyAnalysisOptions o = job.classify;
  o.retrieve_options = job.retrieve;
  if (job.overrides.engine) o.retrieve_options.engine = *job.overrides.engine;
  return o;
}

Error scan_error(const Error& e, const std::string& sidecar) {
  std::string message = e.what();
  // Every message names the file (an engine's own message may not).
  if (const std::string shown = printable_path(sidecar); !sidecar.empty() &&
                                                         message.find(shown) == std::string::npos &&
                                                         message.find(sidecar) == std::string::npos)
    message = "scan '" + shown + "': " + message;
  if (e.kind() == ErrorKind::kNumeric)  // nothing was written: not the exit 4 of a result
    return Error(ErrorKind::kInput,
                 message + " (no estimate could be computed from this input; nothing was written)");
  return Error(e.kind(), message);
}

namespace {

// Provenance goes last into every result (after the analysis' settings echo).
void add_provenance(AnalysisResult& r, const std::vector<Param>& prov, const std::string& sidecar) {
  if (r.input.empty()) r.input = sidecar;
  for (const Param& p : prov) r.extra.push_back(p);
}

}  // namespace

ScanOutcome run_scan(const ScanJob& job) {
  ScanOutcome o;
  const auto t0 = std::chrono::steady_clock::now();
  try {
    // Overrides are applied by the reader (a time-of-flight fit needs the gas, wavelength and
    // kind the analysis will use).
    const Trace trace =
        read_trace(job.sidecar, nullptr, read_overrides(job.overrides), job.read_policy);
    if (job.after_read) job.after_read(trace);
    const AnalysisKind kind =
        job.analysis == AnalysisKind::kAuto ? auto_analysis(trace) : job.analysis;
    o.analysis_run = kind;
    std::vector<Param> prov = provenance(job.sidecar, trace.meta.image, to_string(kind));
    // The calibration of a time-of-flight axis (calibration.*) goes into every result.
    for (const Param& p : trace.meta.calibration) prov.push_back(p);
    for (const Param& p : job.extra_provenance) prov.push_back(p);
    const AnalysisProgress progress = job.progress;
    if (kind == AnalysisKind::kRetrieve) {
      RetrieveOptions ro = job.retrieve;
      if (job.overrides.engine) ro.engine = *job.overrides.engine;
      RetrieveOutput out = analyse_retrieve(trace, ro, progress);
      add_provenance(out.result, prov, job.sidecar);
      write_retrieval_outputs(trace, out, job.out_dir, job.figure_format);
      o.result = out.result;
      o.exit_code = out.reconstruction.converged() ? 0 : 4;
    } else if (kind == AnalysisKind::kRabbitt) {
      std::optional<Trace> xuv_only;
      if (!job.xuv_only_sidecar.empty())
        xuv_only = read_trace(job.xuv_only_sidecar, nullptr, {}, job.read_policy);
      RabbittOutput out =
          analyse_rabbitt(trace, xuv_only ? &*xuv_only : nullptr, rabbitt_options(job), progress);
      add_provenance(out.result, prov, job.sidecar);
      write_rabbitt_outputs(out.trace, out.analysis, out.burst ? &*out.burst : nullptr, out.result,
                            job.out_dir, job.figure_format);
      o.result = out.result;
    } else {
      ClassifyOutput out = analyse_classify(trace, classify_options(job), progress);
      add_provenance(out.result, prov, job.sidecar);
      write_classify_outputs(out.trace, out.result,
                             out.retrieval ? &out.retrieval->reconstruction : nullptr,
                             out.ir_wavelength_nm, job.out_dir, job.figure_format);
      o.result = out.result;
    }
    o.ok = true;
    if (const std::string bad = find_non_finite_output(job.out_dir); !bad.empty())
      throw input_error(
          "the analysis produced non-finite numbers (NaN or infinity) from this "
          "input, in '" +
          printable_path(bad) +
          "'; no estimate can be written (check the counts and 'scale' of the "
          "sidecar '" +
          printable_path(job.sidecar) + "')");
  } catch (const Error& e) {
    o.ok = false;
    const Error shown = scan_error(e, job.sidecar);
    o.message = shown.what();
    o.exit_code = shown.exit_code();
    o.error_kind = shown.kind();
  } catch (const std::exception& e) {
    o.ok = false;
    o.message = std::string("internal error: ") + e.what();
    o.exit_code = 1;
  }
  o.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  return o;
}

std::string find_non_finite_output(const std::string& dir) {
  namespace fs = std::filesystem;
  std::error_code ec;
  for (fs::recursive_directory_iterator it(dir, ec), end; !ec && it != end; it.increment(ec)) {
    const std::string ext = it->path().extension().string();
    if (!it->is_regular_file(ec) || (ext != ".csv" && ext != ".json")) continue;
    std::string text;
    try {
      text = read_regular_file(it->path().string(), limits::kMaxDataFileBytes, "output");
    } catch (const Error&) {
      continue;
    }
    const bool json = ext == ".json";
    bool in_string = false, escaped = false;
    for (std::size_t i = 0; i < text.size(); ++i) {
      if (json && in_string) {  // JSON text values are words, not numbers
        if (escaped)
          escaped = false;
        else if (text[i] == '\\')
          escaped = true;
        else if (text[i] == '"')
          in_string = false;
        continue;
      }
      if (json && text[i] == '"') {
        in_string = true;
        continue;
      }
      const char c = static_cast<char>(std::tolower(static_cast<unsigned char>(text[i])));
      if (c != 'n' && c != 'i') continue;
      if (i > 0 && (std::isalnum(static_cast<unsigned char>(text[i - 1])) || text[i - 1] == '_'))
        continue;
      std::size_t j = i;
      while (j < text.size() && std::isalpha(static_cast<unsigned char>(text[j]))) ++j;
      std::string word = text.substr(i, j - i);
      for (char& w : word) w = static_cast<char>(std::tolower(static_cast<unsigned char>(w)));
      if ((word == "nan" || word == "inf" || word == "infinity") &&
          (j == text.size() ||
           !(std::isalnum(static_cast<unsigned char>(text[j])) || text[j] == '_'))) {
        // Inside a JSON string ("name": "inf...") is text, not a number: require the token to
        // follow a separator of numbers.
        const char before = i == 0 ? ',' : text[i - 1];
        if (before == ',' || before == ' ' || before == '\n' || before == '-' || before == '+' ||
            before == ':' || before == '[' || before == '\t' || before == ';')
          return it->path().string();
      }
      i = j - 1;
    }
  }
  return "";
}

ScanOutcome run_scan_or_throw(ScanJob job) {
  // Everything about the output folder is settled before any work (exit 2).
  {
    std::vector<std::string> inputs = {job.sidecar, sidecar_data_file(job.sidecar)};
    if (!job.xuv_only_sidecar.empty()) {
      inputs.push_back(job.xuv_only_sidecar);
      inputs.push_back(sidecar_data_file(job.xuv_only_sidecar));
    }
    check_output_folder(job.out_dir, inputs, {});
  }
  OutputSwap swap(job.out_dir);
  const std::string final_out = job.out_dir;
  job.out_dir = swap.temp();
  // The data file as the reader resolved it (the sidecar may be in a dialect only it reads).
  job.after_read = [final_out, sidecar = job.sidecar](const Trace& t) {
    std::string image = t.meta.image;
    if (const auto colon = image.find(":/"); colon != std::string::npos) image.resize(colon);
    const std::filesystem::path q(image), base = std::filesystem::path(sidecar).parent_path();
    check_output_folder(final_out, {(q.is_absolute() || base.empty() ? q : base / q).string()}, {});
  };
  InterruptScope interrupts;
  Progress progress(job.quiet);
  job.progress = [&](const std::string& stage, const std::string& m) {
    if (InterruptScope::signal_received()) throw Error(ErrorKind::kInternal, "interrupted");
    progress.update(stage, m);
  };
  ScanOutcome o = run_scan(job);
  progress.done();
  if (const int sig = InterruptScope::signal_received())
    throw InterruptedError(std::string("interrupted by ") +
                               (sig == SIGTERM ? "SIGTERM" : "SIGINT") +
                               "; the analysis stopped and nothing was written ('" +
                               printable_path(final_out) + "' is unchanged)",
                           InterruptScope::exit_code());
  if (!o.ok) throw Error(o.error_kind, o.message);
  swap.commit();
  // An untrusted result is still a result (exit code unchanged, docs/cli.md), but the user is
  // told, whatever --quiet says.
  if (o.result.quality && !o.result.quality->trusted) {
    std::string failed;
    for (const auto& c : o.result.quality->checks)
      if (!c.pass && c.guards_headline) failed += (failed.empty() ? "" : ", ") + c.name;
    std::fprintf(stderr,
                 "streakwright %s: warning: the result is not trusted (failed checks: %s); see "
                 "quality in result.json\n",
                 to_string(o.analysis_run), failed.c_str());
  }
  return o;
}

}  // namespace sw::cli
