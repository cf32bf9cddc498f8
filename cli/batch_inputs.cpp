#include "cli/batch_inputs.h"

#include "cli/provenance.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <filesystem>
#include <map>
#include <set>

#include <nlohmann/json.hpp>

#include "cli/structured_file.h"
#include "io/atomic_file.h"
#include "retrieval/core/error.h"
#include "retrieval/core/trace.h"
#include "retrieval/engines/engine.h"

namespace sw::cli {

namespace {

namespace fs = std::filesystem;
using json = nlohmann::json;

std::string lower(std::string s) {
  for (char& c : s) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return s;
}

bool ends_with(const std::string& s, const std::string& suffix) {
  return s.size() >= suffix.size() &&
         s.compare(s.size() - suffix.size(), suffix.size(), suffix) == 0;
}

std::string trim(const std::string& s) {
  const auto a = s.find_first_not_of(" \t\r\n");
  if (a == std::string::npos) return "";
  return s.substr(a, s.find_last_not_of(" \t\r\n") - a + 1);
}

enum class FileRole { kSidecar, kManifest, kOther };

/// What a .json/.yaml/.yml file is: a sidecar ("streakwright" key, or unreadable but naming
/// it), a manifest ("scans" key), or something else.
FileRole classify_structured(const fs::path& p) {
  std::string text;
  try {
    text = read_file_bytes(p.string());
  } catch (const Error&) {
    return FileRole::kSidecar;  // unreadable: let the reader say why, as a failed scan
  }
  const std::string ext = lower(p.extension().string());
  if (ext == ".json") {
    const json j = json::parse(text, nullptr, false);
    if (j.is_discarded())
      return text.find("streakwright") != std::string::npos ? FileRole::kSidecar : FileRole::kOther;
    if (!j.is_object()) return FileRole::kOther;
    if (j.contains("streakwright")) return FileRole::kSidecar;
    if (j.contains("scans")) return FileRole::kManifest;
    return FileRole::kOther;
  }
  // YAML: a top-level key at the start of a line (no indentation).
  std::size_t pos = 0;
  bool scans = false;
  while (pos < text.size()) {
    const std::size_t end = std::min(text.find('\n', pos), text.size());
    const std::string line = text.substr(pos, end - pos);
    auto key_is = [&](const char* k) {
      const std::string kk(k);
      if (line.compare(0, kk.size(), kk) != 0) return false;
      const std::string rest = trim(line.substr(kk.size()));
      return !rest.empty() && rest[0] == ':';
    };
    if (key_is("streakwright") || key_is("\"streakwright\"")) return FileRole::kSidecar;
    if (key_is("scans") || key_is("\"scans\"")) scans = true;
    pos = end + 1;
  }
  return scans ? FileRole::kManifest : FileRole::kOther;
}

/// The folder of a file ("." for a bare file name).
fs::path folder_of(const fs::path& p) {
  return p.parent_path().empty() ? fs::path(".") : p.parent_path();
}

bool structured_ext(const fs::path& p) {
  const std::string ext = lower(p.extension().string());
  return ext == ".json" || ext == ".yaml" || ext == ".yml";
}

/// Names of files that are never sidecars even when structured.
bool excluded_name(const fs::path& p) {
  const std::string f = lower(p.filename().string());
  return ends_with(f, ".truth.json") || f == "result.json" || f == "summary.json";
}

std::string strip_ext(const fs::path& rel) {
  fs::path r = rel;
  r.replace_extension();
  return r.generic_string();
}

/// Scan name of `sidecar` under `root` (both made absolute and normal).
std::string name_under(const fs::path& sidecar, const fs::path& root) {
  const fs::path a = fs::absolute(sidecar).lexically_normal();
  const fs::path r = fs::absolute(root.empty() ? fs::path(".") : root).lexically_normal();
  fs::path rel = a.lexically_relative(r);
  if (rel.empty() || *rel.begin() == "..") rel = a.relative_path();
  return strip_ext(rel);
}

void check_name(const std::string& name, const std::string& origin) {
  if (name.empty()) throw usage_error(origin + ": empty scan name");
  const fs::path p(name);
  if (p.is_absolute())
    throw usage_error(origin + ": scan name '" + name + "' must be a relative path");
  for (const auto& part : p) {
    const std::string s = part.string();
    if (s.empty() || s == "." || s == ".." || s[0] == '.')
      throw usage_error(origin + ": scan name '" + name +
                        "' has a component starting with '.' (reserved for temporary folders); "
                        "rename the file or give a 'name' in a manifest");
  }
}

double parse_positive(const std::string& text, const std::string& where) {
  double v = 0;
  const char* b = text.data();
  const char* e = text.data() + text.size();
  const auto [ptr, ec] = std::from_chars(b, e, v);
  if (ec != std::errc() || ptr != e || !std::isfinite(v) || !(v > 0))
    throw usage_error(where + " = '" + text + "'; expected a number > 0");
  return v;
}

/// Fills one manifest entry from column/key -> value text; `where` names file and line.
BatchScan make_entry(const std::map<std::string, std::string>& cells, const std::string& where,
                     const fs::path& root) {
  BatchScan s;
  s.origin = where;
  for (const auto& [key, value] : cells) {
    if (value.empty()) continue;
    const std::string at = where + ", " + key;
    if (key == "scan" || key == "sidecar") {
      fs::path p(value);
      if (p.is_relative()) p = root / p;
      s.sidecar = p.lexically_normal().string();
    } else if (key == "name") {
      s.name = value;
    } else if (key == "gas") {
      s.overrides.gas = value;
    } else if (key == "ir_wavelength_nm") {
      s.overrides.ir_wavelength_nm = parse_positive(value, at);
    } else if (key == "engine") {
      if (value != "auto") {
        const auto names = engine_names();
        if (std::find(names.begin(), names.end(), value) == names.end()) {
          std::string list;
          for (const auto& n : names) list += (list.empty() ? "" : ", ") + n;
          throw usage_error(at + " = '" + value + "'; expected auto or one of: " + list);
        }
      }
      s.overrides.engine = value;
    } else if (key == "kind") {
      TraceKind k;
      if (!parse_trace_kind(value, &k))
        throw usage_error(at + " = '" + value + "'; expected streaking, rabbitt or xuv_only");
      s.overrides.kind = value;
    } else if (key == "analysis") {
      AnalysisKind a;
      if (!parse_analysis_kind(value, &a))
        throw usage_error(at + " = '" + value + "'; expected auto, retrieve, rabbitt or classify");
      s.analysis = a;
    } else {
      throw usage_error(where + ": unknown column '" + key +
                        "'; expected scan, name, gas, ir_wavelength_nm, engine, kind, analysis");
    }
  }
  if (s.sidecar.empty()) throw usage_error(where + ": no 'scan' (path of the sidecar) given");
  if (s.name.empty()) s.name = name_under(s.sidecar, root);
  check_name(s.name, where);
  return s;
}

std::vector<std::string> split_csv_line(const std::string& line, char sep) {
  std::vector<std::string> cells;
  std::string cur;
  bool quoted = false, was_quoted = false;
  for (std::size_t i = 0; i < line.size(); ++i) {
    const char c = line[i];
    if (quoted) {
      if (c == '"' && i + 1 < line.size() && line[i + 1] == '"') {
        cur += '"';
        ++i;
      } else if (c == '"') {
        quoted = false;
      } else {
        cur += c;
      }
    } else if (c == '"' && trim(cur).empty()) {
      quoted = was_quoted = true;
      cur.clear();
    } else if (c == sep) {
      cells.push_back(was_quoted ? cur : trim(cur));
      cur.clear();
      was_quoted = false;
    } else {
      cur += c;
    }
  }
  cells.push_back(was_quoted ? cur : trim(cur));
  return cells;
}

std::vector<BatchScan> read_manifest_structured(const fs::path& file) {
  const json j = read_structured_file(file.string(), "manifest");
  const json* list = &j;
  if (j.is_object()) {
    if (!j.contains("scans"))
      throw usage_error("manifest '" + file.string() + "': expected a \"scans\" list");
    list = &j["scans"];
  }
  if (!list->is_array())
    throw usage_error("manifest '" + file.string() +
                      "': \"scans\" must be a list of sidecar paths "
                      "or objects {scan: ..., gas: ..., ...}");
  std::vector<BatchScan> out;
  const fs::path root = folder_of(file);
  std::size_t i = 0;
  for (const auto& e : *list) {
    const std::string where = "manifest '" + file.string() + "' scans[" + std::to_string(i++) + "]";
    std::map<std::string, std::string> cells;
    if (e.is_string()) {
      cells["scan"] = e.get<std::string>();
    } else if (e.is_object()) {
      for (auto it = e.begin(); it != e.end(); ++it) {
        if (it.value().is_string())
          cells[it.key()] = it.value().get<std::string>();
        else if (it.value().is_number())
          cells[it.key()] = it.value().dump();
        else if (!it.value().is_null())
          throw usage_error(where + ", " + it.key() + ": expected a string or a number");
      }
    } else {
      throw usage_error(where + ": expected a sidecar path or an object {scan: ..., ...}");
    }
    out.push_back(make_entry(cells, where, root));
  }
  return out;
}

}  // namespace

std::vector<BatchScan> parse_manifest_csv(const std::string& text, const std::string& where,
                                          const std::string& root) {
  std::vector<BatchScan> out;
  std::vector<std::string> header;
  char sep = ',';
  std::size_t pos = 0;
  int line_no = 0;
  while (pos <= text.size()) {
    std::size_t end = text.find('\n', pos);
    if (end == std::string::npos) end = text.size();
    const std::string line = trim(text.substr(pos, end - pos));
    ++line_no;
    pos = end + 1;
    if (line.empty() || line[0] == '#') {
      if (end == text.size()) break;
      continue;
    }
    if (header.empty()) {
      sep = line.find(';') != std::string::npos && line.find(',') == std::string::npos ? ';' : ',';
      for (const std::string& h : split_csv_line(line, sep)) header.push_back(lower(h));
      if (std::find(header.begin(), header.end(), "scan") == header.end() &&
          std::find(header.begin(), header.end(), "sidecar") == header.end())
        throw usage_error("manifest '" + where + "' line " + std::to_string(line_no) +
                          ": the header must name a 'scan' column (the sidecar path); got '" +
                          line + "'");
    } else {
      const std::vector<std::string> cells = split_csv_line(line, sep);
      const std::string at = "manifest '" + where + "' line " + std::to_string(line_no);
      if (cells.size() > header.size())
        throw usage_error(at + ": " + std::to_string(cells.size()) + " cells but the header has " +
                          std::to_string(header.size()) + " columns");
      std::map<std::string, std::string> m;
      for (std::size_t k = 0; k < header.size(); ++k)
        m[header[k]] = k < cells.size() ? cells[k] : "";
      out.push_back(make_entry(m, at, root));
    }
    if (end == text.size()) break;
  }
  if (header.empty())
    throw usage_error("manifest '" + where + "' is empty; expected a header row and scans");
  return out;
}

std::vector<BatchScan> collect_scans(const std::vector<std::string>& inputs,
                                     const std::string& out_dir,
                                     std::vector<std::string>* skipped) {
  std::vector<BatchScan> all;
  std::error_code ec;
  const fs::path out_abs = fs::weakly_canonical(fs::absolute(out_dir), ec);
  for (const std::string& in : inputs) {
    const fs::path p(in);
    if (!fs::exists(p, ec))
      throw usage_error("input '" + in +
                        "' does not exist; expected a folder, a sidecar or a manifest");
    if (fs::is_directory(p, ec)) {
      std::vector<BatchScan> found;
      fs::recursive_directory_iterator it(p, fs::directory_options::skip_permission_denied, ec),
          end;
      if (ec) throw usage_error("input folder '" + in + "' cannot be listed: " + ec.message());
      for (; it != end; it.increment(ec)) {
        if (ec) throw usage_error("input folder '" + in + "' cannot be listed: " + ec.message());
        const fs::path& f = it->path();
        const std::string fname = f.filename().string();
        if (it->is_directory(ec)) {
          if (!fname.empty() && fname[0] == '.')
            it.disable_recursion_pending();
          else if (fs::weakly_canonical(f, ec) == out_abs)
            it.disable_recursion_pending();
          continue;
        }
        if (!fname.empty() && fname[0] == '.') continue;
        if (!structured_ext(f) || excluded_name(f) || !it->is_regular_file(ec)) continue;
        const FileRole role = classify_structured(f);
        if (role == FileRole::kSidecar) {
          BatchScan s;
          s.sidecar = f.string();
          s.name = name_under(f, p);
          s.origin = "folder '" + in + "'";
          check_name(s.name, s.origin + " file '" + f.string() + "'");
          found.push_back(std::move(s));
        } else if (skipped) {
          skipped->push_back(f.string() +
                             (role == FileRole::kManifest
                                  ? ": a manifest inside a searched folder is not "
                                    "expanded (give it as an input)"
                                  : ": no \"streakwright\" key (not a trace sidecar)"));
        }
      }
      all.insert(all.end(), found.begin(), found.end());
      continue;
    }
    const std::string ext = lower(p.extension().string());
    if (ext == ".csv") {
      std::string text;
      try {
        text = read_file_bytes(in);
      } catch (const Error& e) {
        throw usage_error(std::string("manifest: ") + e.what());
      }
      const auto rows = parse_manifest_csv(text, in, folder_of(p).string());
      all.insert(all.end(), rows.begin(), rows.end());
      continue;
    }
    if (!structured_ext(p))
      throw usage_error("input '" + in + "' has extension '" + ext +
                        "'; expected a folder, a sidecar (.json/.yaml/.yml) or a manifest "
                        "(.csv, or .json/.yaml with a \"scans\" list)");
    const FileRole role = classify_structured(p);
    if (role == FileRole::kManifest) {
      const auto rows = read_manifest_structured(p);
      all.insert(all.end(), rows.begin(), rows.end());
    } else if (role == FileRole::kSidecar) {
      BatchScan s;
      s.sidecar = in;
      s.name = name_under(p, folder_of(p));
      s.origin = "input '" + in + "'";
      check_name(s.name, s.origin);
      all.push_back(std::move(s));
    } else {
      throw usage_error("input '" + in +
                        "' is neither a trace sidecar (no \"streakwright\" key) "
                        "nor a manifest (no \"scans\" list)");
    }
  }
  // The same sidecar once (first occurrence wins); different sidecars never share a name.
  std::vector<BatchScan> unique;
  std::set<std::string> seen;
  std::map<std::string, std::string> by_name;
  for (auto& s : all) {
    const std::string key = fs::weakly_canonical(fs::absolute(s.sidecar), ec).string();
    if (!seen.insert(key).second) continue;
    const auto [it, inserted] = by_name.emplace(s.name, s.sidecar);
    if (!inserted)
      throw usage_error("two scans would share the output folder '" + s.name + "': '" + it->second +
                        "' and '" + s.sidecar + "' (" + s.origin +
                        "); give their common parent folder as the input, or names in a manifest");
    unique.push_back(std::move(s));
  }
  std::sort(unique.begin(), unique.end(),
            [](const BatchScan& a, const BatchScan& b) { return a.name < b.name; });
  return unique;
}

std::uint64_t fnv1a64(const std::string& s) { return fnv1a64_update(kFnv1a64Offset, s); }

bool parse_shard(const std::string& text, int* k, int* n) {
  const auto slash = text.find('/');
  if (slash == std::string::npos) return false;
  int a = 0, b = 0;
  const char* s = text.data();
  const auto r1 = std::from_chars(s, s + slash, a);
  const auto r2 = std::from_chars(s + slash + 1, s + text.size(), b);
  if (r1.ec != std::errc() || r1.ptr != s + slash || r2.ec != std::errc() ||
      r2.ptr != s + text.size() || b < 1 || a < 1 || a > b)
    return false;
  *k = a;
  *n = b;
  return true;
}

bool in_shard(const std::string& name, int k, int n) {
  return fnv1a64(name) % static_cast<std::uint64_t>(n) == static_cast<std::uint64_t>(k - 1);
}

unsigned long long scan_seed(unsigned long long base_seed, const std::string& name) {
  // splitmix64 finaliser (Steele, Lea and Flood, OOPSLA 2014) of base XOR name hash.
  std::uint64_t z = base_seed ^ fnv1a64(name);
  z += 0x9E3779B97F4A7C15ULL;
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
  return z ^ (z >> 31);
}

}  // namespace sw::cli
