#pragma once
// A tree read by cv::FileStorage (YAML files, and JSON that nlohmann's strict parser refuses) as
// one nlohmann::json tree: the form in which the trace reader (io/trace_sidecar.cpp) and the CLI's
// small structured files (cli/structured_file.cpp: batch manifests and configs) hold it.

#include <string>

#include <nlohmann/json.hpp>
#include <opencv2/core/persistence.hpp>

namespace sw {

/// What filenode_to_json does with a key that appears twice in one mapping.
enum class DuplicateKeys {
  kRefuse,    ///< throw sw::Error(kInput) naming the key (sidecars: the contract has each key once)
  kLastWins,  ///< keep the last value (cv::FileStorage's own reading)
};

/// Integers, reals, strings, sequences and mappings of `n`, recursively; any other node (empty,
/// none) becomes null. The recursion is as deep as the text nests: callers bound that first
/// (io/input_guard.h nesting_depth).
nlohmann::json filenode_to_json(const cv::FileNode& n, DuplicateKeys duplicates);

/// YAML text in the form cv::FileStorage recognises as YAML: "%YAML:1.0" is put in front when the
/// text (after a UTF-8 byte-order mark, then dropped) does not start with a "%YAML" directive
/// (hand-written files usually omit it).
std::string with_yaml_directive(const std::string& text);

}  // namespace sw
