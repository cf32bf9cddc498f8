#include "cli/simulate_config.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <fstream>
#include <map>
#include <optional>
#include <sstream>

#include <opencv2/core.hpp>

#include "retrieval/core/error.h"
#include "synthetic/config_fields.h"
#include "synthetic/presets.h"

namespace sw::cli {

namespace {

using sw::synthetic::FieldVisitor;
using sw::synthetic::ScanConfig;

std::string lower(std::string s) {
  std::transform(s.begin(), s.end(), s.begin(), [](unsigned char c) { return std::tolower(c); });
  return s;
}

std::string type_name(const cv::FileNode& n) {
  if (n.isInt()) return "an integer (" + std::to_string(static_cast<int>(n)) + ")";
  if (n.isReal()) {
    std::ostringstream s;
    s << "a real number (" << static_cast<double>(n) << ")";
    return s.str();
  }
  if (n.isString()) return "a string (\"" + static_cast<std::string>(n) + "\")";
  if (n.isSeq()) return "a list";
  if (n.isMap()) return "a map";
  return "an empty value";
}

std::size_t edit_distance(const std::string& a, const std::string& b) {
  std::vector<std::size_t> prev(b.size() + 1), cur(b.size() + 1);
  for (std::size_t j = 0; j <= b.size(); ++j) prev[j] = j;
  for (std::size_t i = 1; i <= a.size(); ++i) {
    cur[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j)
      cur[j] = std::min({prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + (a[i - 1] != b[j - 1])});
    std::swap(prev, cur);
  }
  return prev[b.size()];
}

// Leaves of the document under dotted keys. A list under `delay_fs` is the explicit delay axis
// (`delay_fs.values`).
void flatten(const cv::FileNode& node, const std::string& prefix,
             std::map<std::string, cv::FileNode>& out) {
  if (node.isMap()) {
    for (auto it = node.begin(); it != node.end(); ++it) {
      const cv::FileNode child = *it;
      flatten(child, prefix.empty() ? child.name() : prefix + "." + child.name(), out);
    }
    return;
  }
  if (prefix == "delay_fs" && node.isSeq()) {
    out["delay_fs.values"] = node;
    return;
  }
  out[prefix] = node;
}

class Loader : public FieldVisitor {
 public:
  Loader(std::string file, std::map<std::string, cv::FileNode>& leaves)
      : file_(std::move(file)), leaves_(leaves) {}

