// `streakwright batch` end to end through the executable, on a synthetic archive with known
// content: mixed streaking and RABBITT scans in nested folders (one file name used twice) plus
// six kinds of broken scan. Checks: ok rows for the good scans, a failed row naming the problem
// for every broken one, untouched inputs, no temporary folders, --resume, --jobs invariance,
// and shards whose union (merged by summarize) equals a single-process run.
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <map>
#include <set>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "io/atomic_file.h"
#include "io/trace_writer.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "tests/test_support.h"

namespace fs = std::filesystem;
using nlohmann::json;

namespace {

using namespace sw::test;

// Fast analysis settings: few iterations, no bootstrap (the brief's recipe for test speed).
const std::string kFast = " --engine ptychographic --iterations 25 --bootstrap 0 -q";

/// Small streaking scan of the reference scenario (neon, 800 nm, 5 fs IR): 41 delays x 120
/// energies, enough for the CMA engines and fast to generate.
sw::synthetic::ScanConfig small_streaking(double gdd_as2) {
  sw::synthetic::ScanConfig c = sw::synthetic::find_preset("neon-150as").config;
  c.name = "test-streaking";
  c.xuv.gaussian.gdd_as2 = gdd_as2;
  c.geometry.energy_eV = {45.0, 0.5, 120};
  c.geometry.delay_fs = {-4.0, 0.2, 41};
  c.noise.peak_counts = 400.0;
  return c;
}

/// Small RABBITT scan: the argon-rabbitt preset on 27 delays and 0.1 eV bins.
sw::synthetic::ScanConfig small_rabbitt() {
  sw::synthetic::ScanConfig c = sw::synthetic::find_preset("argon-rabbitt").config;
  c.geometry.energy_eV = {3.0, 0.1, 321};
  c.geometry.delay_fs = {-1.3, 0.1, 27};
  return c;
}

sw::Trace generate(const sw::synthetic::ScanConfig& c, unsigned long long seed,
                   const std::string& acquired = "") {
  sw::Trace t = sw::synthetic::generate_scan(c, seed).trace;
  if (!acquired.empty()) t.meta.extra_json["acquired"] = "\"" + acquired + "\"";
  return t;
}

void write(const sw::Trace& t, const fs::path& sidecar, sw::TraceFormat f,
           sw::TraceLayout layout = sw::TraceLayout::kDelayRows) {
  fs::create_directories(sidecar.parent_path());
  sw::TraceWriteOptions o;
  o.layout = layout;
  sw::write_trace(t, sidecar.string(), f, o);
}

void edit_json(const fs::path& sidecar, const std::function<void(json&)>& f) {
  json j = json::parse(sw::read_file_bytes(sidecar.string()));
  f(j);
  std::ofstream(sidecar) << j.dump(2);
}

/// The broken scans and the words their failure message must contain.
const std::map<std::string, std::vector<std::string>>& broken_expectations() {
  static const std::map<std::string, std::vector<std::string>> m = {
      {"broken/truncated", {"truncated.png", "decoded"}},
      {"broken/axis_count", {"delay_fs", "has 42 values", "41"}},
      {"broken/missing_image", {"missing_image.png", "does not exist"}},
      {"broken/nan_values", {"NaN"}},
      {"broken/invalid_json", {"not valid JSON"}},
      {"broken/unknown_layout", {"layout", "diagonal"}},
  };
  return m;
}

const std::vector<std::string>& streaking_names() {
  static const std::vector<std::string> n = {"2023/run1/scan_a", "2023/run2/scan_a", "2024/scan_b",
                                             "2024/deep/x/scan_c"};
  return n;
}
const char* kRabbittName = "rabbitt/ar_1";

/// Builds the archive once per test process.
struct Archive {
  fs::path root, archive;
  Archive() {
    root = fs::temp_directory_path() / ("sw_test_batch_" + std::to_string(getpid()));
    fs::remove_all(root);
    archive = root / "archive";
    using sw::TraceFormat;
    const sw::Trace a = generate(small_streaking(0.0), 11, "2023-05-02T09:15:00Z");
    write(a, archive / "2023/run1/scan_a.json", TraceFormat::kPng16);
    write(generate(small_streaking(3000.0), 12, "2023-05-02T11:40:00Z"),
          archive / "2023/run2/scan_a.json", TraceFormat::kTiff);
    write(generate(small_streaking(-3000.0), 13, "2024-01-10T16:05:30+01:00"),
          archive / "2024/scan_b.yaml", TraceFormat::kCsv);
    write(generate(small_streaking(1500.0), 14, "2024-01-11T08:00:00Z"),
          archive / "2024/deep/x/scan_c.json", TraceFormat::kPng16, sw::TraceLayout::kEnergyRows);
    write(generate(small_rabbitt(), 15), archive / "rabbitt/ar_1.json", TraceFormat::kPng16);
    // Broken scans, each a good scan damaged in one way.
    const fs::path b = archive / "broken";
    write(a, b / "truncated.json", TraceFormat::kPng16);
    fs::resize_file(b / "truncated.png", fs::file_size(b / "truncated.png") / 2);
    write(a, b / "axis_count.json", TraceFormat::kPng16);
    edit_json(b / "axis_count.json", [](json& j) { j["delay_fs"]["count"] = 42; });
    write(a, b / "missing_image.json", TraceFormat::kPng16);
    fs::remove(b / "missing_image.png");
    write(a, b / "nan_values.json", TraceFormat::kCsv);
    {
      std::string csv = sw::read_file_bytes((b / "nan_values.csv").string());
      const auto comma = csv.find(',', csv.size() / 2);
      csv.replace(comma + 1, csv.find(',', comma + 1) - comma - 1, "nan");
      std::ofstream(b / "nan_values.csv") << csv;
    }
    write(a, b / "invalid_json.json", TraceFormat::kPng16);
    {
      const std::string s = sw::read_file_bytes((b / "invalid_json.json").string());
      std::ofstream(b / "invalid_json.json") << s.substr(0, s.size() / 2);
    }
    write(a, b / "unknown_layout.json", TraceFormat::kPng16);
    edit_json(b / "unknown_layout.json", [](json& j) { j["layout"] = "diagonal"; });
    // Files a search must skip: a truth record and a JSON file that is not a sidecar.
    std::ofstream(archive / "2024/notes.json") << "{\"operator\": \"night shift\"}";
    std::ofstream(archive / "2024/scan_b.truth.json") << "{\"streakwright_result\": 1}";
  }
  ~Archive() {
    std::error_code ec;
    fs::remove_all(root, ec);
  }
};

Archive& archive() {
  static Archive a;
  return a;
}

/// Content hash and modification time (ns) of every file below `dir`.
std::map<std::string, std::pair<std::string, long long>> tree_state(const fs::path& dir) {
  std::map<std::string, std::pair<std::string, long long>> m;
  for (const auto& e : fs::recursive_directory_iterator(dir)) {
    if (!e.is_regular_file()) continue;
    struct stat st;
    stat(e.path().c_str(), &st);
    const std::string bytes = sw::read_file_bytes(e.path().string());
    unsigned long long h = 1469598103934665603ULL;
    for (unsigned char c : bytes) h = (h ^ c) * 1099511628211ULL;
    m[fs::relative(e.path(), dir).generic_string()] = {
        std::to_string(h), st.st_mtim.tv_sec * 1000000000LL + st.st_mtim.tv_nsec};
  }
  return m;
}

long long mtime_ns(const fs::path& p) {
  struct stat st;
  if (stat(p.c_str(), &st) != 0) return -1;
  return st.st_mtim.tv_sec * 1000000000LL + st.st_mtim.tv_nsec;
}

std::vector<std::string> temporaries(const fs::path& dir) {
  std::vector<std::string> t;
  for (const auto& e : fs::recursive_directory_iterator(dir)) {
    const std::string n = e.path().filename().string();
    if (n.rfind(".tmp-", 0) == 0 || n.rfind(".old-", 0) == 0 ||
        n.find(".tmp-") != std::string::npos)
      t.push_back(e.path().string());
  }
  return t;
}

std::map<std::string, json> rows_by_scan(const fs::path& out) {
  const json s = json::parse(sw::read_file_bytes((out / "summary.json").string()));
  std::map<std::string, json> m;
  for (const auto& r : s["scans"]) m[r["scan"].get<std::string>()] = r;
  return m;
}

/// The numbers of a row that must not depend on scheduling (everything but timings, paths and
/// the reuse flag).
json numbers_of(json r) {
  for (const char* k : {"seconds", "report", "reused", "input"}) r.erase(k);
  return r;
}

/// Same keys, same strings, numbers equal to 1e-9 relative. Not bit-equal: FFTW_MEASURE picks
/// its FFT algorithm by timing each process's trial runs, so two processes can differ in the
/// last digits (~1e-14 relative, observed) even with one job each; the seeds, the order of the
/// work and hence everything above rounding are the same for any --jobs and --shard.
bool same_numbers(const json& a, const json& b, std::string* why) {
  if (a.size() != b.size()) {
    *why = "different keys: " + a.dump() + " vs " + b.dump();
    return false;
  }
  for (auto it = a.begin(); it != a.end(); ++it) {
    if (!b.contains(it.key())) {
      *why = "missing " + it.key();
      return false;
    }
    const json& x = it.value();
    const json& y = b[it.key()];
    if (x.is_number() && y.is_number()) {
      const double u = x.get<double>(), v = y.get<double>();
      if (std::abs(u - v) > 1e-9 * std::max(std::abs(u), std::abs(v))) {
        *why = it.key() + ": " + x.dump() + " vs " + y.dump();
        return false;
      }
    } else if (x != y) {
      *why = it.key() + ": " + x.dump() + " vs " + y.dump();
      return false;
    }
  }
  return true;
}

/// Checks that scan `n` has the same result numbers in rows `a` and `b` (same_numbers).
void check_same_numbers(const std::string& n, const json& a, const json& b) {
  std::string why;
  const bool same = same_numbers(numbers_of(a), numbers_of(b), &why);
  INFO(n << ": " << why);
  CHECK(same);
}

/// The single-process reference run (--jobs 2), made once.
const fs::path& reference_run() {
  static fs::path out;
  static CliOutput cli;
  if (out.empty()) {
    out = archive().root / "out_reference";
    cli = run_cli_apart("batch " + shell_quoted(archive().archive) + " --out " + shell_quoted(out) +
                        " --jobs 2" + kFast);
    INFO(cli.err);
    REQUIRE(cli.status == 5);  // broken scans present: documented exit status 5
  }
  return out;
}

}  // namespace

