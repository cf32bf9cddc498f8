#pragma once
// Output folders that never endanger inputs and are never seen half-written
// (docs/cli.md "Output folders").
//
//  - check_output_folder(): an output folder that is, or contains, the folder of any input
//    (sidecar, data file, batch input root) is refused with a usage error (exit 2) before any
//    work, since replacing it could delete inputs. A folder inside an input's folder (scan/out)
//    is allowed: it holds outputs only, and its contents are replaced as a whole.
//  - OutputSwap: a single-scan command writes into a fresh temporary sibling
//    (PARENT/.NAME.partial-PID) and, once everything is written, exchanges it with NAME
//    (renameat2 RENAME_EXCHANGE, else rename aside and back) and deletes the old one: the old
//    result stays complete until the new one is. An existing NAME is replaced only if it looks
//    like a streakwright output (it has result.json, or holds no files at all); otherwise the
//    command refuses (exit 2). Leftovers of killed runs (their pid gone) are removed.
//  - BatchLock: OUT/.streakwright.lock (created with O_EXCL) holding "pid host start-time";
//    a second batch on the same folder refuses naming the holder; a lock whose pid no longer
//    runs on this host is taken over.
//  - InterruptScope: SIGINT/SIGTERM handlers for single-scan commands; the analysis checks
//    interrupted() at every iteration (through the progress callback) and stops.

#include <atomic>
#include <csignal>
#include <string>
#include <vector>

namespace sw::cli {

/// Throws usage_error (exit 2) if `out` is, or is an ancestor of, the folder of any file of
/// `input_files` or any folder of `input_roots`, or exists and is not a folder. `option`
/// names the option in the message ("--out").
void check_output_folder(const std::string& out, const std::vector<std::string>& input_files,
                         const std::vector<std::string>& input_roots,
                         const std::string& option = "--out");

/// The data file a sidecar names, resolved against the sidecar's folder (the ":/dataset"
/// part of an HDF5 reference removed); "" if it cannot be read cheaply.
std::string sidecar_data_file(const std::string& sidecar);

/// Whether `dir` looks like a folder streakwright wrote (result.json inside, or no files).
bool looks_like_output_folder(const std::string& dir);

/// See the file comment. Construct before the analysis (validates and creates the temporary
/// sibling); write into temp(); commit() swaps; the destructor removes what was not committed.
class OutputSwap {
 public:
  explicit OutputSwap(const std::string& out);
  ~OutputSwap();
  OutputSwap(const OutputSwap&) = delete;
  OutputSwap& operator=(const OutputSwap&) = delete;
  const std::string& temp() const { return temp_; }
  /// Puts the finished temporary folder in place of the output folder. Throws sw::Error.
  void commit();

 private:
  std::string out_, temp_;
  bool committed_ = false;
};

/// See the file comment. Throws usage_error naming the holder when the folder is locked.
class BatchLock {
 public:
  explicit BatchLock(const std::string& out_dir);
  ~BatchLock();
  BatchLock(const BatchLock&) = delete;
  BatchLock& operator=(const BatchLock&) = delete;

 private:
  std::string path_;
};

/// For its lifetime: `handler` (async-signal-safe, it may only touch `flag`) handles SIGINT and
/// SIGTERM; `flag` is set to 0 before the handler is installed. The previous handlers are
/// restored on destruction.
class StopSignalHandlers {
 public:
  StopSignalHandlers(std::atomic<int>& flag, void (*handler)(int));
  ~StopSignalHandlers();
  StopSignalHandlers(const StopSignalHandlers&) = delete;
  StopSignalHandlers& operator=(const StopSignalHandlers&) = delete;

 private:
  struct sigaction old_int_, old_term_;
};

/// SIGINT / SIGTERM for single-scan commands: the first one sets the flag (the analysis stops
/// at its next iteration, the temporary output is removed); a second one exits at once.
class InterruptScope {
 public:
  InterruptScope();
  /// The signal number received (0 = none).
  static int signal_received();
  /// The exit code of an interrupted command: 128 + signal number (130 SIGINT, 143 SIGTERM).
  static int exit_code() { return 128 + signal_received(); }

 private:
  StopSignalHandlers handlers_;
};

}  // namespace sw::cli
