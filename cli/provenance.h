#pragma once
// Provenance recorded in every result: program version, command, input path and content
// hash, and the time of the analysis (UTC, ISO 8601).

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "retrieval/core/result.h"

namespace sw::cli {

/// 64-bit FNV-1a (Fowler, Noll and Vo; the offset basis and prime of the published 64-bit
/// variant): h is the running hash, start with kFnv1a64Offset.
inline constexpr std::uint64_t kFnv1a64Offset = 14695981039346656037ULL;
std::uint64_t fnv1a64_update(std::uint64_t h, std::string_view bytes);

/// 64-bit FNV-1a (hex) of the sidecar bytes followed by the data file's bytes; `image` is the
/// sidecar's "image" value (relative to the sidecar's folder; "FILE.h5:/dataset" hashes FILE.h5).
std::string input_hash(const std::string& sidecar_path, const std::string& image);
std::vector<Param> provenance(const std::string& sidecar_path, const std::string& image,
                              const std::string& command);

}  // namespace sw::cli
