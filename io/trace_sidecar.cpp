// The sidecar: its text (JSON or YAML, through cv::FileStorage where nlohmann's strict parser
// refuses) parsed into one JSON tree, and the field readers of Sidecar (trace_reader_internal.h).
#include <algorithm>
#include <cctype>
#include <cmath>
#include <filesystem>

#include <opencv2/core.hpp>

#include "io/filenode_json.h"
#include "io/trace_reader_internal.h"
#include "retrieval/core/format.h"

namespace sw::reader_detail {

namespace fs = std::filesystem;

std::string lower(std::string s) {
  std::transform(s.begin(), s.end(), s.begin(),
                 [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
  return s;
}

const char* type_name(const json& v) {
  switch (v.type()) {
    case json::value_t::null:
      return "null";
    case json::value_t::boolean:
      return "a boolean";
    case json::value_t::string:
      return "a string";
    case json::value_t::array:
      return "an array";
    case json::value_t::object:
      return "an object";
    case json::value_t::number_integer:
    case json::value_t::number_unsigned:
    case json::value_t::number_float:
      return "a number";
    default:
      return "an unsupported value";
  }
}

namespace {

// --- sidecar parsing into one JSON tree ------------------------------------------------------

/// Parses text with cv::FileStorage (in memory); throws cv::Exception or returns false.
bool parse_with_filestorage(const std::string& text, int format, json* out) {
  cv::FileStorage storage(text, cv::FileStorage::READ | cv::FileStorage::MEMORY | format);
  if (!storage.isOpened()) return false;
  // Recursion depth is bounded: the text was pre-scanned by nesting_depth() (input_guard.h).
  *out = filenode_to_json(storage.root(), DuplicateKeys::kRefuse);
  return true;
}

/// SAX handler that only finds duplicate keys (one set of keys per open object, no recursion).
struct DuplicateKeyFinder : nlohmann::json_sax<json> {
  std::vector<std::vector<std::string>> keys;
  std::string duplicate;
  bool null() override { return true; }
  bool boolean(bool) override { return true; }
  bool number_integer(number_integer_t) override { return true; }
  bool number_unsigned(number_unsigned_t) override { return true; }
  bool number_float(number_float_t, const string_t&) override { return true; }
  bool string(string_t&) override { return true; }
  bool binary(binary_t&) override { return true; }
  bool start_object(std::size_t) override {
    keys.emplace_back();
    return true;
  }
  bool key(string_t& k) override {
    auto& level = keys.back();
    if (std::find(level.begin(), level.end(), k) != level.end()) {
      duplicate = k;
      return false;  // stop parsing
    }
    level.push_back(k);
    return true;
  }
  bool end_object() override {
    keys.pop_back();
    return true;
  }
  bool start_array(std::size_t) override { return true; }
  bool end_array() override { return true; }
  bool parse_error(std::size_t, const std::string&, const nlohmann::detail::exception&) override {
    return false;
  }
};

/// OpenCV's YAML parser reports "(LINE): message" (line of the text it was given); turn it
/// into "line N: message" of the file, minus the "%YAML" line the reader may have prepended.
std::string yaml_reason(const cv::Exception& e, bool prepended) {
  // OpenCV 4.6's parseError passes the text as the function name and vice versa: take
  // whichever of the two carries the "(LINE): " form.
  std::string err = e.func.find("): ") != std::string::npos ? e.func : e.err;
  const auto open = err.find('(');
  const auto close = err.find("): ");
  if (open != std::string::npos && close != std::string::npos && close > open) {
    const std::string digits = err.substr(open + 1, close - open - 1);
    if (!digits.empty() && digits.find_first_not_of("0123456789") == std::string::npos &&
        digits.size() < 9) {
      const long line = std::stol(digits) - (prepended ? 1 : 0);
      return "line " + std::to_string(std::max(1L, line)) + ": " +
             escape_excerpt(err.substr(close + 3), 200);
    }
  }
  return escape_excerpt(err, 200) + " (position unknown)";
}

/// The message of a nlohmann exception without its "[json.exception...] " prefix.
std::string json_reason(const std::exception& e) {
  std::string what = e.what();
  if (const auto p = what.find("] "); p != std::string::npos) what = what.substr(p + 2);
  return escape_excerpt(what, 200);
}

}  // namespace

json load_sidecar(const std::string& path) {
  const std::string shown = printable_path(path);
  const std::string ext = lower(fs::path(path).extension().string());
  if (ext != ".json" && ext != ".yaml" && ext != ".yml")
    throw input_error("sidecar '" + shown + "' has extension '" + escape_excerpt(ext) +
                      "'; expected NAME.json (JSON) or NAME.yaml / NAME.yml (YAML)");
  const std::string text = read_regular_file(path, limits::kMaxSidecarBytes, "sidecar");
  // result.json echoes sidecar text: it must be UTF-8 (RFC 8259 section 8.1).
  if (!is_valid_utf8(text)) {
    std::size_t line = 1;
    for (std::size_t i = 0; i < text.size(); ++i) {
      const auto c = static_cast<unsigned char>(text[i]);
      if (c == '\n') ++line;
      if (c < 0x80) continue;
      const std::size_t n = c >= 0xF0 ? 4 : c >= 0xE0 ? 3 : c >= 0xC0 ? 2 : 1;
      if (!is_valid_utf8(std::string_view(text).substr(i, n))) break;
      i += n - 1;
    }
    throw input_error("sidecar '" + shown + "' is not valid UTF-8 (first bad byte near line " +
                      std::to_string(line) + "); expected UTF-8 text");
  }
  // Every parser below recurses (cv::FileStorage, nlohmann's dump): bound the nesting first.
  {
    int line = 0;
    nesting_depth(text, ext != ".json", limits::kMaxNestingDepth, &line);
    if (line > 0)
      throw input_error("sidecar '" + shown + "' nests deeper than " +
                        std::to_string(limits::kMaxNestingDepth) + " levels at line " +
                        std::to_string(line) +
                        "; expected a flat description of the scan (docs/file_formats.md, Limits)");
  }
  json root;
  if (ext == ".json") {
    try {
      DuplicateKeyFinder dup;
      json::sax_parse(text, &dup);
      if (!dup.duplicate.empty())
        throw input_error("sidecar '" + shown + "': the key '" + escape_excerpt(dup.duplicate) +
                          "' appears twice in one object; expected each key once");
      root = json::parse(text);
    } catch (const json::out_of_range& e) {
      throw input_error("sidecar '" + shown + "' has a number that does not fit a double (" +
                        json_reason(e) + "); expected finite numbers");
    } catch (const json::parse_error& e) {
      // nlohmann is strict RFC 8259; give cv::FileStorage (the contract's reader) a chance at
      // its dialect before giving up, and report the strict parser's precise position.
      bool ok = false;
      try {
        ok = parse_with_filestorage(text, cv::FileStorage::FORMAT_JSON, &root);
      } catch (const cv::Exception&) {
        ok = false;
      } catch (const Error&) {
        ok = false;
      } catch (const std::exception&) {  // OpenCV's parser can throw std::length_error
        ok = false;
      }
      if (!ok)
        throw input_error("sidecar '" + shown +
                          "' is not valid JSON (RFC 8259): " + json_reason(e));
    } catch (const json::exception& e) {
      throw input_error("sidecar '" + shown + "' could not be read as JSON: " + json_reason(e));
    }
  } else {
    // OpenCV's YAML reader recognises YAML by its "%YAML" directive; hand-written sidecars
    // usually omit it.
    const std::string yaml = with_yaml_directive(text);
    const std::size_t start = text.compare(0, 3, "\xEF\xBB\xBF") == 0 ? 3 : 0;
    bool ok = false;
    std::string reason = "the file is empty or not a mapping";
    try {
      ok = parse_with_filestorage(yaml, cv::FileStorage::FORMAT_YAML, &root);
    } catch (const cv::Exception& e) {
      ok = false;
      reason = yaml_reason(e, text.compare(start, 5, "%YAML") != 0);
    } catch (const Error& e) {
      throw input_error("sidecar '" + shown + "': " + e.what());
    } catch (const std::exception&) {
      // OpenCV 4.6's YAML parser throws std::length_error on some malformed mappings (an empty
      // key, `{a: 1, : 4}`, found by tests/fuzz); that is bad input, not an internal error.
      ok = false;
      reason = "a malformed mapping (e.g. an empty key) that the YAML parser could not read";
    }
    if (!ok) throw input_error("sidecar '" + shown + "' is not valid YAML: " + reason);
  }
  if (!root.is_object())
    throw input_error("sidecar '" + shown + "': the top level is " + type_name(root) +
                      "; expected an object of key/value pairs such as {\"streakwright\": 1, ...}");
  return root;
}

// --- field readers ---------------------------------------------------------------------------

double Sidecar::number(const json& v, const std::string& field) const {
  if (!v.is_number())
    fail(field, std::string("is ") + type_name(v) +
                    (v.is_string() ? " '" + escape_excerpt(v.get<std::string>()) + "'" : "") +
                    "; expected a number");
  const double d = v.get<double>();
  if (!std::isfinite(d)) fail(field, "is not finite; expected a finite number");
  return d;
}

bool Sidecar::boolean(const json& v, const std::string& field) const {
  if (v.is_boolean()) return v.get<bool>();
  if (v.is_number_integer() && (v.get<long long>() == 0 || v.get<long long>() == 1))
    return v.get<long long>() == 1;
  if (v.is_string()) {
    const std::string w = lower(v.get<std::string>());
    if (w == "true" || w == "yes" || w == "on") return true;
    if (w == "false" || w == "no" || w == "off") return false;
  }
  fail(field, std::string("is ") + type_name(v) + "; expected true or false");
}

std::string Sidecar::string(const json& v, const std::string& field) const {
  if (!v.is_string()) fail(field, std::string("is ") + type_name(v) + "; expected a string");
  return v.get<std::string>();
}

void Sidecar::require(const std::string& key, const std::string& expected) const {
  if (!has(key))
    throw input_error("sidecar '" + printable_path(path_) + "' is missing the required key '" +
                      key + "'; expected " + expected);
}

std::vector<double> Sidecar::axis(const std::string& key) const {
  const json& v = at(key);
  std::vector<double> values;
  if (v.is_array()) {
    if (v.empty()) fail(key, "is an empty array; expected axis values or {first, step, count}");
    if (v.size() > limits::kMaxAxisCount)
      fail(key, "has " + std::to_string(v.size()) + " values, above the limit of " +
                    std::to_string(limits::kMaxAxisCount) + " (docs/file_formats.md, Limits)");
    for (std::size_t i = 0; i < v.size(); ++i)
      values.push_back(number(v[i], key + "[" + std::to_string(i) + "]"));
  } else if (v.is_object()) {
    for (auto it = v.begin(); it != v.end(); ++it)
      if (it.key() != "first" && it.key() != "step" && it.key() != "count")
        fail(key, "has the unknown key '" + it.key() + "'; expected {first, step, count}");
    for (const char* k : {"first", "step", "count"})
      if (!v.contains(k))
        fail(key, std::string("is missing '") + k +
                      "'; expected {first, step, count} or an "
                      "array of values");
    const double first = number(v["first"], key + ".first");
    const double step = number(v["step"], key + ".step");
    const double count = number(v["count"], key + ".count");
    if (step == 0) fail(key + ".step", "is 0; expected a non-zero step");
    if (count < 1 || count != std::floor(count))
      fail(key + ".count", "is " + format_g(count) + "; expected a positive whole number");
    if (count > static_cast<double>(limits::kMaxAxisCount))
      fail(key + ".count", "is " + format_g(count) + ", above the limit of " +
                               std::to_string(limits::kMaxAxisCount) +
                               " values per axis (docs/file_formats.md, Limits)");
    values.resize(static_cast<std::size_t>(count));
    for (std::size_t i = 0; i < values.size(); ++i)
      values[i] = first + step * static_cast<double>(i);
  } else {
    fail(key, std::string("is ") + type_name(v) +
                  "; expected {first, step, count} or an array of values");
  }
  if (values.size() >= 2) {
    const bool up = values[1] > values[0];
    for (std::size_t i = 1; i < values.size(); ++i)
      if (!(up ? values[i] > values[i - 1] : values[i] < values[i - 1]))
        fail(key, "is not strictly monotonic at index " + std::to_string(i) + " (" +
                      format_g(values[i - 1]) + " then " + format_g(values[i]) +
                      "); expected strictly increasing or strictly decreasing values");
  }
  return values;
}

}  // namespace sw::reader_detail
