#pragma once
// Small JSON or YAML files written by people (batch manifests, batch configs) read into one
// nlohmann::json tree. JSON (RFC 8259) is parsed strictly by nlohmann; YAML (.yaml / .yml) with
// cv::FileStorage, the reader of the trace contract (a missing "%YAML" directive is supplied).
// Errors are sw::Error(kUsage) naming the file and the parser's reason: these files are part of
// the command line, so a defect is bad usage, reported before any scan starts.

#include <string>

#include <nlohmann/json.hpp>

namespace sw::cli {

/// Reads `path` (.json, .yaml or .yml); `what` names the file's role in messages ("manifest").
nlohmann::json read_structured_file(const std::string& path, const std::string& what);

}  // namespace sw::cli