  void number(const std::string& key, double& v) override {
    if (const std::optional<cv::FileNode> n = take(key)) v = as_number(*n, key);
  }
  void integer(const std::string& key, int& v) override {
    const std::optional<cv::FileNode> n = take(key);
    if (!n) return;
    if (n->isInt()) {
      v = static_cast<int>(*n);
      return;
    }
    const double d = n->isReal() ? static_cast<double>(*n) : NAN;
    if (!(std::isfinite(d) && d == std::round(d) && std::abs(d) < 2e9)) fail(key, "an integer", *n);
    v = static_cast<int>(d);
  }
  void boolean(const std::string& key, bool& v) override {
    const std::optional<cv::FileNode> n = take(key);
    if (!n) return;
    if (n->isInt() && (static_cast<int>(*n) == 0 || static_cast<int>(*n) == 1)) {
      v = static_cast<int>(*n) == 1;
      return;
    }
    if (n->isString()) {
      const std::string s = lower(static_cast<std::string>(*n));
      if (s == "true" || s == "yes" || s == "on") {
        v = true;
        return;
      }
      if (s == "false" || s == "no" || s == "off") {
        v = false;
        return;
      }
    }
    fail(key, "true or false", *n);
  }
  void text(const std::string& key, std::string& v) override {
    const std::optional<cv::FileNode> n = take(key);
    if (!n) return;
    if (!n->isString()) fail(key, "a string", *n);
    v = static_cast<std::string>(*n);
  }
  void choice(const std::string& key, std::string& v,
              const std::vector<std::string>& allowed) override {
    const std::optional<cv::FileNode> n = take(key);
    if (!n) return;
    std::string names;
    for (const std::string& a : allowed)
      if (!a.empty()) names += (names.empty() ? "" : ", ") + a;
    if (!n->isString()) fail(key, "one of " + names, *n);
    const std::string s = static_cast<std::string>(*n);
    if (std::find(allowed.begin(), allowed.end(), s) == allowed.end())
      throw input_error(file_ + ": key '" + key + "' is \"" + s + "\"; expected one of " + names +
                        ".");
    v = s;
  }
  void numbers(const std::string& key, std::vector<double>& v) override {
    const std::optional<cv::FileNode> n = take(key);
    if (!n) return;
    if (!n->isSeq()) fail(key, "a list of numbers", *n);
    std::vector<double> out;
    for (int i = 0; i < static_cast<int>(n->size()); ++i)
      out.push_back(as_number((*n)[i], key + "[" + std::to_string(i) + "]"));
    v = std::move(out);
  }
  void lines(const std::string& key, std::vector<sw::synthetic::LineSpec>& v) override {
    const std::optional<cv::FileNode> n = take(key);
    if (!n) return;
    if (!n->isSeq())
      fail(key, "a list of lines such as [{name: 2p}, {name: 2s, relative_strength: 0.3}]", *n);
    std::vector<sw::synthetic::LineSpec> out;
    for (int i = 0; i < static_cast<int>(n->size()); ++i) {
      const cv::FileNode item = (*n)[i];
      const std::string k = key + "[" + std::to_string(i) + "]";
      if (!item.isMap())
        fail(k, "a map {gas, name, ionization_energy_eV, relative_strength, delay_as}", item);
      sw::synthetic::LineSpec l;
      for (auto it = item.begin(); it != item.end(); ++it) {
        const cv::FileNode f = *it;
        const std::string name = f.name(), fk = k + "." + name;
        if (name == "gas" || name == "name") {
          if (!f.isString()) fail(fk, "a string", f);
          (name == "gas" ? l.gas : l.name) = static_cast<std::string>(f);
        } else if (name == "ionization_energy_eV") {
          l.ionization_energy_eV = as_number(f, fk);
        } else if (name == "relative_strength") {
          l.relative_strength = as_number(f, fk);
        } else if (name == "delay_as") {
          l.delay_as = as_number(f, fk);
        } else {
          throw input_error(file_ + ": unknown key '" + fk +
                            "'; a line has gas, name, ionization_energy_eV, relative_strength "
                            "and delay_as.");
        }
      }
      out.push_back(l);
    }
    v = std::move(out);
  }

 private:
  // The node under `key`, removed from the leaves (what remains at the end is unknown).
  std::optional<cv::FileNode> take(const std::string& key) {
    auto it = leaves_.find(key);
    if (it == leaves_.end()) return std::nullopt;
    cv::FileNode n = it->second;
    leaves_.erase(it);
    return n;
  }
  double as_number(const cv::FileNode& n, const std::string& key) const {
    if (n.isInt()) return static_cast<double>(static_cast<int>(n));
    if (n.isReal()) return static_cast<double>(n);
    fail(key, "a number", n);
    return 0.0;
  }
  [[noreturn]] void fail(const std::string& key, const std::string& expected,
                         const cv::FileNode& n) const {
    throw input_error(file_ + ": key '" + key + "' must be " + expected + ", got " + type_name(n) +
                      ".");
  }

