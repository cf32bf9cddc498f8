#include "cli/batch_runner.h"

#include <fcntl.h>
#include <omp.h>
#include <signal.h>
#include <stdio.h>
#include <sys/types.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <charconv>
#include <condition_variable>
#include <cstring>
#include <filesystem>
#include <mutex>
#include <sstream>
#include <thread>

#include <nlohmann/json.hpp>

#include "cli/batch_progress.h"
#include "cli/output_folder.h"
#include "cli/provenance.h"
#include "cli/structured_file.h"
#include "io/atomic_file.h"
#include "io/input_guard.h"
#include "io/result_io.h"
#include "io/trace_reader.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/physics/dipole.h"
#include "streakwright_version.h"

namespace sw::cli {

namespace {

namespace fs = std::filesystem;

// --- signals ---------------------------------------------------------------------------------

std::atomic<int> g_interrupts{0};
static_assert(std::atomic<int>::is_always_lock_free, "signal handler needs a lock-free counter");

extern "C" void on_batch_signal(int sig) {
  const int step = sig == SIGTERM ? 2 : 1;  // SIGTERM abandons the running scans at once
  const int n = g_interrupts.fetch_add(step) + step;
  if (n >= 3) {
    static const char msg[] = "\nstreakwright batch: third interrupt, exiting now\n";
    const ssize_t w = write(STDERR_FILENO, msg, sizeof msg - 1);
    (void)w;
    _exit(130);
  }
}

// --- small helpers ---------------------------------------------------------------------------

std::string hex64(std::uint64_t h) {
  char buf[17];
  std::snprintf(buf, sizeof buf, "%016llx", static_cast<unsigned long long>(h));
  return buf;
}

/// Shortest text that reads back as the same double.
std::string num(double v) { return format_exact(v); }

/// A scan name as one path component: '%' and '/' escaped.
std::string escape_name(const std::string& name) {
  std::string out;
  for (char c : name) {
    if (c == '%')
      out += "%25";
    else if (c == '/')
      out += "%2F";
    else
      out += c;
  }
  return out;
}

/// What the batch needs from a sidecar before the analysis: the data file it names (for the
/// input hash) and the acquisition time. Never throws; empty on failure.
struct SidecarPeek {
  std::string image, acquired;
};

SidecarPeek peek_sidecar(const std::string& path, const TraceReadPolicy& policy) {
  SidecarPeek p;
  try {
    const nlohmann::json j = read_structured_file(path, "sidecar");
    if (j.is_object()) {
      if (j.contains("image") && j["image"].is_string()) p.image = j["image"].get<std::string>();
      if (j.contains("acquired") && j["acquired"].is_string())
        p.acquired = j["acquired"].get<std::string>();
    }
  } catch (...) {
  }
  if (p.image.empty()) {
    try {
      p.image = read_trace(path, nullptr, {}, policy).meta.image;  // the reader's JSON dialect
    } catch (...) {
    }
  }
  return p;
}

/// The existing result of a scan if --resume may reuse it.
std::optional<AnalysisResult> reusable(const fs::path& result_json, const std::string& input_hash,
                                       const std::string& options_hash) {
  std::error_code ec;
  if (input_hash.empty() || !fs::is_regular_file(result_json, ec)) return std::nullopt;
  try {
    AnalysisResult r = read_result_json(result_json.string());
    if (param_string(r.extra, "provenance.version") != STREAKWRIGHT_VERSION) return std::nullopt;
    if (param_string(r.extra, "provenance.input_hash_fnv1a64") != input_hash) return std::nullopt;
    if (param_string(r.extra, "batch.options_hash") != options_hash) return std::nullopt;
    return r;
  } catch (...) {
    return std::nullopt;
  }
}

/// Adds batch.seconds to a finished result.json (inside the temporary folder, before it is
/// renamed into place), preserving every other key and its order.
void add_seconds(const fs::path& result_json, double seconds) {
  nlohmann::ordered_json j = nlohmann::ordered_json::parse(read_file_bytes(result_json.string()));
  j["batch"]["seconds"] = seconds;
  write_file_atomic(result_json.string(), j.dump(2) + "\n");
}

std::mutex g_install_mutex;

/// Moves the finished temporary folder into place; returns "" or the reason it failed.
std::string install(const fs::path& tmp, const fs::path& final_dir, const fs::path& out,
                    const std::string& escaped) {
  std::lock_guard<std::mutex> lock(g_install_mutex);
  std::error_code ec;
  fs::create_directories(final_dir.parent_path(), ec);
  if (ec) return "cannot create '" + final_dir.parent_path().string() + "': " + ec.message();
  if (!fs::exists(final_dir, ec)) {
    fs::rename(tmp, final_dir, ec);
    return ec ? "cannot move the finished output to '" + final_dir.string() + "': " + ec.message()
              : "";
  }
  if (!fs::is_directory(final_dir, ec))
    return "cannot replace '" + final_dir.string() + "': it exists and is not a folder";
  if (!looks_like_output_folder(final_dir.string()))
    return "refusing to replace '" + printable_path(final_dir.string()) +
           "': it exists and holds files but no result.json, so it is not an output of this "
           "program (nothing was deleted); choose another --out";
  fs::path previous = tmp;  // after the exchange the temporary name holds the previous folder
  if (renameat2(AT_FDCWD, tmp.c_str(), AT_FDCWD, final_dir.c_str(), RENAME_EXCHANGE) != 0) {
    previous = out / (".old-" + escaped + "-" + std::to_string(getpid()));
    fs::remove_all(previous, ec);
    fs::rename(final_dir, previous, ec);
    if (ec) return "cannot move the previous '" + final_dir.string() + "' aside: " + ec.message();
    fs::rename(tmp, final_dir, ec);
    if (ec) {
      std::error_code ec2;
      fs::rename(previous, final_dir, ec2);
      return "cannot move the finished output to '" + final_dir.string() + "': " + ec.message();
    }
  }
  // Carry over sub-folders of other scans nested under this one (OUT/a/b inside OUT/a).
  for (const auto& e : fs::directory_iterator(previous, ec)) {
    std::error_code ec3;
    if (e.is_directory(ec3) && !fs::exists(final_dir / e.path().filename(), ec3))
      fs::rename(e.path(), final_dir / e.path().filename(), ec3);
  }
  fs::remove_all(previous, ec);
  return "";
}

/// Removes temporary folders of batch processes that no longer run.
void remove_stale_temporaries(const fs::path& out) {
  std::error_code ec;
  for (const auto& e : fs::directory_iterator(out, ec)) {
    const std::string n = e.path().filename().string();
    if (n.rfind(".tmp-", 0) != 0 && n.rfind(".old-", 0) != 0) continue;
    const auto dash = n.rfind('-');
    if (dash == std::string::npos) continue;
    char* end = nullptr;
    const long pid = std::strtol(n.c_str() + dash + 1, &end, 10);
    if (!end || *end != '\0' || pid <= 0) continue;
    if (kill(static_cast<pid_t>(pid), 0) == -1 && errno == ESRCH) fs::remove_all(e.path(), ec);
  }
}

/// Removes a temporary folder unless released (every exit path of a worker).
class TempFolder {
 public:
  explicit TempFolder(fs::path p) : path_(std::move(p)) {
    std::error_code ec;
    fs::remove_all(path_, ec);
  }
  ~TempFolder() {
    std::error_code ec;
    if (!path_.empty()) fs::remove_all(path_, ec);
  }
  TempFolder(const TempFolder&) = delete;
  TempFolder& operator=(const TempFolder&) = delete;
  const fs::path& path() const { return path_; }

