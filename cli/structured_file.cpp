#include "cli/structured_file.h"

#include <filesystem>

#include <opencv2/core/persistence.hpp>

#include "io/atomic_file.h"
#include "io/filenode_json.h"
#include "io/input_guard.h"
#include "retrieval/core/error.h"

namespace sw::cli {

namespace {

using json = nlohmann::json;

std::string lower(std::string s) {
  for (char& c : s) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return s;
}

}  // namespace

nlohmann::json read_structured_file(const std::string& path, const std::string& what) {
  namespace fs = std::filesystem;
  const std::string shown = printable_path(path);
  std::string text;
  try {
    text = read_regular_file(path, limits::kMaxSidecarBytes * 16, what);
  } catch (const Error& e) {
    throw usage_error(what + " '" + shown + "' cannot be read: " + e.what());
  }
  const std::string ext = lower(fs::path(path).extension().string());
  // The YAML reader recurses: bound the nesting before it runs (io/input_guard.h).
  if (int line = 0;
      (nesting_depth(text, ext != ".json", limits::kMaxNestingDepth, &line), line > 0))
    throw usage_error(what + " '" + shown + "' nests deeper than " +
                      std::to_string(limits::kMaxNestingDepth) + " levels at line " +
                      std::to_string(line) + "; expected a flat list of settings");
  if (ext == ".json") {
    try {
      return json::parse(text);
    } catch (const json::exception& e) {
      std::string why = e.what();
      if (const auto p = why.find("] "); p != std::string::npos) why = why.substr(p + 2);
      throw usage_error(what + " '" + shown +
                        "' is not valid JSON (RFC 8259): " + escape_excerpt(why, 200));
    }
  }
  if (ext == ".yaml" || ext == ".yml") {
    try {
      cv::FileStorage fsr(with_yaml_directive(text), cv::FileStorage::READ |
                                                         cv::FileStorage::MEMORY |
                                                         cv::FileStorage::FORMAT_YAML);
      if (!fsr.isOpened()) throw usage_error(what + " '" + path + "' is not valid YAML");
      return filenode_to_json(fsr.root(), DuplicateKeys::kLastWins);
    } catch (const cv::Exception& e) {
      // OpenCV 4.6 swaps the function name and the "(LINE): reason" text.
      const std::string why = e.func.find("): ") != std::string::npos ? e.func : e.err;
      throw usage_error(what + " '" + shown + "' is not valid YAML: " + escape_excerpt(why, 200));
    } catch (const Error&) {
      throw;
    } catch (const std::exception&) {  // OpenCV's parser throws std::length_error on an empty key
      throw usage_error(what + " '" + shown +
                        "' is not valid YAML: a malformed mapping (e.g. an empty key)");
    }
  }
  throw usage_error(what + " '" + path + "' has extension '" + ext +
                    "'; expected .json, .yaml or .yml");
}

}  // namespace sw::cli