  std::string file_;
  std::map<std::string, cv::FileNode>& leaves_;
};

unsigned long long read_seed(const cv::FileNode& n, const std::string& file) {
  if (n.isInt() && static_cast<int>(n) >= 0)
    return static_cast<unsigned long long>(static_cast<int>(n));
  if (n.isReal()) {
    const double d = static_cast<double>(n);
    if (d >= 0 && d == std::round(d) && d <= 9007199254740992.0)
      return static_cast<unsigned long long>(d);
  }
  if (n.isString()) {
    const std::string s = static_cast<std::string>(n);
    if (!s.empty() && s.size() <= 20 && std::all_of(s.begin(), s.end(), ::isdigit)) {
      try {
        return std::stoull(s);
      } catch (const std::exception&) {
      }
    }
  }
  throw input_error(file +
                    ": key 'seed' must be a non-negative integer (write seeds above 2^53 "
                    "as a quoted decimal string), got " +
                    type_name(n) + ".");
}

// YAML comments: '#' at the start of a line or after whitespace, outside quotes, to the end of
// the line (the YAML 1.2 rule). cv::FileStorage would keep a trailing comment inside a plain
// string value, so they are removed before parsing.
std::string strip_yaml_comments(const std::string& text) {
  std::string out;
  out.reserve(text.size());
  char quote = 0;
  bool comment = false;
  char prev = '\n';
  for (char ch : text) {
    if (ch == '\n') {
      comment = false;
      quote = 0;
      out += ch;
      prev = ch;
      continue;
    }
    if (comment) continue;
    if (quote) {
      if (ch == quote) quote = 0;
    } else if (ch == '"' || ch == '\'') {
      quote = ch;
    } else if (ch == '#' && (prev == ' ' || prev == '\t' || prev == '\n')) {
      comment = true;
      continue;
    }
    out += ch;
    prev = ch;
  }
  return out;
}

}  // namespace

ScanConfig parse_scan_config(const std::string& text, const std::string& name, bool json,
                             unsigned long long* seed) {
  std::string doc = json ? text : strip_yaml_comments(text);
  if (!json) {
    std::size_t p = doc.find_first_not_of(" \t\r\n");
    if (p == std::string::npos || doc.compare(p, 5, "%YAML") != 0) doc = "%YAML:1.0\n" + doc;
  }
  cv::FileStorage fs;
  try {
    fs.open(doc, cv::FileStorage::READ | cv::FileStorage::MEMORY |
                     (json ? cv::FileStorage::FORMAT_JSON : cv::FileStorage::FORMAT_YAML));
  } catch (const cv::Exception& e) {
    throw input_error(name + ": not a valid " + (json ? "JSON" : "YAML") +
                      " document; check brackets, quotes and indentation (parser: " + e.err + ").");
  } catch (const std::exception&) {  // OpenCV's parser throws std::length_error on an empty key
    throw input_error(name + ": not a valid " + std::string(json ? "JSON" : "YAML") +
                      " document: a malformed mapping (e.g. an empty key).");
  }
  if (!fs.isOpened())
    throw input_error(name + ": not a valid " + std::string(json ? "JSON" : "YAML") + " document.");
  const cv::FileNode root = fs.root();
  if (!root.isMap() && !root.empty())
    throw input_error(name + ": the document must be a map of keys (e.g. 'gas: Ne').");

  std::map<std::string, cv::FileNode> leaves;
  if (!root.empty()) flatten(root, "", leaves);

  ScanConfig config;
  if (auto it = leaves.find("preset"); it != leaves.end()) {
    if (!it->second.isString())
      throw input_error(name + ": key 'preset' must be a preset name, got " +
                        type_name(it->second) + ".");
    try {
      config = sw::synthetic::find_preset(static_cast<std::string>(it->second)).config;
    } catch (const Error& e) {
      throw input_error(name + ": key 'preset': " + e.what());
    }
    leaves.erase(it);
  }
  if (auto it = leaves.find("seed"); it != leaves.end()) {
    const unsigned long long s = read_seed(it->second, name);
    if (seed) *seed = s;
    leaves.erase(it);
  }

  Loader loader(name, leaves);
  sw::synthetic::visit_fields(config, loader);
  if (!leaves.empty()) {
    const std::string& key = leaves.begin()->first;
    const std::vector<std::string> known = sw::synthetic::config_keys();
    for (const std::string& k : known)
      if (k.rfind(key + ".", 0) == 0)
        throw input_error(name + ": key '" + key + "' must be a map of keys such as '" + k +
                          "', got " + type_name(leaves.begin()->second) + ".");
    std::string hint;
    std::size_t best = 1000;
    for (const std::string& k : known) {
      const std::size_t d = edit_distance(lower(key), lower(k));
      if (d < best) {
        best = d;
        hint = k;
      }
    }
    std::string msg = name + ": unknown key '" + key + "'";
    if (best <= 3)
      msg += "; did you mean '" + hint + "'?";
    else
      msg += "; see synthetic/config_fields.h for the known keys.";
    throw input_error(msg);
  }
  const std::string err = config.validate();
  if (!err.empty()) throw input_error(name + ": " + err);
  return config;
}

ScanConfig load_scan_config(const std::string& path, unsigned long long* seed) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw input_error(path + ": cannot open the scan configuration file for reading.");
  std::ostringstream ss;
  ss << in.rdbuf();
  const std::string text = ss.str();
  const std::string ext = lower(path.substr(
      path.find_last_of('.') == std::string::npos ? path.size() : path.find_last_of('.')));
  bool json;
  if (ext == ".json")
    json = true;
  else if (ext == ".yaml" || ext == ".yml")
    json = false;
  else {
    const std::size_t p = text.find_first_not_of(" \t\r\n");
    json = p != std::string::npos && text[p] == '{';
  }
  return parse_scan_config(text, path, json, seed);
}

}  // namespace sw::cli
