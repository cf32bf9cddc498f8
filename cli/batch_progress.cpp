#include "cli/batch_progress.h"

#include <sys/ioctl.h>
#include <unistd.h>

#include <cstdio>

#include "cli/progress.h"

namespace sw::cli {

namespace {

std::string clock_text(double s) {
  if (!(s >= 0) || s > 1e7) return "--";
  const long long t = static_cast<long long>(s + 0.5);
  char buf[32];
  if (t >= 3600)
    std::snprintf(buf, sizeof buf, "%lld:%02lld:%02lld", t / 3600, (t / 60) % 60, t % 60);
  else
    std::snprintf(buf, sizeof buf, "%lld:%02lld", t / 60, t % 60);
  return buf;
}

}  // namespace

BatchProgress::BatchProgress(std::size_t total, bool quiet)
    : total_(total),
      quiet_(quiet),
      tty_(Progress::stderr_is_terminal()),
      start_(std::chrono::steady_clock::now()),
      last_draw_() {}

BatchProgress::~BatchProgress() { done(); }

std::string BatchProgress::bar_locked() const {
  const int width = 24;
  const int filled = total_ ? static_cast<int>(width * done_ / total_) : width;
  std::string bar(1, '[');
  bar.append(static_cast<std::size_t>(filled), '#');
  bar.append(static_cast<std::size_t>(width - filled), '.');
  bar += ']';
  const double elapsed =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
  const double rate = elapsed > 0 ? static_cast<double>(analysed_) / elapsed : 0.0;
  const double eta = rate > 0 ? static_cast<double>(total_ - done_) / rate : -1.0;
  char buf[160];
  std::snprintf(buf, sizeof buf, " %zu/%zu  ok %zu  failed %zu  %.2f scans/s  ETA %s", done_,
                total_, done_ - failed_, failed_, rate,
                done_ == total_ ? "0:00" : clock_text(eta).c_str());
  std::string line = bar + buf;
  if (!running_.empty()) {
    std::string names;
    for (const auto& r : running_) names += (names.empty() ? "" : ", ") + r;
    if (names.size() > 60) names = names.substr(0, 57) + "...";
    line += "  running: " + names;
  }
  return line;
}

void BatchProgress::draw_locked(bool force) {
  if (quiet_ || !tty_) return;
  const auto now = std::chrono::steady_clock::now();
  if (!force && std::chrono::duration<double>(now - last_draw_).count() < 0.25) return;
  last_draw_ = now;
  std::string line = bar_locked();
  struct winsize ws {};
  if (ioctl(STDERR_FILENO, TIOCGWINSZ, &ws) == 0 && ws.ws_col > 10 && line.size() >= ws.ws_col)
    line.resize(ws.ws_col - 1);  // a wrapped line could not be redrawn in place
  std::fprintf(stderr, "\r\033[K%s", line.c_str());
  std::fflush(stderr);
  open_line_ = true;
}

void BatchProgress::started(const std::string& scan) {
  std::lock_guard<std::mutex> lock(mutex_);
  running_.insert(scan);
  draw_locked(false);
}

void BatchProgress::finished(const std::string& scan, bool ok, bool reused,
                             const std::string& message, double seconds) {
  std::lock_guard<std::mutex> lock(mutex_);
  running_.erase(scan);
  ++done_;
  if (!ok) ++failed_;
  if (reused)
    ++reused_;
  else
    ++analysed_;
  if (quiet_) return;
  if (tty_) {
    if (!ok) {
      std::fprintf(stderr, "\r\033[KFAILED %s: %s\n", scan.c_str(), message.c_str());
      open_line_ = false;
    }
    draw_locked(true);
    return;
  }
  const int w = static_cast<int>(std::to_string(total_).size());
  if (!ok)
    std::fprintf(stderr, "batch [%*zu/%zu] FAILED  %s: %s\n", w, done_, total_, scan.c_str(),
                 message.c_str());
  else if (reused)
    std::fprintf(stderr, "batch [%*zu/%zu] reused  %s  (unchanged since the last run)\n", w, done_,
                 total_, scan.c_str());
  else
    std::fprintf(stderr, "batch [%*zu/%zu] ok      %s  %.2f s%s%s\n", w, done_, total_,
                 scan.c_str(), seconds, message.empty() ? "" : "  ", message.c_str());
  std::fflush(stderr);
}

void BatchProgress::note(const std::string& text) {
  std::lock_guard<std::mutex> lock(mutex_);
  if (quiet_) return;
  if (tty_ && open_line_) std::fprintf(stderr, "\r\033[K");
  std::fprintf(stderr, "%s\n", text.c_str());
  open_line_ = false;
  draw_locked(true);
}

void BatchProgress::tick() {
  std::lock_guard<std::mutex> lock(mutex_);
  draw_locked(false);
}

void BatchProgress::done() {
  std::lock_guard<std::mutex> lock(mutex_);
  if (quiet_ || !tty_) return;
  if (open_line_) {
    std::fprintf(stderr, "\r\033[K%s\n", bar_locked().c_str());
    open_line_ = false;
  }
}

std::size_t BatchProgress::finished_count() const {
  std::lock_guard<std::mutex> lock(mutex_);
  return done_;
}

std::size_t BatchProgress::failed_count() const {
  std::lock_guard<std::mutex> lock(mutex_);
  return failed_;
}

}  // namespace sw::cli