 private:
  fs::path path_;
};

struct Effective {
  AnalysisKind analysis;
  ScanOverrides overrides;
};

Effective effective(const BatchScan& s, const BatchOptions& o) {
  Effective e;
  e.analysis = s.analysis.value_or(o.analysis);
  e.overrides = o.overrides;
  if (s.overrides.gas) e.overrides.gas = s.overrides.gas;
  if (s.overrides.ir_wavelength_nm) e.overrides.ir_wavelength_nm = s.overrides.ir_wavelength_nm;
  if (s.overrides.engine) e.overrides.engine = s.overrides.engine;
  if (s.overrides.kind) e.overrides.kind = s.overrides.kind;
  return e;
}

// Worker threads per scan: as given, or (0, the default) the machine's cores with one job and
// one thread per job with --jobs > 1.
int engine_threads(const BatchOptions& o) {
  return o.jobs > 1 && o.retrieve.threads == 0 ? 1 : o.retrieve.threads;
}

}  // namespace

std::string BatchOptions::validate() const {
  if (out_dir.empty()) return "--out is empty; expected the batch output folder";
  if (jobs < 1) return "--jobs = " + std::to_string(jobs) + "; expected >= 1";
  if (shard_n < 1 || shard_k < 1 || shard_k > shard_n)
    return "--shard " + std::to_string(shard_k) + "/" + std::to_string(shard_n) +
           "; expected K/N with 1 <= K <= N";
  if (const std::string e = validate_described(rabbitt); !e.empty()) return e;
  if (const std::string e = retrieve.validate(); !e.empty()) return e;
  return {};
}

namespace {

// The options of a batch string, from the descriptions: `name=value` for every field with
// batch = true (RabbittAnalysisOptions::describe: atomic_correction, then
// RetrieveOptions::describe), with the seed, engine and thread count the scans actually get.
void append_option_texts(std::ostringstream& s, const BatchOptions& o, const std::string& seed_key,
                         const std::string& seed, const std::string& engine) {
  for (const auto& [k, v] : described_texts(o.rabbitt)) s << ";" << k << "=" << v;
  for (auto [k, v] : described_texts(o.retrieve)) {
    if (k == "seed") {
      k = seed_key;
      v = seed;
    } else if (k == "engine")
      v = engine;
    else if (k == "threads")
      v = std::to_string(engine_threads(o));
    s << ";" << k << "=" << v;
  }
  const RetrieveOptions& r = o.retrieve;
  for (const std::string& k : r.engine_settings.given)
    s << ";engine." << k << "=" << r.engine_settings.text(k);
  if (r.preprocess.energy_window_lo_eV != 0 || r.preprocess.energy_window_hi_eV != 0)
    s << ";energy_window=" << num(r.preprocess.energy_window_lo_eV) << ":"
      << num(r.preprocess.energy_window_hi_eV);
}

}  // namespace

std::string batch_options_string(const BatchOptions& o) {
  std::ostringstream s;
  s << "analysis=" << to_string(o.analysis);
  append_option_texts(s, o, "base_seed", std::to_string(o.retrieve.seed), o.retrieve.engine);
  // Only when not the default, so results written before the option existed stay reusable.
  if (o.figure_format != plot::FigureFormat::kPng)
    s << ";figure_format=" << to_string(o.figure_format);
  return s.str();
}

std::string scan_options_string(const BatchScan& scan, const BatchOptions& o) {
  const Effective e = effective(scan, o);
  std::ostringstream s;
  s << "analysis=" << to_string(e.analysis);
  append_option_texts(s, o, "seed", std::to_string(scan_seed(o.retrieve.seed, scan.name)),
                      e.overrides.engine.value_or(o.retrieve.engine));
  s << ";override.gas=" << e.overrides.gas.value_or("") << ";override.ir_wavelength_nm="
    << (e.overrides.ir_wavelength_nm ? num(*e.overrides.ir_wavelength_nm) : "")
    << ";override.kind=" << e.overrides.kind.value_or("");
  // Only when not the default, so results written before the option existed stay reusable;
  // --resume then redoes a scan whose figures are in the other format.
  if (o.figure_format != plot::FigureFormat::kPng)
    s << ";figure_format=" << to_string(o.figure_format);
  return s.str();
}

BatchReport run_batch(const std::vector<BatchScan>& scans, const BatchOptions& o) {
  if (const std::string e = o.validate(); !e.empty()) throw usage_error(e);
  const auto t_start = std::chrono::steady_clock::now();
  const fs::path out(o.out_dir);
  {
    std::error_code ec;
    fs::create_directories(out, ec);
    if (ec)
      throw input_error("cannot create the batch output folder '" + o.out_dir +
                        "': " + ec.message());
  }
  remove_stale_temporaries(out);

  StopSignalHandlers signals(g_interrupts, on_batch_signal);
  BatchProgress progress(scans.size(), o.quiet);
  std::vector<SummaryRow> rows(scans.size());
  std::vector<char> started(scans.size(), 0);
  std::atomic<std::size_t> next{0};
  const int jobs =
      std::max(1, std::min<int>(o.jobs, static_cast<int>(std::max<std::size_t>(1, scans.size()))));

  auto process = [&](std::size_t i) {
    const BatchScan& s = scans[i];
    SummaryRow& row = rows[i];
    row.scan = s.name;
    row.input = s.sidecar;
    const Effective e = effective(s, o);
    row.analysis = to_string(e.analysis);
    const fs::path final_dir = out / fs::path(s.name);
    std::error_code ec;  // this worker's own
    if (!is_valid_utf8(s.sidecar) || !is_valid_utf8(s.name)) {
      row.scan = printable_path(s.name);
      row.input = printable_path(s.sidecar);
      row.status = "failed";
      row.message = "sidecar '" + row.input +
                    "': the file name is not valid UTF-8, which result.json and the summaries "
                    "cannot record; expected a UTF-8 file name (rename the file)";
      progress.started(row.scan);
      progress.finished(row.scan, false, false, row.message, 0.0);
      return;
    }
    progress.started(s.name);
    try {
      const std::string options = scan_options_string(s, o);
      const std::string options_hash = hex64(fnv1a64(options));
      const SidecarPeek peek = peek_sidecar(s.sidecar, o.read_policy);
      const std::string hash = input_hash(s.sidecar, peek.image);
      row.input_hash = hash;
      row.acquired = peek.acquired;
      if (o.resume) {
        if (auto r = reusable(final_dir / "result.json", hash, options_hash)) {
          row = row_from_result(s.name, *r);
          row.input = s.sidecar;
          row.reused = true;
          if (fs::exists(final_dir / "report.html", ec)) row.report = s.name + "/report.html";
          progress.finished(s.name, true, true, "", 0.0);
          return;
        }
      }
      const std::string escaped = escape_name(s.name);
      TempFolder tmp(out / (".tmp-" + escaped + "-" + std::to_string(getpid())));
      ScanJob job;
      job.sidecar = s.sidecar;
      job.out_dir = tmp.path().string();
      job.analysis = e.analysis;
      job.overrides = e.overrides;
      job.retrieve = o.retrieve;
      job.retrieve.seed = scan_seed(o.retrieve.seed, s.name);
      job.retrieve.threads = engine_threads(o);
      job.rabbitt = o.rabbitt;
      job.quiet = true;
      job.figure_format = o.figure_format;
      job.read_policy = o.read_policy;
      job.progress = [](const std::string&, const std::string&) {
        if (g_interrupts.load() >= 2)
          throw Error(ErrorKind::kInternal,
                      "abandoned after a second interrupt (partial output removed)");
      };
      job.extra_provenance = {{"batch.scan", s.name},
                              {"batch.options", options},
                              {"batch.options_hash", options_hash},
                              {"batch.seed", std::to_string(job.retrieve.seed)}};
      if (!peek.acquired.empty()) job.extra_provenance.push_back({"batch.acquired", peek.acquired});
      const ScanOutcome oc = run_scan(job);
      row.analysis =
          to_string(oc.analysis_run != AnalysisKind::kAuto ? oc.analysis_run : e.analysis);
      if (!oc.ok) {
        row.status = "failed";
        row.message = oc.message;
        row.seconds = oc.seconds;
        progress.finished(s.name, false, false, row.message, oc.seconds);
        return;
      }
      add_seconds(tmp.path() / "result.json", oc.seconds);
      SummaryRow r =
          row_from_result(s.name, read_result_json((tmp.path() / "result.json").string()));
      r.input = s.sidecar;
      if (const std::string why = install(tmp.path(), final_dir, out, escaped); !why.empty()) {
        row.status = "failed";
        row.message = why;
        progress.finished(s.name, false, false, why, oc.seconds);
        return;
      }
      if (fs::exists(final_dir / "report.html", ec)) r.report = s.name + "/report.html";
      row = r;
      progress.finished(s.name, true, false, row.message, oc.seconds);
    } catch (const std::exception& ex) {
      row.status = "failed";
      row.message = std::string("batch: ") + ex.what();
      progress.finished(s.name, false, false, row.message, 0.0);
    }
  };

  std::mutex done_mutex;
  std::condition_variable done_cv;
  int running_workers = jobs;
  std::vector<std::thread> workers;
  for (int w = 0; w < jobs; ++w)
    workers.emplace_back([&] {
      // OpenMP regions outside the engines (preprocessing, analyses) stay on this thread too.
      if (jobs > 1) omp_set_num_threads(1);
      for (;;) {
        if (g_interrupts.load() > 0) break;
        const std::size_t i = next.fetch_add(1);
        if (i >= scans.size()) break;
        started[i] = 1;
        process(i);
      }
      std::lock_guard<std::mutex> lock(done_mutex);
      --running_workers;
      done_cv.notify_all();
    });
  int seen_interrupts = 0;
  {
    std::unique_lock<std::mutex> lock(done_mutex);
    while (running_workers > 0) {
      done_cv.wait_for(lock, std::chrono::milliseconds(250));
      const int n = g_interrupts.load();
      if (n != seen_interrupts) {
        seen_interrupts = n;
        lock.unlock();
        progress.note(n == 1
                          ? "streakwright batch: interrupted: no new scans start; waiting for the "
                            "running ones to finish (interrupt again to abandon them)"
                          : "streakwright batch: second interrupt: abandoning the running scans "
                            "(interrupt again to exit at once)");
        lock.lock();
      }
      lock.unlock();
      progress.tick();
      lock.lock();
    }
  }
  for (auto& t : workers) t.join();
  progress.done();

  BatchReport rep;
  rep.interrupted = g_interrupts.load() > 0;
  for (std::size_t i = 0; i < scans.size(); ++i) {
    SummaryRow& r = rows[i];
    if (!started[i]) {
      r.scan = scans[i].name;
      r.input = scans[i].sidecar;
      r.status = "failed";
      r.analysis = to_string(effective(scans[i], o).analysis);
      r.message = "not run: the batch was interrupted before this scan started";
      ++rep.not_run;
    }
    if (r.status == "ok")
      ++rep.ok;
    else
      ++rep.failed;
    if (r.reused) ++rep.reused;
  }
  rep.rows = std::move(rows);
  rep.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t_start).count();
  return rep;
}

}  // namespace sw::cli
