#include "retrieval/core/trace.h"

#include <cmath>
#include <sstream>

#include "retrieval/core/enum_names.h"
#include "retrieval/core/error.h"

namespace sw {

constexpr EnumNames<TraceKind, 4> kTraceKindNames{{{{TraceKind::kUnknown, ""},
                                                    {TraceKind::kStreaking, "streaking"},
                                                    {TraceKind::kRabbitt, "rabbitt"},
                                                    {TraceKind::kXuvOnly, "xuv_only"}}}};

SW_ENUM_NAME_FUNCTIONS(TraceKind, parse_trace_kind, kTraceKindNames)

constexpr EnumNames<TraceFormat, 3> kTraceFormatNames{
    {{{TraceFormat::kPng16, "png16"}, {TraceFormat::kTiff, "tiff"}, {TraceFormat::kCsv, "csv"}}}};

SW_ENUM_NAME_FUNCTIONS(TraceFormat, parse_trace_format, kTraceFormatNames)

void Trace::validate(const std::string& where) const {
  auto fail = [&](const std::string& m) { throw input_error(where + ": " + m); };
  if (counts.rows() != static_cast<Eigen::Index>(delay_au.size()))
    fail("delay axis has " + std::to_string(delay_au.size()) + " values but the data has " +
         std::to_string(counts.rows()) + " delay rows");
  if (counts.cols() != static_cast<Eigen::Index>(energy_au.size()))
    fail("energy axis has " + std::to_string(energy_au.size()) + " values but the data has " +
         std::to_string(counts.cols()) + " energy columns");
  auto ascending = [&](const std::vector<double>& v, const char* name) {
    for (std::size_t i = 0; i < v.size(); ++i) {
      if (!std::isfinite(v[i]))
        fail(std::string(name) + " value " + std::to_string(i) + " is not finite");
      if (i > 0 && !(v[i] > v[i - 1]))
        fail(std::string(name) + " is not strictly increasing at index " + std::to_string(i));
    }
  };
  ascending(energy_au, "energy axis");
  ascending(delay_au, "delay axis");
  for (Eigen::Index i = 0; i < counts.rows(); ++i)
    for (Eigen::Index j = 0; j < counts.cols(); ++j) {
      const double c = counts(i, j);
      if (!std::isfinite(c)) {
        std::ostringstream s;
        s << "data value at delay row " << i << ", energy column " << j
          << " is not finite (NaN or inf); expected counts >= 0";
        fail(s.str());
      }
      if (c < 0) {
        std::ostringstream s;
        s << "data value at delay row " << i << ", energy column " << j << " is negative (" << c
          << "); expected counts >= 0";
        fail(s.str());
      }
    }
}

}  // namespace sw