TEST_CASE("batch over a mixed archive: ok rows, specific failures, untouched inputs", "[batch]") {
  const auto before = tree_state(archive().archive);
  const fs::path& out = reference_run();
  CHECK(tree_state(archive().archive) == before);  // inputs never modified (DESIGN.md)
  CHECK(temporaries(out).empty());

  const auto rows = rows_by_scan(out);
  std::set<std::string> expected(streaking_names().begin(), streaking_names().end());
  expected.insert(kRabbittName);
  for (const auto& [n, words] : broken_expectations()) expected.insert(n);
  std::set<std::string> got;
  for (const auto& [n, r] : rows) got.insert(n);
  CHECK(got == expected);  // truth records and non-sidecar JSON skipped; duplicates kept apart

  for (const std::string& n : streaking_names()) {
    INFO(n << ": " << rows.at(n).dump());
    CHECK(rows.at(n)["status"] == "ok");
    CHECK(rows.at(n)["analysis"] == "retrieve");
    CHECK(rows.at(n)["fwhm_as"].get<double>() > 0);
    CHECK(rows.at(n).contains("trace_error"));
    CHECK(rows.at(n).contains("class"));
    CHECK(fs::is_regular_file(out / n / "result.json"));
    CHECK(fs::is_regular_file(out / n / "report.html"));
    CHECK(rows.at(n)["report"] == n + "/report.html");
    const json res = json::parse(sw::read_file_bytes((out / n / "result.json").string()));
    CHECK(res["batch"]["options_hash"].is_string());
    CHECK(res["batch"]["scan"] == n);
    CHECK(res["provenance"]["input_hash_fnv1a64"] == rows.at(n)["input_hash"]);
  }
  CHECK(rows.at("2023/run1/scan_a")["acquired"] == "2023-05-02T09:15:00Z");
  // The RABBITT scan: ok once that analysis is built in; until then a failed row that says so.
  const json& rb = rows.at(kRabbittName);
  INFO(rb.dump());
  CHECK(rb["analysis"] == "rabbitt");
  if (rb["status"] != "ok")
    CHECK(rb["message"].get<std::string>().find("rabbitt") != std::string::npos);
  else
    CHECK(rb["attochirp_as_per_eV"].get<double>() > 0);  // generated with 15 as/eV

  for (const auto& [n, words] : broken_expectations()) {
    INFO(n << ": " << rows.at(n).dump());
    CHECK(rows.at(n)["status"] == "failed");
    const std::string msg = rows.at(n)["message"].get<std::string>();
    for (const auto& w : words) CHECK(msg.find(w) != std::string::npos);
    CHECK(!fs::exists(out / n));  // no partial output of a failed scan
  }

  // summary.csv: the documented columns, one line per scan; failures listed first in index.html.
  const std::string csv = sw::read_file_bytes((out / "summary.csv").string());
  const std::string header = csv.substr(0, csv.find('\n'));
  for (const char* c :
       {"scan", "status", "message", "analysis", "class", "fwhm_as", "fwhm_as_sigma", "gdd_as2",
        "gdd_as2_sigma", "attochirp_as_per_eV", "attochirp_as_per_eV_sigma",
        "peak_vector_potential_au", "peak_vector_potential_au_sigma", "satellite_intensity_ratio",
        "satellite_intensity_ratio_sigma", "trace_error", "seconds"})
    CHECK((header + ",").find(std::string(c) + ",") != std::string::npos);
  CHECK(std::count(csv.begin(), csv.end(), '\n') == static_cast<long>(expected.size()) + 1);
  const std::string html = sw::read_file_bytes((out / "index.html").string());
  const auto failed_at = html.find("Failed scans (");
  CHECK(failed_at != std::string::npos);
  CHECK(failed_at < html.find("<h2>Scans</h2>"));
  for (const std::string& n : streaking_names())
    CHECK(html.find("href=\"" + n + "/report.html\"") != std::string::npos);
  CHECK(fs::file_size(out / "trend_fwhm.png") > 1000);
  CHECK(fs::file_size(out / "trend_attochirp.png") > 1000);
}

