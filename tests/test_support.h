#pragma once
// Helpers shared by the test files: a uniform axis, a self-removing temporary folder, a text
// writer and command-line runs.

#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <array>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <random>
#include <string>
#include <vector>

namespace sw::test {

/// `n` values first, first + step, ..., first + (n - 1) step.
inline std::vector<double> axis(double first, double step, int n) {
  std::vector<double> v(static_cast<std::size_t>(n));
  for (int i = 0; i < n; ++i) v[static_cast<std::size_t>(i)] = first + step * i;
  return v;
}

/// A fresh folder under the system temp directory, removed with its contents on destruction.
/// Unique per process, tag, random draw and clock tick, so parallel test processes never share it.
class TempDir {
 public:
  explicit TempDir(const std::string& tag = "tmp") {
    std::random_device rd;
    path = std::filesystem::temp_directory_path() /
           ("sw_test_" + tag + "_" + std::to_string(::getpid()) + "_" + std::to_string(rd()) + "_" +
            std::to_string(std::chrono::steady_clock::now().time_since_epoch().count()));
    std::filesystem::create_directories(path);
  }
  ~TempDir() {
    std::error_code ec;
    std::filesystem::remove_all(path, ec);
  }
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;

  /// Path of a file inside the folder.
  std::string file(const std::string& name) const { return (path / name).string(); }
  std::string operator/(const std::string& name) const { return file(name); }
  /// Names of the folder's entries, sorted.
  std::vector<std::string> listing() const {
    std::vector<std::string> names;
    for (const auto& e : std::filesystem::directory_iterator(path))
      names.push_back(e.path().filename().string());
    std::sort(names.begin(), names.end());
    return names;
  }

  std::filesystem::path path;
};

inline void write_text(const std::string& path, const std::string& text) {
  std::ofstream(path, std::ios::binary) << text;
}

/// Exit code and combined stdout+stderr of one command-line run.
struct CliRun {
  int code = -1;  ///< exit status, -1 when the process did not exit normally
  std::string out;
};

/// Runs `command` through the shell with stdout and stderr captured (POSIX popen; the exit
/// status via WEXITSTATUS).
inline CliRun run_command(const std::string& command) {
  CliRun r;
  FILE* p = popen((command + " 2>&1").c_str(), "r");
  if (!p) return r;
  std::array<char, 4096> buf{};
  while (fgets(buf.data(), static_cast<int>(buf.size()), p)) r.out += buf.data();
  const int st = pclose(p);
  r.code = WIFEXITED(st) ? WEXITSTATUS(st) : -1;
  return r;
}

/// A path in single quotes for the shell (built by appending: GCC 12 warns falsely on
/// "'" + std::string).
inline std::string shell_quoted(const std::filesystem::path& p) {
  std::string s(1, '\'');
  s += p.string();
  s += '\'';
  return s;
}

/// Exit status, stdout and stderr (apart) of one command-line run.
struct CliOutput {
  int status = -1;  ///< exit status, -1 when the process did not exit normally
  std::string out, err;
};

inline std::string read_text(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

#ifdef STREAKWRIGHT_CLI_PATH
/// Runs the streakwright executable with `args` (shell syntax).
inline CliRun run_cli(const std::string& args) {
  return run_command(std::string(STREAKWRIGHT_CLI_PATH) + " " + args);
}

/// Runs the streakwright executable with `args` (shell syntax), stdout and stderr captured apart
/// through two temporary files (unique per process and call, removed afterwards).
inline CliOutput run_cli_apart(const std::string& args) {
  static int calls = 0;
  const std::string stem =
      (std::filesystem::temp_directory_path() /
       ("sw_cli_" + std::to_string(::getpid()) + "_" + std::to_string(++calls)))
          .string();
  const std::string cmd = shell_quoted(STREAKWRIGHT_CLI_PATH) + " " + args + " > " +
                          shell_quoted(stem + ".out") + " 2> " + shell_quoted(stem + ".err");
  CliOutput c;
  const int rc = std::system(cmd.c_str());
  c.status = WIFEXITED(rc) ? WEXITSTATUS(rc) : -1;
  c.out = read_text(stem + ".out");
  c.err = read_text(stem + ".err");
  std::error_code ec;
  std::filesystem::remove(stem + ".out", ec);
  std::filesystem::remove(stem + ".err", ec);
  return c;
}
#endif

}  // namespace sw::test
