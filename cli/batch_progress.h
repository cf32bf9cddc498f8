#pragma once
// Progress of a batch on stderr, safe to call from worker threads.
//  - Terminal: one redrawn line
//      [#########...........]  12/40  ok 11  failed 1  0.52 scans/s  ETA 0:53  running: a/b, c
//    with failures printed above it as they happen ("FAILED a/b: reason").
//  - Not a terminal (log files, cluster jobs): one plain line per finished scan,
//      batch [12/40] ok      a/b/scan_004  3.21 s
//      batch [13/40] FAILED  a/b/scan_005: the data file ... is truncated
//      batch [14/40] reused  a/c/scan_001  (unchanged since the last run)
// Rate and ETA count analysed scans only (reused ones take no time); the ETA assumes the
// remaining scans take as long as the analysed ones so far.

#include <chrono>
#include <mutex>
#include <set>
#include <string>

namespace sw::cli {

class BatchProgress {
 public:
  /// `total` scans to do; `quiet` prints nothing.
  BatchProgress(std::size_t total, bool quiet);
  ~BatchProgress();
  void started(const std::string& scan);
  /// A scan ended: ok, failed (with its message) or reused by --resume.
  void finished(const std::string& scan, bool ok, bool reused, const std::string& message,
                double seconds);
  /// A line of its own (e.g. "interrupted: ..."), printed above the bar.
  void note(const std::string& text);
  /// Redraws the bar if a terminal (ETA ticking); call periodically.
  void tick();
  /// Ends the bar's line.
  void done();

  std::size_t finished_count() const;
  std::size_t failed_count() const;

 private:
  void draw_locked(bool force);
  std::string bar_locked() const;
  mutable std::mutex mutex_;
  std::size_t total_, done_ = 0, failed_ = 0, reused_ = 0, analysed_ = 0;
  bool quiet_, tty_, open_line_ = false;
  std::set<std::string> running_;
  std::chrono::steady_clock::time_point start_, last_draw_;
};

}  // namespace sw::cli