TEST_CASE("--jobs 1 and --jobs 2 give identical result numbers", "[batch]") {
  const fs::path& ref = reference_run();
  const fs::path out = archive().root / "out_jobs1";
  const CliOutput c = run_cli_apart("batch " + shell_quoted(archive().archive) + " --out " +
                                    shell_quoted(out) + " --jobs 1" + kFast);
  INFO(c.err);
  CHECK(c.status == 5);
  const auto a = rows_by_scan(ref), b = rows_by_scan(out);
  REQUIRE(a.size() == b.size());
  for (const auto& [n, r] : a) check_same_numbers(n, r, b.at(n));
}

TEST_CASE("--resume rewrites nothing when nothing changed and re-runs exactly the changed scans",
          "[batch]") {
  const fs::path src = archive().root / "resume_in";
  fs::remove_all(src);
  fs::create_directories(src);
  for (const char* d : {"2023", "2024"})
    fs::copy(archive().archive / d, src / d, fs::copy_options::recursive);
  fs::copy(archive().archive / "broken", src / "broken", fs::copy_options::recursive);
  const fs::path out = archive().root / "resume_out";
  const std::string base =
      "batch " + shell_quoted(src) + " --out " + shell_quoted(out) + " --jobs 2" + kFast;
  REQUIRE(run_cli_apart(base).status == 5);
  std::map<std::string, long long> t0;
  for (const auto& n : streaking_names()) t0[n] = mtime_ns(out / n / "result.json");

  const CliOutput same = run_cli_apart(base + " --resume");
  INFO(same.err);
  CHECK(same.status == 5);  // the broken scans are still broken
  for (const auto& n : streaking_names()) CHECK(mtime_ns(out / n / "result.json") == t0[n]);
  auto rows = rows_by_scan(out);
  for (const auto& n : streaking_names()) CHECK(rows.at(n).value("reused", false));
  CHECK(same.out.find("4 reused") != std::string::npos);

  // Change one input's content (a new image of the same scan) and another's sidecar.
  const sw::Trace redo = generate(small_streaking(0.0), 99);
  write(redo, src / "2023/run1/scan_a.json", sw::TraceFormat::kPng16);
  {
    std::string y = sw::read_file_bytes((src / "2024/scan_b.yaml").string());
    // A new key (a repeated one would be a duplicate-key error, io/trace_reader.h).
    y += "gain_note: \"re-read after the detector gain change\"\n";
    std::ofstream(src / "2024/scan_b.yaml") << y;
  }
  const CliOutput changed = run_cli_apart(base + " --resume");
  INFO(changed.err);
  CHECK(changed.status == 5);
  rows = rows_by_scan(out);
  for (const auto& n : streaking_names()) {
    const bool should_rerun = n == "2023/run1/scan_a" || n == "2024/scan_b";
    INFO(n);
    CHECK((mtime_ns(out / n / "result.json") != t0[n]) == should_rerun);
    CHECK(rows.at(n).value("reused", false) == !should_rerun);
    CHECK(rows.at(n)["status"] == "ok");
  }
  // Different analysis options: nothing is reused.
  const CliOutput opts =
      run_cli_apart("batch " + shell_quoted(src / "2024") + " --out " +
                    shell_quoted(archive().root / "resume_out2") + kFast + " --resume");
  CHECK(opts.status == 0);
  const CliOutput opts2 =
      run_cli_apart("batch " + shell_quoted(src / "2024") + " --out " +
                    shell_quoted(archive().root / "resume_out2") +
                    " --engine ptychographic --iterations 26 --bootstrap 0 -q --resume");
  CHECK(opts2.status == 0);
  CHECK(opts2.out.find("reused") == std::string::npos);
  CHECK(temporaries(out).empty());
}

