#include "cli/progress.h"

#include <unistd.h>

#include <cstdio>

namespace sw::cli {

bool Progress::stderr_is_terminal() { return isatty(STDERR_FILENO) == 1; }

Progress::Progress(bool quiet) : quiet_(quiet), tty_(stderr_is_terminal()), last_() {}

Progress::~Progress() { done(); }

void Progress::update(const std::string& stage, const std::string& message) {
  if (quiet_) return;
  const auto now = std::chrono::steady_clock::now();
  const double dt = std::chrono::duration<double>(now - last_).count();
  const bool changed = stage != last_stage_;
  if (tty_) {
    if (!changed && dt < 0.1) return;
    std::fprintf(stderr, "\r\033[K%s: %s", stage.c_str(), message.c_str());
    std::fflush(stderr);
    open_line_ = true;
  } else {
    if (!changed && dt < 2.0) return;
    std::fprintf(stderr, "%s: %s\n", stage.c_str(), message.c_str());
  }
  last_stage_ = stage;
  last_ = now;
}

void Progress::done() {
  if (open_line_) std::fprintf(stderr, "\n");
  open_line_ = false;
}

}  // namespace sw::cli
