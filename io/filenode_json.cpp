#include "io/filenode_json.h"

#include "io/input_guard.h"
#include "retrieval/core/error.h"

namespace sw {

nlohmann::json filenode_to_json(const cv::FileNode& n, DuplicateKeys duplicates) {
  using json = nlohmann::json;
  if (n.isInt()) return static_cast<int>(n);
  if (n.isReal()) return static_cast<double>(n);
  if (n.isString()) return static_cast<std::string>(n);
  if (n.isSeq()) {
    json a = json::array();
    for (auto it = n.begin(); it != n.end(); ++it) a.push_back(filenode_to_json(*it, duplicates));
    return a;
  }
  if (n.isMap()) {
    json o = json::object();
    for (auto it = n.begin(); it != n.end(); ++it) {
      const cv::FileNode child = *it;
      if (duplicates == DuplicateKeys::kRefuse && o.contains(child.name()))
        throw input_error("the key '" + escape_excerpt(child.name()) +
                          "' appears twice in one mapping; expected each key once");
      o[child.name()] = filenode_to_json(child, duplicates);
    }
    return o;
  }
  return nullptr;
}

std::string with_yaml_directive(const std::string& text) {
  const std::size_t start = text.compare(0, 3, "\xEF\xBB\xBF") == 0 ? 3 : 0;
  if (text.compare(start, 5, "%YAML") == 0) return text;
  return "%YAML:1.0\n" + text.substr(start);
}

}  // namespace sw