TEST_CASE("shards: union is every scan exactly once; merged summary equals one process",
          "[batch]") {
  const fs::path& ref = reference_run();
  const fs::path dir = archive().root / "sharded";
  fs::remove_all(dir);
  // Shard membership is a function of the name only: stable when the inputs are reordered.
  const std::string a =
      shell_quoted(archive().archive / "2023") + " " + shell_quoted(archive().archive / "2024");
  const std::string b =
      shell_quoted(archive().archive / "2024") + " " + shell_quoted(archive().archive / "2023");
  for (int k = 1; k <= 3; ++k) {
    const std::string sh =
        " --shard " + std::to_string(k) + "/3 --dry-run --out " + shell_quoted(dir / "dry");
    CHECK(run_cli_apart("batch " + a + sh).out == run_cli_apart("batch " + b + sh).out);
  }
  // Three shard processes at the same time on the same input.
  std::vector<CliOutput> res(3);
  std::vector<std::thread> procs;
  for (int k = 1; k <= 3; ++k)
    procs.emplace_back([&, k] {
      res[static_cast<std::size_t>(k - 1)] = run_cli_apart(
          "batch " + shell_quoted(archive().archive) + " --shard " + std::to_string(k) +
          "/3 --out " + shell_quoted(dir / ("shard-" + std::to_string(k))) + " --jobs 1" + kFast);
    });
  for (auto& p : procs) p.join();
  std::multiset<std::string> names;
  for (int k = 1; k <= 3; ++k) {
    INFO(res[static_cast<std::size_t>(k - 1)].err);
    CHECK((res[static_cast<std::size_t>(k - 1)].status == 0 ||
           res[static_cast<std::size_t>(k - 1)].status == 5));
    for (const auto& [n, r] : rows_by_scan(dir / ("shard-" + std::to_string(k)))) names.insert(n);
    CHECK(temporaries(dir / ("shard-" + std::to_string(k))).empty());
  }
  const auto single = rows_by_scan(ref);
  std::multiset<std::string> all;
  for (const auto& [n, r] : single) all.insert(n);
  CHECK(names == all);  // every scan exactly once

  const CliOutput m = run_cli_apart(
      "summarize " + shell_quoted(dir / "shard-1") + " " + shell_quoted(dir / "shard-2") + " " +
      shell_quoted(dir / "shard-3") + " --out " + shell_quoted(dir / "merged"));
  INFO(m.err);
  REQUIRE(m.status == 0);
  const auto merged = rows_by_scan(dir / "merged");
  REQUIRE(merged.size() == single.size());
  for (const auto& [n, r] : single) {
    check_same_numbers(n, r, merged.at(n));
    // Links of the merged index point into the shard folders.
    if (r["status"] == "ok")
      CHECK(fs::exists(dir / "merged" / merged.at(n)["report"].get<std::string>()));
  }
  // The parent folder of the shards works as well (its shard-K/summary.json files are merged).
  const CliOutput p =
      run_cli_apart("summarize " + shell_quoted(dir) + " --out " + shell_quoted(dir / "merged2"));
  CHECK(p.status == 0);
  CHECK(rows_by_scan(dir / "merged2").size() == single.size());
}

