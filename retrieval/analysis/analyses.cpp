#include "retrieval/analysis/analyses.h"

#include <sstream>

namespace sw {

void add_input_warnings(const Trace& trace, std::vector<std::string>& warnings) {
  warnings.insert(warnings.end(), trace.meta.read_warnings.begin(), trace.meta.read_warnings.end());
}

void add_sidecar_extras(const Trace& trace, AnalysisResult& result) {
  for (const auto& [k, v] : trace.meta.extra_json) result.extra_json["sidecar." + k] = v;
}

RetrieveOutput analyse_retrieve(const Trace& scan, const RetrieveOptions& options,
                                const AnalysisProgress& progress) {
  RetrieveOutput out =
      retrieve(scan, options, [&](const std::string& stage, const IterationRecord& r) {
        if (!progress) return;
        std::ostringstream m;
        m.precision(4);
        m << "iteration " << r.iteration << ", G = " << r.trace_error << ", " << r.seconds << " s";
        progress(stage, m.str());
      });
  add_input_warnings(scan, out.result.warnings);
  add_sidecar_extras(scan, out.result);
  return out;
}

}  // namespace sw
