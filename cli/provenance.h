#pragma once
// Provenance recorded in every result: program version, command, input path and content
// hash, and the time of the analysis (UTC, ISO 8601).

#include <string>
#include <vector>

#include "retrieval/result.h"

namespace sw::cli {

/// 64-bit FNV-1a (hex) of the sidecar bytes followed by the data file's bytes; `image` is the
/// sidecar's "image" value (relative to the sidecar's folder; "FILE.h5:/dataset" hashes FILE.h5).
std::string input_hash(const std::string& sidecar_path, const std::string& image);
std::vector<Param> provenance(const std::string& sidecar_path, const std::string& image,
                              const std::string& command);

}  // namespace sw::cli