TEST_CASE("manifests: per-scan names and overrides; bad usage exits 2 before any work", "[batch]") {
  const fs::path m = archive().root / "manifest.csv";
  std::ofstream(m) << "# scans to reprocess\n"
                   << "scan,name,gas,ir_wavelength_nm,analysis\n"
                   << "archive/2023/run1/scan_a.json,first,,,retrieve\n"
                   << "\"archive/2023/run2/scan_a.json\",second,Xx,,\n"
                   << "archive/2024/deep/x/scan_c.json,,,800,\n";
  const fs::path out = archive().root / "manifest_out";
  const CliOutput c =
      run_cli_apart("batch " + shell_quoted(m) + " --out " + shell_quoted(out) + kFast);
  INFO(c.err);
  CHECK(c.status == 5);
  const auto rows = rows_by_scan(out);
  REQUIRE(rows.size() == 3);
  CHECK(rows.at("first")["status"] == "ok");
  CHECK(rows.at("second")["status"] == "failed");  // gas override "Xx" is not a known gas
  CHECK(rows.at("second")["message"].get<std::string>().find("Xx") != std::string::npos);
  CHECK(rows.at("archive/2024/deep/x/scan_c")["status"] == "ok");

  // A manifest given by a bare file name (root = the current folder).
  const std::string dry = "cd " + shell_quoted(archive().root) + " && '" + STREAKWRIGHT_CLI_PATH +
                          "' batch manifest.csv --dry-run --out x > dry.txt";
  CHECK(std::system(dry.c_str()) == 0);
  CHECK(sw::read_file_bytes((archive().root / "dry.txt").string()).find("\nfirst\t") !=
        std::string::npos);

  // Usage errors: exit 2, nothing written.
  const fs::path none = archive().root / "usage_out";
  CHECK(run_cli_apart("batch " + shell_quoted(m) + " --out " + shell_quoted(none) + " --shard 4/3")
            .status == 2);
  CHECK(run_cli_apart("batch " + shell_quoted(archive().root / "nonexistent") + " --out " +
                      shell_quoted(none))
            .status == 2);
  CHECK(run_cli_apart("batch " + shell_quoted(m) + " --out " + shell_quoted(none) +
                      " --analysis everything")
            .status == 2);
  CHECK(!fs::exists(none / "summary.json"));
  // Two different sidecars that would write the same output folder.
  const fs::path dup = archive().root / "dup.csv";
  std::ofstream(dup)
      << "scan,name\narchive/2023/run1/scan_a.json,same\narchive/2024/scan_b.yaml,same\n";
  const CliOutput d = run_cli_apart("batch " + shell_quoted(dup) + " --out " + shell_quoted(none));
  CHECK(d.status == 2);
  CHECK(d.err.find("share the output folder 'same'") != std::string::npos);
}
