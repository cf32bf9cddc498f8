// Subcommands whose implementation lands in later changes register here until then.
#include "cli/commands.h"

namespace sw::cli {
void add_rabbitt_command(CLI::App&) {}
void add_classify_command(CLI::App&) {}
}  // namespace sw::cli
#include "cli/analysis.h"
#include "retrieval/error.h"
namespace sw::cli {
AnalysisResult run_rabbitt_analysis(const Trace&, const ScanJob&, const std::vector<Param>&) {
  throw Error(ErrorKind::kUsage, "the rabbitt analysis is not built into this version");
}
AnalysisResult run_classify_analysis(const Trace&, const ScanJob&, const std::vector<Param>&) {
  throw Error(ErrorKind::kUsage, "the classify analysis is not built into this version");
}
AnalysisKind auto_analysis(const Trace& t) {
  return t.meta.kind == TraceKind::kRabbitt ? AnalysisKind::kRabbitt : AnalysisKind::kRetrieve;
}
}  // namespace sw::cli
