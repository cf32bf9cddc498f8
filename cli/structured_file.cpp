#include "cli/structured_file.h"

#include <filesystem>

#include <opencv2/core/persistence.hpp>

#include "io/atomic_file.h"
#include "retrieval/error.h"

namespace sw::cli {

namespace {

using json = nlohmann::json;

json to_json(const cv::FileNode& n) {
  if (n.isInt()) return static_cast<int>(n);
  if (n.isReal()) return static_cast<double>(n);
  if (n.isString()) return static_cast<std::string>(n);
  if (n.isSeq()) {
    json a = json::array();
    for (auto it = n.begin(); it != n.end(); ++it) a.push_back(to_json(*it));
    return a;
  }
  if (n.isMap()) {
    json o = json::object();
    for (auto it = n.begin(); it != n.end(); ++it) o[(*it).name()] = to_json(*it);
    return o;
  }
  return nullptr;
}

std::string lower(std::string s) {
  for (char& c : s) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return s;
}

}  // namespace

nlohmann::json read_structured_file(const std::string& path, const std::string& what) {
  namespace fs = std::filesystem;
  std::error_code ec;
  if (!fs::is_regular_file(path, ec))
    throw usage_error(what + " '" + path + "' does not exist or is not a file");
  std::string text;
  try {
    text = read_file_bytes(path);
  } catch (const Error& e) {
    throw usage_error(what + " '" + path + "' cannot be read: " + e.what());
  }
  const std::string ext = lower(fs::path(path).extension().string());
  if (ext == ".json") {
    try {
      return json::parse(text);
    } catch (const json::parse_error& e) {
      std::string why = e.what();
      if (const auto p = why.find("] "); p != std::string::npos) why = why.substr(p + 2);
      throw usage_error(what + " '" + path + "' is not valid JSON (RFC 8259): " + why);
    }
  }
  if (ext == ".yaml" || ext == ".yml") {
    std::size_t start = text.compare(0, 3, "\xEF\xBB\xBF") == 0 ? 3 : 0;
    if (text.compare(start, 5, "%YAML") != 0) text = "%YAML:1.0\n" + text.substr(start);
    try {
      cv::FileStorage fsr(
          text, cv::FileStorage::READ | cv::FileStorage::MEMORY | cv::FileStorage::FORMAT_YAML);
      if (!fsr.isOpened()) throw usage_error(what + " '" + path + "' is not valid YAML");
      return to_json(fsr.root());
    } catch (const cv::Exception& e) {
      throw usage_error(what + " '" + path + "' is not valid YAML: " + e.err);
    }
  }
  throw usage_error(what + " '" + path + "' has extension '" + ext +
                    "'; expected .json, .yaml or .yml");
}

}  // namespace sw::cli
