#include "io/trace_reader.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <mutex>
#include <sstream>

#include <unistd.h>

#include <nlohmann/json.hpp>
#include <opencv2/core.hpp>
#include <opencv2/core/utils/logger.hpp>
#include <opencv2/imgcodecs.hpp>

#include "io/atomic_file.h"
#include "io/csv.h"
#include "io/hdf5_reader.h"
#include "io/input_guard.h"
#include "io/tof_calibration.h"
#include "io/tof_fit.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/gas.h"

namespace sw {
namespace {

using json = nlohmann::json;
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

// --- sidecar parsing into one JSON tree ------------------------------------------------------

/// Recursion depth is bounded: the text was pre-scanned by nesting_depth() (input_guard.h).
json filenode_to_json(const cv::FileNode& n) {
  if (n.isInt()) return static_cast<int>(n);
  if (n.isReal()) return static_cast<double>(n);
  if (n.isString()) return static_cast<std::string>(n);
  if (n.isSeq()) {
    json a = json::array();
    for (auto it = n.begin(); it != n.end(); ++it) a.push_back(filenode_to_json(*it));
    return a;
  }
  if (n.isMap()) {
    json o = json::object();
    for (auto it = n.begin(); it != n.end(); ++it) {
      const cv::FileNode child = *it;
      if (o.contains(child.name()))
        throw input_error("the key '" + escape_excerpt(child.name()) +
                          "' appears twice in one mapping; expected each key once");
      o[child.name()] = filenode_to_json(child);
    }
    return o;
  }
  return nullptr;
}

/// Parses text with cv::FileStorage (in memory); throws cv::Exception or returns false.
bool parse_with_filestorage(const std::string& text, int format, json* out) {
  cv::FileStorage storage(text, cv::FileStorage::READ | cv::FileStorage::MEMORY | format);
  if (!storage.isOpened()) return false;
  *out = filenode_to_json(storage.root());
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
    std::string yaml = text;
    std::size_t start = 0;
    if (yaml.size() >= 3 && yaml.compare(0, 3, "\xEF\xBB\xBF") == 0) start = 3;
    if (yaml.compare(start, 5, "%YAML") != 0) yaml = "%YAML:1.0\n" + yaml.substr(start);
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

class Sidecar {
 public:
  Sidecar(std::string path, json root) : path_(std::move(path)), root_(std::move(root)) {}
  const std::string& path() const { return path_; }
  const json& root() const { return root_; }
  bool has(const std::string& key) const { return root_.contains(key); }
  const json& at(const std::string& key) const { return root_.at(key); }

  [[noreturn]] void fail(const std::string& field, const std::string& message) const {
    throw input_error("sidecar '" + printable_path(path_) + "', field '" + field + "': " + message);
  }

  double number(const json& v, const std::string& field) const {
    if (!v.is_number())
      fail(field, std::string("is ") + type_name(v) +
                      (v.is_string() ? " '" + escape_excerpt(v.get<std::string>()) + "'" : "") +
                      "; expected a number");
    const double d = v.get<double>();
    if (!std::isfinite(d)) fail(field, "is not finite; expected a finite number");
    return d;
  }
  /// true/false (JSON), or the words / 0 and 1 that cv::FileStorage gives for YAML booleans.
  bool boolean(const json& v, const std::string& field) const {
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
  std::string string(const json& v, const std::string& field) const {
    if (!v.is_string()) fail(field, std::string("is ") + type_name(v) + "; expected a string");
    return v.get<std::string>();
  }
  void require(const std::string& key, const std::string& expected) const {
    if (!has(key))
      throw input_error("sidecar '" + printable_path(path_) + "' is missing the required key '" +
                        key + "'; expected " + expected);
  }

  /// An axis: {first, step, count} or an explicit array. Strictly monotonic.
  std::vector<double> axis(const std::string& key) const {
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

 private:
  std::string path_;
  json root_;
};

bool descending(const std::vector<double>& v) { return v.size() >= 2 && v[1] < v[0]; }

// --- data file ---------------------------------------------------------------------------

/// Runs cv::imread with OpenCV's logging silenced and stderr (where libpng/libtiff write their
/// own diagnostics) captured; what the decoders said comes back in `chatter`.
cv::Mat quiet_imread(const std::string& file, std::string* chatter) {
  static std::mutex m;
  std::lock_guard<std::mutex> lock(m);
  cv::utils::logging::setLogLevel(cv::utils::logging::LOG_LEVEL_SILENT);
  std::fflush(stderr);
  std::FILE* sink = std::tmpfile();
  const int saved = sink ? ::dup(STDERR_FILENO) : -1;
  if (saved >= 0) ::dup2(::fileno(sink), STDERR_FILENO);
  cv::Mat img;
  std::string error;
  try {
    img = cv::imread(file, cv::IMREAD_UNCHANGED);
  } catch (const cv::Exception& e) {
    error = e.err;
  }
  std::fflush(stderr);
  if (saved >= 0) {
    ::dup2(saved, STDERR_FILENO);
    ::close(saved);
  }
  if (sink) {
    std::rewind(sink);
    char buf[256];
    const std::size_t n = std::fread(buf, 1, sizeof buf, sink);
    std::fclose(sink);
    *chatter = escape_excerpt(std::string_view(buf, n), 120);
  }
  if (!error.empty()) throw input_error(escape_excerpt(error, 200));
  return img;
}

Eigen::MatrixXd load_image(const Sidecar& sc, const std::string& image,
                           std::vector<std::string>* warnings, std::string* shown_name,
                           const TraceReadPolicy& policy) {
  const fs::path base = fs::path(sc.path()).parent_path();
  auto resolve = [&](const std::string& p) {
    const fs::path q(p);
    return (q.is_absolute() || base.empty() ? q : base / q).string();
  };
  // Confinement: the data file must lie in the sidecar's folder tree (or an allowed root).
  auto confine = [&](const std::string& file) {
    if (policy.allow_outside_data) return;
    if (path_inside(file, base.empty() ? "." : base.string())) return;
    for (const std::string& root : policy.allowed_roots)
      if (path_inside(file, root)) return;
    sc.fail("image", "names '" + printable_path(file) +
                         "', which lies outside the sidecar's folder tree (after resolving '..' "
                         "and symbolic links); expected a data file beside the sidecar or below "
                         "it, or pass --allow-outside-data to read it");
  };
  std::string h5_file, h5_dataset;
  if (split_hdf5_reference(image, &h5_file, &h5_dataset)) {
    const std::string f = resolve(h5_file);
    *shown_name = printable_path(f) + ":" + escape_excerpt(h5_dataset, 200);
    confine(f);
    try {
      check_regular_file(f, limits::kMaxDataFileBytes, "data file");
    } catch (const Error& e) {
      sc.fail("image", e.what());
    }
    return read_hdf5_matrix(f, h5_dataset,
                            "sidecar '" + printable_path(sc.path()) + "', field 'image'");
  }
  const std::string file = resolve(image);
  const std::string shown = printable_path(file);
  *shown_name = shown;
  confine(file);
  try {
    check_regular_file(file, limits::kMaxDataFileBytes, "data file");
  } catch (const Error& e) {
    sc.fail("image", e.what());
  }
  const bool quote_cells = path_inside(file, base.empty() ? "." : base.string()) ||
                           std::any_of(policy.allowed_roots.begin(), policy.allowed_roots.end(),
                                       [&](const std::string& r) { return path_inside(file, r); });
  const std::string ext = lower(fs::path(file).extension().string());
  if (ext == ".csv" || ext == ".txt" || ext == ".dat" || ext == ".tsv") {
    try {
      return parse_csv_matrix(read_regular_file(file, limits::kMaxDataFileBytes, "data file"),
                              shown, quote_cells);
    } catch (const Error& e) {
      sc.fail("image", e.what());
    }
  }

  ImageHeader h;
  try {
    h = read_image_header(file);
  } catch (const Error& e) {
    sc.fail("image", e.what());
  }
  if (h.samples_per_pixel != 1)
    sc.fail("image", "the data file '" + shown + "' has " + std::to_string(h.samples_per_pixel) +
                         " channels; expected a single-channel image (grey, no colour, no alpha)");
  if (h.width == 0 || h.height == 0)
    sc.fail("image", "the data file '" + shown + "' declares " + std::to_string(h.width) + " x " +
                         std::to_string(h.height) + " pixels; expected a non-empty image");
  if (h.width > limits::kMaxAxisCount || h.height > limits::kMaxAxisCount ||
      h.width * h.height > limits::kMaxSamples)
    sc.fail("image", "the data file '" + shown + "' declares " + std::to_string(h.width) + " x " +
                         std::to_string(h.height) + " pixels, above the limits of " +
                         std::to_string(limits::kMaxAxisCount) + " per side and " +
                         std::to_string(limits::kMaxSamples) +
                         " in all (docs/file_formats.md, Limits); it was not decoded");
  if (h.pages > 1)
    sc.fail("image", "the data file '" + shown + "' is a TIFF with " + std::to_string(h.pages) +
                         (h.pages >= 1000 ? "+" : "") +
                         " pages; expected one page (one scan per file): split the stack");
  if (h.format == "tiff" && h.bits_per_sample == 32 && h.sample_format == 1)
    sc.fail("image", "the data file '" + shown +
                         "' has unsigned 32-bit integer samples, which the image decoder "
                         "cannot represent; expected 16-bit unsigned, 32-bit signed integer or "
                         "32/64-bit float samples (convert it, e.g. to 32-bit float)");
  cv::Mat img;
  std::string chatter;
  try {
    img = quiet_imread(file, &chatter);
  } catch (const Error& e) {
    sc.fail("image", "the data file '" + shown + "' could not be decoded (" + e.what() + ")");
  }
  if (img.empty())
    sc.fail("image", "the data file '" + shown + "' could not be decoded as an image" +
                         (chatter.empty() ? std::string() : " (decoder: " + chatter + ")") +
                         "; expected a 16-bit PNG, a 16/32-bit TIFF, a CSV matrix or an HDF5 "
                         "dataset");
  if (!chatter.empty() && warnings)
    warnings->push_back("image '" + shown + "': the decoder reported: " + chatter);
  if (img.channels() != 1)
    sc.fail("image", "the data file '" + shown + "' has " + std::to_string(img.channels()) +
                         " channels; expected a single-channel image (grey, no colour, no alpha)");
  switch (img.depth()) {
    case CV_8U:
      if (warnings)
        warnings->push_back("image '" + shown +
                            "' has 8 bits per sample (256 levels); a 16-bit "
                            "PNG or a TIFF keeps the dynamic range of the detector");
      break;
    case CV_16U:
    case CV_16S:
    case CV_32S:
    case CV_32F:
    case CV_64F:
      break;
    default:
      sc.fail("image", "the data file '" + shown +
                           "' has an unsupported sample type (OpenCV depth " +
                           std::to_string(img.depth()) +
                           "); expected 16-bit or 32-bit integer or "
                           "32/64-bit float samples");
  }
  cv::Mat d;
  img.convertTo(d, CV_64F);
  Eigen::MatrixXd m(d.rows, d.cols);
  for (int i = 0; i < d.rows; ++i) {
    const double* row = d.ptr<double>(i);
    for (int j = 0; j < d.cols; ++j) m(i, j) = row[j];
  }
  return m;
}

// --- time-of-flight calibration fitted from harmonic peaks ------------------------------------

/// What the calibration block asks of the harmonic fit ("fit": "harmonics").
struct TofFitRequest {
  bool fit = false;
  std::optional<int> harmonic_step;
  std::optional<bool> fit_energy_offset;
  std::optional<double> min_peak_fraction;
};

/// Fit-only keys of the calibration block (accepted only with "fit": "harmonics").
bool is_fit_key(const std::string& k) {
  return k == "harmonic_step" || k == "fit_energy_offset" || k == "min_peak_fraction";
}

/// The delay-summed TOF spectrum (ascending flight time) of counts (rows = delays, columns =
/// TOF bins at tof_ns).
void summed_spectrum(const Eigen::MatrixXd& counts, const std::vector<double>& tof_ns,
                     std::vector<double>* t, std::vector<double>* c) {
  const Eigen::VectorXd sum = counts.colwise().sum().transpose();
  t->assign(tof_ns.begin(), tof_ns.end());
  c->assign(sum.data(), sum.data() + sum.size());
  if (descending(*t)) {
    std::reverse(t->begin(), t->end());
    std::reverse(c->begin(), c->end());
  }
}

/// Physical ranges of sidecar numbers (docs/file_formats.md "Limits"): wide enough for any
/// attosecond streaking or RABBITT experiment, narrow enough that derived grids stay small.
namespace ranges {
constexpr double kMinEnergyEV = -100.0;         ///< kinetic energy axis, lower end (eV)
constexpr double kMaxEnergyEV = 10000.0;        ///< kinetic energy axis, upper end (eV)
constexpr double kMinEnergyStepEV = 1e-4;       ///< smallest energy step (eV)
constexpr double kMaxTofNs = 1e7;               ///< |flight time| (ns)
constexpr double kMinTofStepNs = 1e-6;          ///< smallest flight-time step (ns)
constexpr double kMaxAbsDelayFs = 1e6;          ///< |delay| (fs), stage offsets included
constexpr double kMaxDelaySpanFs = 2000.0;      ///< last minus first delay (fs)
constexpr double kMinDelayStepFs = 1e-3;        ///< smallest delay step (fs)
constexpr double kMinIrWavelengthNm = 100.0;    ///< IR (driving) wavelength, lower end (nm)
constexpr double kMaxIrWavelengthNm = 20000.0;  ///< upper end (nm): mid-infrared drivers
constexpr double kMinScale = 1e-30;             ///< counts per image unit
constexpr double kMaxScale = 1e30;
constexpr double kMaxCounts = 1e15;         ///< largest scaled count / background per bin
constexpr double kMinPeakCounts = 1e-12;    ///< smallest allowed largest scaled count
constexpr double kMaxResolutionEV = 100.0;  ///< energy_resolution_eV (FWHM)
}  // namespace ranges

/// Values in [lo, hi], consecutive steps of at least min_step, span at most max_span (0 = any).
void check_axis_range(const Sidecar& sc, const std::string& key, const std::vector<double>& v,
                      double lo, double hi, double min_step, double max_span, const char* unit) {
  for (std::size_t i = 0; i < v.size(); ++i)
    if (!(v[i] >= lo && v[i] <= hi))
      sc.fail(key, "has the value " + format_g(v[i]) + " " + unit + " at index " +
                       std::to_string(i) + "; expected values in [" + format_g(lo) + ", " +
                       format_g(hi) + "] " + unit);
  for (std::size_t i = 1; i < v.size(); ++i)
    if (std::abs(v[i] - v[i - 1]) < min_step)
      sc.fail(key, "has a step of " + format_g(std::abs(v[i] - v[i - 1])) + " " + unit +
                       " at index " + std::to_string(i) + "; expected steps of at least " +
                       format_g(min_step) + " " + unit);
  if (max_span > 0 && v.size() >= 2 && std::abs(v.back() - v.front()) > max_span)
    sc.fail(key, "spans " + format_g(std::abs(v.back() - v.front())) + " " + unit +
                     "; expected at most " + format_g(max_span) + " " + unit +
                     " (docs/file_formats.md, Limits)");
}

/// Echoes an unknown key into meta.extra_json unless it is too deep or too large to be useful
/// in result.json (then a warning says it was dropped). Depth is measured without recursion.
void echo_extra(const Sidecar& sc, const std::string& key, const json& value, TraceMeta* meta,
                std::vector<std::string>* warnings) {
  int depth = 0;
  std::vector<std::pair<const json*, int>> stack{{&value, 1}};
  while (!stack.empty()) {
    const auto [v, d] = stack.back();
    stack.pop_back();
    if (v->is_structured()) {
      depth = std::max(depth, d);
      if (depth > limits::kMaxEchoDepth) break;
      for (const auto& c : *v) stack.push_back({&c, d + 1});
    }
  }
  const std::string shown_key = escape_excerpt(key, 64);
  if (depth > limits::kMaxEchoDepth) {
    if (warnings)
      warnings->push_back("sidecar '" + printable_path(sc.path()) + "': the unknown key '" +
                          shown_key + "' nests deeper than " +
                          std::to_string(limits::kMaxEchoDepth) +
                          " levels and is not echoed into the result");
    return;
  }
  std::string text = value.dump(-1, ' ', false, json::error_handler_t::replace);
  if (text.size() > limits::kMaxEchoBytes || key.size() > 256 || !is_valid_utf8(key)) {
    if (warnings)
      warnings->push_back("sidecar '" + printable_path(sc.path()) + "': the unknown key '" +
                          shown_key + "' is longer than " + std::to_string(limits::kMaxEchoBytes) +
                          " bytes of JSON (or its name is not short UTF-8) and is not echoed "
                          "into the result");
    return;
  }
  meta->extra_json[key] = std::move(text);
}

}  // namespace

const std::vector<std::string>& known_sidecar_keys() {
  static const std::vector<std::string> keys = {"streakwright",
                                                "image",
                                                "layout",
                                                "energy_eV",
                                                "tof_ns",
                                                "calibration",
                                                "delay_fs",
                                                "delay_um",
                                                "kind",
                                                "gas",
                                                "ir_wavelength_nm",
                                                "scale",
                                                "background",
                                                "energy_resolution_eV",
                                                "notes",
                                                "energy_window_eV",
                                                "saturation_counts",
                                                "lines"};
  return keys;
}

Trace read_trace(const std::string& sidecar_path, std::vector<std::string>* warnings_out,
                 const TraceReadOverrides& overrides, const TraceReadPolicy& policy) {
  std::vector<std::string> collected;  // -> meta.read_warnings (and warnings_out)
  std::vector<std::string>* const warnings = &collected;
  // result.json is UTF-8 JSON and records the input path: refuse what it cannot hold.
  if (!is_valid_utf8(sidecar_path))
    throw input_error("sidecar '" + printable_path(sidecar_path) +
                      "': the file name is not valid UTF-8, which result.json cannot record; "
                      "expected a UTF-8 file name (rename the file)");
  const Sidecar sc(sidecar_path, load_sidecar(sidecar_path));
  const std::string where = printable_path(sidecar_path);

  // --- required keys -----------------------------------------------------------------------
  sc.require("streakwright", "the format version, \"streakwright\": 1");
  {
    const json& v = sc.at("streakwright");
    if (!v.is_number() || v.get<double>() != 1.0)
      sc.fail("streakwright", (v.is_number() ? "is version " + format_g(v.get<double>()) +
                                                   ", which this reader does not support"
                                             : std::string("is ") + type_name(v)) +
                                  "; expected 1");
  }
  sc.require("image", "the data file name, e.g. \"image\": \"scan.png\" (relative to the sidecar)");
  const std::string image = sc.string(sc.at("image"), "image");
  if (image.empty()) sc.fail("image", "is empty; expected the data file name");
  if (!is_valid_utf8(image) || image.find('\0') != std::string::npos)
    sc.fail("image", "is not a valid UTF-8 file name; expected a UTF-8 path");
  sc.require("layout", "\"delay_rows\" or \"energy_rows\"");
  const std::string layout = sc.string(sc.at("layout"), "layout");
  if (layout != "delay_rows" && layout != "energy_rows")
    sc.fail("layout", "is '" + layout + "'; expected one of: delay_rows, energy_rows");
  const bool energy_rows = layout == "energy_rows";

  const bool tof = sc.has("tof_ns");
  if (tof && sc.has("energy_eV"))
    sc.fail("tof_ns",
            "is given together with energy_eV; expected one energy axis: energy_eV or "
            "tof_ns with a calibration block");
  if (!tof)
    sc.require("energy_eV",
               "the energy axis (eV) as {first, step, count} or an array (or "
               "tof_ns with a calibration block)");
  const bool stage = sc.has("delay_um");
  if (stage && sc.has("delay_fs"))
    sc.fail("delay_um", "is given together with delay_fs; expected one delay axis");
  if (!stage)
    sc.require("delay_fs",
               "the delay axis (fs) as {first, step, count} or an array (or "
               "delay_um, the stage travel in micrometres)");

  // --- axes --------------------------------------------------------------------------------
  const std::string energy_key = tof ? "tof_ns" : "energy_eV";
  const std::string delay_key = stage ? "delay_um" : "delay_fs";
  std::vector<double> energy_axis = sc.axis(energy_key);
  std::vector<double> delay_axis = sc.axis(delay_key);
  if (energy_axis.size() * delay_axis.size() > limits::kMaxSamples)
    sc.fail(delay_key, "declares " + std::to_string(delay_axis.size()) + " delays x " +
                           std::to_string(energy_axis.size()) + " energies, above the limit of " +
                           std::to_string(limits::kMaxSamples) +
                           " samples (docs/file_formats.md, Limits)");
  // Physical ranges: the engines derive their time and energy grids from these axes.
  if (tof)
    check_axis_range(sc, energy_key, energy_axis, -ranges::kMaxTofNs, ranges::kMaxTofNs,
                     ranges::kMinTofStepNs, 0.0, "ns");
  else
    check_axis_range(sc, energy_key, energy_axis, ranges::kMinEnergyEV, ranges::kMaxEnergyEV,
                     ranges::kMinEnergyStepEV, 0.0, "eV");
  {
    const double to_fs = stage ? units::stage_travel_um_to_fs(1.0) : 1.0;
    check_axis_range(sc, delay_key, delay_axis, -ranges::kMaxAbsDelayFs / to_fs,
                     ranges::kMaxAbsDelayFs / to_fs, ranges::kMinDelayStepFs / to_fs,
                     ranges::kMaxDelaySpanFs / to_fs, stage ? "um" : "fs");
  }
  TofCalibration cal;
  TofFitRequest fit_request;
  if (tof) {
    if (!sc.has("calibration"))
      sc.fail("tof_ns",
              "needs a 'calibration' block {length_m, t0_ns, energy_offset_eV} to "
              "convert flight times to energies");
    const json& c = sc.at("calibration");
    if (!c.is_object())
      sc.fail("calibration",
              std::string("is ") + type_name(c) + "; expected {length_m, t0_ns, energy_offset_eV}");
    if (c.contains("fit")) {
      const json& v = c.at("fit");
      if (!v.is_string() || v.get<std::string>() != "harmonics")
        sc.fail("calibration.fit",
                "is " +
                    (v.is_string() ? "'" + v.get<std::string>() + "'" : std::string(type_name(v))) +
                    "; expected \"harmonics\" (fit L, t0 to the harmonic peaks of the scan, "
                    "starting from length_m and t0_ns) or leave 'fit' out for a fixed calibration");
      fit_request.fit = true;
    }
    for (auto it = c.begin(); it != c.end(); ++it) {
      const std::string& k = it.key();
      const std::string f = "calibration." + k;
      if (is_fit_key(k) && !fit_request.fit)
        sc.fail(f,
                "is an option of the harmonic fit; add \"fit\": \"harmonics\" to the "
                "calibration block or remove it");
      if (k == "fit") {
        // checked above
      } else if (k == "harmonic_step") {
        const double n = sc.number(*it, f);
        if (n != 1 && n != 2)
          sc.fail(f, "is " + format_g(n) +
                         "; expected 1 (every order: harmonics and RABBITT sidebands) or 2 "
                         "(odd harmonics only)");
        fit_request.harmonic_step = static_cast<int>(n);
      } else if (k == "fit_energy_offset") {
        fit_request.fit_energy_offset = sc.boolean(*it, f);
      } else if (k == "min_peak_fraction") {
        const double v = sc.number(*it, f);
        if (!(v > 0 && v < 1))
          sc.fail(f, "is " + format_g(v) + "; expected a fraction of the tallest peak in (0, 1)");
        fit_request.min_peak_fraction = v;
      } else if (k == "length_m") {
        cal.length_m = sc.number(*it, f);
        if (!(cal.length_m > 0 && cal.length_m <= 100))
          sc.fail(f,
                  "is " + format_g(cal.length_m) + "; expected a flight length > 0 and <= 100 m");
      } else if (k == "t0_ns") {
        cal.t0_ns = sc.number(*it, f);
        if (!(std::abs(cal.t0_ns) <= ranges::kMaxTofNs))
          sc.fail(f, "is " + format_g(cal.t0_ns) +
                         "; expected |t0| <= " + format_g(ranges::kMaxTofNs) + " ns");
      } else if (k == "energy_offset_eV") {
        cal.energy_offset_eV = sc.number(*it, f);
        if (!(std::abs(cal.energy_offset_eV) <= ranges::kMaxEnergyEV))
          sc.fail(f, "is " + format_g(cal.energy_offset_eV) +
                         "; expected |offset| <= " + format_g(ranges::kMaxEnergyEV) + " eV");
      } else if (k == "energy_count") {
        const double n = sc.number(*it, f);
        if (n < 1 || n != std::floor(n) || n > static_cast<double>(limits::kMaxAxisCount))
          sc.fail(f, "is " + format_g(n) + "; expected a whole number of energy bins in [1, " +
                         std::to_string(limits::kMaxAxisCount) + "]");
        cal.energy_count = static_cast<int>(n);
      } else if (k == "energy_min_eV" || k == "energy_max_eV") {
        const double e = sc.number(*it, f);
        if (!(e >= ranges::kMinEnergyEV && e <= ranges::kMaxEnergyEV))
          sc.fail(f, "is " + format_g(e) + "; expected an energy in [" +
                         format_g(ranges::kMinEnergyEV) + ", " + format_g(ranges::kMaxEnergyEV) +
                         "] eV");
        (k == "energy_min_eV" ? cal.energy_min_eV : cal.energy_max_eV) = e;
      } else
        sc.fail(f,
                "is not a calibration key; expected length_m, t0_ns, energy_offset_eV "
                "(optional: energy_count, energy_min_eV, energy_max_eV; fit, harmonic_step, "
                "fit_energy_offset, min_peak_fraction)");
    }
    for (const char* k : {"length_m", "t0_ns"})
      if (!c.contains(k))
        sc.fail("calibration", std::string("is missing '") + k + "'; expected {length_m, t0_ns, " +
                                   "energy_offset_eV}" +
                                   (fit_request.fit ? " as the initial guess of the fit" : ""));
    if (const std::string bad = cal.validate(); !bad.empty()) {
      const auto dot = bad.find(' ');
      sc.fail(bad.substr(0, dot), bad.substr(dot + 1));
    }
  } else if (sc.has("calibration") && warnings) {
    warnings->push_back("sidecar '" + where +
                        "': 'calibration' is only used with a tof_ns axis; "
                        "it is kept as an extra key and not applied");
  }

  // --- meta --------------------------------------------------------------------------------
  Trace trace;
  TraceMeta& meta = trace.meta;
  meta.source = sidecar_path;
  meta.image = image;
  if (sc.has("kind")) {
    const std::string k = sc.string(sc.at("kind"), "kind");
    if (!parse_trace_kind(k, &meta.kind))
      sc.fail("kind", "is '" + k +
                          "'; expected one of: streaking, rabbitt, xuv_only (or leave "
                          "it out)");
  }
  if (sc.has("gas")) meta.gas = sc.string(sc.at("gas"), "gas");
  if (sc.has("ir_wavelength_nm")) {
    meta.ir_wavelength_nm = sc.number(sc.at("ir_wavelength_nm"), "ir_wavelength_nm");
    if (!(meta.ir_wavelength_nm >= ranges::kMinIrWavelengthNm &&
          meta.ir_wavelength_nm <= ranges::kMaxIrWavelengthNm))
      sc.fail("ir_wavelength_nm", "is " + format_g(meta.ir_wavelength_nm) +
                                      "; expected a wavelength in [" +
                                      format_g(ranges::kMinIrWavelengthNm) + ", " +
                                      format_g(ranges::kMaxIrWavelengthNm) + "] nm");
  }
  if (overrides.gas) meta.gas = *overrides.gas;
  if (overrides.ir_wavelength_nm) {
    const double w = *overrides.ir_wavelength_nm;
    if (!(w >= ranges::kMinIrWavelengthNm && w <= ranges::kMaxIrWavelengthNm))
      throw input_error("the IR wavelength override for '" + where + "' is " + format_g(w) +
                        " nm; expected a wavelength in [" + format_g(ranges::kMinIrWavelengthNm) +
                        ", " + format_g(ranges::kMaxIrWavelengthNm) + "] nm");
    meta.ir_wavelength_nm = w;
  }
  if (overrides.kind) meta.kind = *overrides.kind;
  double fit_ip_eV = 0.0;
  if (fit_request.fit) {
    // The harmonic energies q hbar omega - Ip need both the gas (Ip) and the IR wavelength.
    const std::string why =
        " is needed by calibration.fit = \"harmonics\": the peaks are assigned the known "
        "energies q hbar omega - Ip";
    if (meta.gas.empty())
      sc.fail("gas", "is missing;" + why +
                         " (Ip of the gas); give e.g. \"gas\": \"Ar\" (or a gas override of "
                         "the command line or batch manifest), or a fixed calibration");
    if (!(meta.ir_wavelength_nm > 0))
      sc.fail("ir_wavelength_nm",
              "is missing;" + why +
                  " (hbar omega = h c / lambda); give e.g. \"ir_wavelength_nm\": 800 (or a "
                  "wavelength override), or a fixed calibration");
    try {
      fit_ip_eV = find_gas(meta.gas).ionization_energy_eV;
    } catch (const Error& e) {
      sc.fail("gas", std::string(e.what()) + " (needed by calibration.fit)");
    }
  }
  if (sc.has("scale")) {
    meta.scale = sc.number(sc.at("scale"), "scale");
    if (!(meta.scale > 0))
      sc.fail("scale", "is " + format_g(meta.scale) + "; expected counts per image unit > 0");
    if (!(meta.scale >= ranges::kMinScale && meta.scale <= ranges::kMaxScale))
      sc.fail("scale", "is " + format_g(meta.scale) + "; expected counts per image unit in [" +
                           format_g(ranges::kMinScale) + ", " + format_g(ranges::kMaxScale) + "]");
  }
  if (sc.has("background")) {
    const json& b = sc.at("background");
    if (b.is_string()) {
      if (b.get<std::string>() != "auto")
        sc.fail("background", "is '" + b.get<std::string>() +
                                  "'; expected a number of counts per bin >= 0 or \"auto\"");
      meta.background_auto = true;
    } else {
      const double v = sc.number(b, "background");
      if (v < 0 || v > ranges::kMaxCounts)
        sc.fail("background", "is " + format_g(v) + "; expected counts per bin in [0, " +
                                  format_g(ranges::kMaxCounts) + "] or \"auto\"");
      meta.background = v;
    }
  }
  if (sc.has("energy_resolution_eV")) {
    const double v = sc.number(sc.at("energy_resolution_eV"), "energy_resolution_eV");
    if (v < 0 || v > ranges::kMaxResolutionEV)
      sc.fail("energy_resolution_eV", "is " + format_g(v) + "; expected a FWHM in [0, " +
                                          format_g(ranges::kMaxResolutionEV) + "] eV");
    meta.energy_resolution_eV = v;
  }
  if (sc.has("notes")) {
    const json& n = sc.at("notes");
    if (n.is_array()) {
      for (std::size_t i = 0; i < n.size(); ++i)
        meta.notes += (i ? "\n" : "") + sc.string(n[i], "notes[" + std::to_string(i) + "]");
    } else {
      meta.notes = sc.string(n, "notes");
    }
  }
  if (sc.has("energy_window_eV")) {
    const json& w = sc.at("energy_window_eV");
    if (!w.is_array() || w.size() != 2)
      sc.fail("energy_window_eV", std::string("is ") + type_name(w) +
                                      "; expected [lo, hi] in eV (photoelectron kinetic energy)");
    const double lo = sc.number(w[0], "energy_window_eV[0]");
    const double hi = sc.number(w[1], "energy_window_eV[1]");
    if (!(lo < hi))
      sc.fail("energy_window_eV",
              "is [" + format_g(lo) + ", " + format_g(hi) + "]; expected lo < hi (eV)");
    meta.energy_window_eV = {lo, hi};
  }
  if (sc.has("saturation_counts")) {
    const double v = sc.number(sc.at("saturation_counts"), "saturation_counts");
    if (!(v > 0))
      sc.fail("saturation_counts", "is " + format_g(v) + "; expected counts per bin > 0");
    meta.saturation_counts = v;
  }
  if (sc.has("lines")) {
    const json& ls = sc.at("lines");
    if (!ls.is_array())
      sc.fail("lines", std::string("is ") + type_name(ls) +
                           "; expected an array of {\"name\", \"ionization_energy_eV\"}");
    if (ls.size() > limits::kMaxDeclaredLines)
      sc.fail("lines", "lists " + std::to_string(ls.size()) + " lines, above the limit of " +
                           std::to_string(limits::kMaxDeclaredLines) +
                           "; list only the lines of the scan's gases on its energy axis");
    for (std::size_t i = 0; i < ls.size(); ++i) {
      const std::string f = "lines[" + std::to_string(i) + "]";
      const json& l = ls[i];
      if (!l.is_object())
        sc.fail(f, std::string("is ") + type_name(l) +
                       "; expected {\"name\": ..., \"ionization_energy_eV\": number or \"auto\"}");
      DeclaredLine d;
      if (!l.contains("name"))
        sc.fail(f + ".name", "is missing; expected the line's name, e.g. \"2s\"");
      d.name = sc.string(l.at("name"), f + ".name");
      if (d.name.empty() || d.name.size() > 32)
        sc.fail(f + ".name",
                "has " + std::to_string(d.name.size()) + " characters; expected 1 to 32");
      if (l.contains("gas")) d.gas = sc.string(l.at("gas"), f + ".gas");
      if (!l.contains("ionization_energy_eV"))
        sc.fail(f + ".ionization_energy_eV",
                "is missing; expected a binding energy in eV or \"auto\"");
      const json& ie = l.at("ionization_energy_eV");
      if (ie.is_string()) {
        if (ie.get<std::string>() != "auto")
          sc.fail(f + ".ionization_energy_eV",
                  "is a string other than \"auto\"; expected eV or \"auto\"");
      } else {
        const double v = sc.number(ie, f + ".ionization_energy_eV");
        if (!(v > 0))
          sc.fail(f + ".ionization_energy_eV", "is " + format_g(v) + "; expected > 0 eV");
        d.ionization_energy_eV = v;
      }
      if (l.contains("relative_strength")) {
        const double v = sc.number(l.at("relative_strength"), f + ".relative_strength");
        if (!(v > 0)) sc.fail(f + ".relative_strength", "is " + format_g(v) + "; expected > 0");
        d.relative_strength = v;
      }
      meta.lines.push_back(d);
    }
  }
  const auto& known = known_sidecar_keys();
  for (auto it = sc.root().begin(); it != sc.root().end(); ++it)
    if (std::find(known.begin(), known.end(), it.key()) == known.end() ||
        (it.key() == "calibration" && !tof))
      echo_extra(sc, it.key(), it.value(), &meta, warnings);

  // --- data --------------------------------------------------------------------------------
  std::string shown;
  Eigen::MatrixXd m = load_image(sc, image, warnings, &shown, policy);
  if (m.rows() == 0 || m.cols() == 0)
    sc.fail("image", "the data file '" + shown + "' is empty; expected a matrix of counts");
  const Eigen::Index n_energy = energy_rows ? m.rows() : m.cols();
  const Eigen::Index n_delay = energy_rows ? m.cols() : m.rows();
  const std::string edim = energy_rows ? "rows" : "columns";
  const std::string ddim = energy_rows ? "columns" : "rows";
  auto check_count = [&](const std::string& key, std::size_t have, Eigen::Index want,
                         const std::string& dim, const char* what) {
    if (static_cast<Eigen::Index>(have) != want)
      sc.fail(key, "has " + std::to_string(have) + " values but the data file '" + shown +
                       "' has " + std::to_string(want) + " " + dim + " (layout " + layout + ": " +
                       what + " along the " + dim + "); expected the counts to match");
  };
  check_count(energy_key, energy_axis.size(), n_energy, edim,
              energy_key == "tof_ns" ? "flight times" : "energies");
  check_count(delay_key, delay_axis.size(), n_delay, ddim, "delays");
  for (Eigen::Index i = 0; i < m.rows(); ++i)
    for (Eigen::Index j = 0; j < m.cols(); ++j) {
      const double c = m(i, j);
      if (!std::isfinite(c) || c < 0) {
        std::ostringstream s;
        s << "the data file '" << shown << "' has "
          << (std::isnan(c)   ? "NaN"
              : std::isinf(c) ? "an infinite value"
                              : "a negative value (" + format_g(c) + ")")
          << " at row " << i << ", column " << j << " (0-based); expected finite counts >= 0";
        sc.fail("image", s.str());
      }
    }
  if (m.maxCoeff() == 0)
    sc.fail("image", "every value of the data file '" + shown +
                         "' is zero; expected a scan "
                         "with counts");
  // The analyses square and sum counts: keep the largest scaled count where that stays finite
  // and normal (no overflow to inf, no underflow to denormals and 0).
  if (const double peak = m.maxCoeff() * meta.scale;
      !(peak >= ranges::kMinPeakCounts && peak <= ranges::kMaxCounts))
    sc.fail("image", "the largest count of '" + shown + "' times scale is " + format_g(peak) +
                         "; expected it in [" + format_g(ranges::kMinPeakCounts) + ", " +
                         format_g(ranges::kMaxCounts) +
                         "] counts (set 'scale' to the counts per image unit)");
  if (meta.scale != 1.0) m *= meta.scale;

  // Rows = delays, columns = energies (or flight times).
  Eigen::MatrixXd counts = energy_rows ? Eigen::MatrixXd(m.transpose()) : std::move(m);
  if (descending(delay_axis)) {
    std::reverse(delay_axis.begin(), delay_axis.end());
    counts = counts.colwise().reverse().eval();
  }
  if (tof) {
    std::vector<Param>& rec = meta.calibration;
    auto R = [&](const std::string& k, auto v) { rec.push_back({"calibration." + k, v}); };
    std::optional<TofCalibrationFit> fit;
    if (fit_request.fit) {
      TofFitOptions fo;
      // Default step: the delay-summed spectrum of a RABBITT scan holds the sidebands (even
      // orders) between the odd harmonics; an XUV-only or streaking comb has odd orders only.
      fo.harmonic_step =
          fit_request.harmonic_step.value_or(meta.kind == TraceKind::kRabbitt ? 1 : 2);
      fo.fit_energy_offset = fit_request.fit_energy_offset.value_or(false);
      if (fit_request.min_peak_fraction) fo.min_peak_fraction = *fit_request.min_peak_fraction;
      std::vector<double> t, c;
      summed_spectrum(counts, energy_axis, &t, &c);
      try {
        fit = fit_tof_calibration(t, c, fit_ip_eV, meta.ir_wavelength_nm, cal, fo);
      } catch (const Error& e) {
        sc.fail("calibration.fit",
                "the harmonic fit of the time-of-flight calibration failed (" +
                    std::string(e.what()) + "; gas " + meta.gas + ", Ip " + format_g(fit_ip_eV) +
                    " eV, ir_wavelength_nm " + format_g(meta.ir_wavelength_nm) +
                    ", harmonic_step " + std::to_string(fo.harmonic_step) +
                    "); give a fixed calibration (leave 'fit' out), or check gas, "
                    "ir_wavelength_nm, the initial length_m / t0_ns and harmonic_step");
      }
      const TofCalibration initial = cal;
      cal = fit->calibration;
      R("source", std::string("fit: harmonics"));
      R("length_m", cal.length_m);
      R("length_m_sigma", fit->length_m_sigma);
      R("t0_ns", cal.t0_ns);
      R("t0_ns_sigma", fit->t0_ns_sigma);
      R("energy_offset_eV", cal.energy_offset_eV);
      if (fo.fit_energy_offset) R("energy_offset_eV_sigma", fit->energy_offset_eV_sigma);
      R("initial.length_m", initial.length_m);
      R("initial.t0_ns", initial.t0_ns);
      R("initial.energy_offset_eV", initial.energy_offset_eV);
      R("fit.gas", meta.gas);
      R("fit.ionization_energy_eV", fit_ip_eV);
      R("fit.ir_wavelength_nm", meta.ir_wavelength_nm);
      R("fit.photon_energy_eV", fit->photon_energy_eV);
      R("fit.harmonic_step", static_cast<long long>(fo.harmonic_step));
      R("fit.energy_offset_fitted", fo.fit_energy_offset);
      R("fit.peaks", static_cast<long long>(fit->peaks.size()));
      R("fit.rms_residual_eV", fit->rms_residual_eV);
      R("fit.converged", fit->converged);
      R("fit.iterations", static_cast<long long>(fit->iterations));
      R("fit.order_shift", static_cast<long long>(fit->order_shift));
      std::vector<double> orders, times, res_eV, res_ns;
      for (const TofPeak& p : fit->peaks) {
        orders.push_back(p.order);
        times.push_back(p.time_ns);
        res_eV.push_back(p.residual_eV);
        res_ns.push_back(p.residual_ns);
      }
      R("fit.peak_orders", orders);
      R("fit.peak_time_ns", times);
      R("fit.peak_residual_eV", res_eV);
      R("fit.peak_residual_ns", res_ns);
      R("fit.message", fit->message);
    } else {
      R("source", std::string("sidecar"));
      R("length_m", cal.length_m);
      R("t0_ns", cal.t0_ns);
      R("energy_offset_eV", cal.energy_offset_eV);
    }
    TofConversion conv = tof_to_energy(counts, energy_axis, cal, "sidecar '" + where + "'");
    if (conv.fraction_outside > 1e-9 && warnings) {
      std::ostringstream s;
      s.precision(3);
      s << "sidecar '" << where << "': " << 100.0 * conv.fraction_outside
        << " % of the counts fall outside the calibration energy window and were dropped";
      warnings->push_back(s.str());
    }
    const double step = conv.energy_eV.size() >= 2 ? conv.energy_eV[1] - conv.energy_eV[0] : 0.0;
    R("energy_step_eV", step);
    R("counts_outside_fraction", conv.fraction_outside);
    if (fit) {
      // A calibration error beyond the spectrometer's resolution (or, without one, beyond the
      // energy bin) moves features by more than the data can resolve.
      const bool have_res = meta.energy_resolution_eV && *meta.energy_resolution_eV > 0;
      const double limit = have_res ? *meta.energy_resolution_eV : step;
      if (fit->rms_residual_eV > limit) {
        std::ostringstream s;
        s.precision(3);
        s << "the time-of-flight calibration fitted to " << fit->peaks.size()
          << " harmonic peaks has an rms residual of " << fit->rms_residual_eV << " eV, above "
          << (have_res ? "the spectrometer resolution energy_resolution_eV = "
                       : "the energy step (no energy_resolution_eV given) of ")
          << limit << " eV: check gas, ir_wavelength_nm and harmonic_step, or give a fixed "
          << "calibration";
        R("warning", s.str());
        if (warnings) warnings->push_back("sidecar '" + where + "': " + s.str());
      }
    }
    energy_axis = std::move(conv.energy_eV);
    counts = std::move(conv.counts);
  } else if (descending(energy_axis)) {
    std::reverse(energy_axis.begin(), energy_axis.end());
    counts = counts.rowwise().reverse().eval();
  }
  trace.energy_au.resize(energy_axis.size());
  for (std::size_t j = 0; j < energy_axis.size(); ++j)
    trace.energy_au[j] = units::eV_to_au(energy_axis[j]);
  trace.delay_au.resize(delay_axis.size());
  for (std::size_t i = 0; i < delay_axis.size(); ++i)
    trace.delay_au[i] =
        units::fs_to_au(stage ? units::stage_travel_um_to_fs(delay_axis[i]) : delay_axis[i]);
  trace.counts = std::move(counts);
  trace.validate(sidecar_path);
  if (warnings_out) warnings_out->insert(warnings_out->end(), collected.begin(), collected.end());
  trace.meta.read_warnings = std::move(collected);
  return trace;
}

}  // namespace sw
