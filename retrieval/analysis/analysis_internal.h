#pragma once
// Internals shared by the analyses' files (classifier.cpp, rabbitt.cpp, classify_analysis.cpp,
// rabbitt_analysis.cpp); not part of their interfaces.

#include <string>
#include <vector>

#include "retrieval/core/error.h"
#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"
#include "retrieval/preprocess/preprocess.h"

namespace sw::analysis_detail {

/// The IR wavelength (nm) an analysis uses: `option_nm` when > 0, else the trace's. Throws
/// sw::Error(kInput) "<where>: field 'ir_wavelength_nm' is missing or not > 0; the <needs>"
/// when neither is > 0.
inline double ir_wavelength_nm_or_throw(double option_nm, const Trace& trace,
                                        const std::string& where, const char* needs) {
  const double lambda = option_nm > 0 ? option_nm : trace.meta.ir_wavelength_nm;
  if (!(lambda > 0.0))
    throw input_error(where + ": field 'ir_wavelength_nm' is missing or not > 0; the " + needs);
  return lambda;
}

/// result.json "lines" of an analysis that does not preprocess: scan_lines(); when it finds none
/// for a reason, "photoelectron lines not listed: <reason>" is added to `warnings`.
inline std::vector<LineEntry> scan_lines_or_warn(const Trace& trace,
                                                 const PreprocessOptions& options,
                                                 std::vector<std::string>& warnings) {
  std::string why;
  std::vector<LineEntry> lines = scan_lines(trace, options, &why);
  if (lines.empty() && !why.empty()) warnings.push_back("photoelectron lines not listed: " + why);
  return lines;
}

}  // namespace sw::analysis_detail
