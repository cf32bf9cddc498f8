#pragma once
// Progress on stderr: a redrawn single line on a terminal, sparse plain lines otherwise
// (so logs of batch jobs stay readable). Quiet mode prints nothing.

#include <chrono>
#include <string>

namespace sw::cli {

class Progress {
 public:
  explicit Progress(bool quiet);
  ~Progress();
  /// Report a stage and a message; rate-limited (terminal: 10 Hz; plain: one line per 2 s or
  /// per stage change).
  void update(const std::string& stage, const std::string& message);
  /// Ends the current terminal line.
  void done();
  static bool stderr_is_terminal();

 private:
  bool quiet_, tty_, open_line_ = false;
  std::string last_stage_;
  std::chrono::steady_clock::time_point last_;
};

}  // namespace sw::cli
