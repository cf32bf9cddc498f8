#include "cli/output_folder.h"

#include <fcntl.h>
#include <signal.h>
#include <stdio.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <chrono>
#include <cstring>
#include <ctime>
#include <filesystem>
#include <fstream>
#include <sstream>

#include "cli/structured_file.h"
#include "io/hdf5_reader.h"
#include "io/input_guard.h"
#include "retrieval/core/error.h"

namespace sw::cli {

namespace {

namespace fs = std::filesystem;

fs::path folder_of(const fs::path& p) {
  return p.parent_path().empty() ? fs::path(".") : p.parent_path();
}

bool pid_alive(long pid) {
  return pid > 0 && (kill(static_cast<pid_t>(pid), 0) == 0 || errno != ESRCH);
}

std::string host_name() {
  char buf[256] = {};
  if (gethostname(buf, sizeof buf - 1) != 0) return "unknown-host";
  return buf;
}

/// Removes PARENT/.NAME.partial-PID and .NAME.old-PID folders whose process is gone.
void remove_stale_siblings(const fs::path& parent, const std::string& name) {
  std::error_code ec;
  for (const auto& e : fs::directory_iterator(parent, ec)) {
    const std::string n = e.path().filename().string();
    for (const std::string& prefix : {"." + name + ".partial-", "." + name + ".old-"}) {
      if (n.rfind(prefix, 0) != 0) continue;
      char* end = nullptr;
      const long pid = std::strtol(n.c_str() + prefix.size(), &end, 10);
      if (end && *end == '\0' && !pid_alive(pid)) {
        std::error_code ec2;
        fs::remove_all(e.path(), ec2);
      }
    }
  }
}

std::atomic<int> g_signal{0};
static_assert(std::atomic<int>::is_always_lock_free, "signal handler needs a lock-free flag");

extern "C" void on_command_signal(int sig) {
  if (g_signal.exchange(sig) != 0) {
    static const char msg[] = "\nstreakwright: second interrupt, exiting now\n";
    const ssize_t w = write(STDERR_FILENO, msg, sizeof msg - 1);
    (void)w;
    _exit(128 + sig);
  }
}

}  // namespace

void check_output_folder(const std::string& out, const std::vector<std::string>& input_files,
                         const std::vector<std::string>& input_roots, const std::string& option) {
  const std::string shown = printable_path(out);
  std::error_code ec;
  if (out.empty()) throw usage_error(option + " is empty; expected an output folder");
  if (fs::exists(out, ec) && !fs::is_directory(out, ec))
    throw usage_error(option + " '" + shown + "' exists and is not a folder; expected a folder");
  auto refuse = [&](const std::string& what, const std::string& folder) {
    throw usage_error(option + " '" + shown + "' is or contains the folder '" +
                      printable_path(folder) + "' of " + what +
                      "; writing there could replace or delete inputs. Choose an output folder "
                      "outside the input folders (a new folder beside them, or below a scan's "
                      "folder, is fine)");
  };
  for (const std::string& f : input_files) {
    if (f.empty()) continue;
    const std::string folder = folder_of(fs::path(f)).string();
    if (path_inside(folder, out)) refuse("the input '" + printable_path(f) + "'", folder);
  }
  for (const std::string& r : input_roots)
    if (!r.empty() && path_inside(r, out)) refuse("an input folder", r);
}

std::string sidecar_data_file(const std::string& sidecar) {
  try {
    const nlohmann::json j = read_structured_file(sidecar, "sidecar");
    if (!j.is_object() || !j.contains("image") || !j["image"].is_string()) return "";
    std::string image = j["image"].get<std::string>();
    std::string file, dataset;
    if (split_hdf5_reference(image, &file, &dataset)) image = file;
    const fs::path q(image);
    return (q.is_absolute() ? q : folder_of(fs::path(sidecar)) / q).string();
  } catch (...) {
    return "";
  }
}

bool looks_like_output_folder(const std::string& dir) {
  std::error_code ec;
  if (fs::is_regular_file(fs::path(dir) / "result.json", ec)) return true;
  for (const auto& e : fs::directory_iterator(dir, ec)) {
    std::error_code ec2;
    if (!e.is_directory(ec2)) return false;
  }
  return !ec;
}

OutputSwap::OutputSwap(const std::string& out) : out_(out) {
  const std::string shown = printable_path(out);
  fs::path target = fs::path(out);
  if (target.filename().empty()) target = target.parent_path();  // "dir/" -> "dir"
  if (target.empty() || target.filename() == "." || target.filename() == "..")
    throw usage_error("--out '" + shown +
                      "': expected the name of an output folder (not '.', '..' or '/')");
  out_ = target.string();
  std::error_code ec;
  if (fs::exists(target, ec)) {
    if (!fs::is_directory(target, ec))
      throw usage_error("--out '" + shown + "' exists and is not a folder; expected a folder");
    if (!looks_like_output_folder(out_))
      throw usage_error("--out '" + shown +
                        "' exists and holds files but no result.json: it is not a streakwright "
                        "output folder, and replacing it could delete data. Choose a new folder "
                        "(or one a previous analysis wrote)");
  }
  const fs::path parent = folder_of(target);
  fs::create_directories(parent, ec);
  if (ec)
    throw usage_error("--out '" + shown + "': cannot create the folder '" +
                      printable_path(parent.string()) + "' (" + ec.message() + ")");
  const std::string name = target.filename().string();
  remove_stale_siblings(parent, name);
  temp_ = (parent / ("." + name + ".partial-" + std::to_string(getpid()))).string();
  fs::remove_all(temp_, ec);
  if (!fs::create_directory(temp_, ec) || ec)
    throw usage_error("--out '" + shown + "': cannot create the temporary folder '" +
                      printable_path(temp_) + "' (" + ec.message() + ")");
}

OutputSwap::~OutputSwap() {
  if (committed_) return;
  std::error_code ec;
  fs::remove_all(temp_, ec);
}

void OutputSwap::commit() {
  std::error_code ec;
  const std::string shown = printable_path(out_);
  if (!fs::exists(out_, ec)) {
    fs::rename(temp_, out_, ec);
    if (ec)
      throw input_error("cannot move the finished output into '" + shown + "': " + ec.message());
    committed_ = true;
    return;
  }
  if (renameat2(AT_FDCWD, temp_.c_str(), AT_FDCWD, out_.c_str(), RENAME_EXCHANGE) == 0) {
    committed_ = true;
    fs::remove_all(temp_, ec);  // now the previous output
    return;
  }
  // No RENAME_EXCHANGE (some file systems): move the old one aside, the new one in.
  const fs::path target(out_);
  std::string leaf = ".";
  leaf += target.filename().string();
  leaf += ".old-";
  leaf += std::to_string(getpid());
  const std::string old = (folder_of(target) / leaf).string();
  fs::remove_all(old, ec);
  fs::rename(out_, old, ec);
  if (ec)
    throw input_error("cannot move the previous output '" + shown + "' aside: " + ec.message());
  fs::rename(temp_, out_, ec);
  if (ec) {
    std::error_code ec2;
    fs::rename(old, out_, ec2);
    throw input_error("cannot move the finished output into '" + shown + "': " + ec.message());
  }
  committed_ = true;
  fs::remove_all(old, ec);
}

BatchLock::BatchLock(const std::string& out_dir) {
  path_ = (fs::path(out_dir) / ".streakwright.lock").string();
  std::ostringstream me;
  me << getpid() << ' ' << host_name() << ' '
     << std::chrono::duration_cast<std::chrono::seconds>(
            std::chrono::system_clock::now().time_since_epoch())
            .count();
  for (int attempt = 0; attempt < 3; ++attempt) {
    const int fd = ::open(path_.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
    if (fd >= 0) {
      const std::string text = me.str() + "\n";
      const ssize_t w = ::write(fd, text.data(), text.size());
      (void)w;
      ::close(fd);
      return;
    }
    if (errno != EEXIST)
      throw usage_error("--out '" + printable_path(out_dir) + "': cannot create the lock file '" +
                        printable_path(path_) + "' (" + std::strerror(errno) + ")");
    // Held: by a live process (refuse) or a dead one (take over).
    std::string holder;
    {
      std::ifstream in(path_);
      std::getline(in, holder);
    }
    std::istringstream f(holder);
    long pid = 0;
    std::string host;
    long long started = 0;
    f >> pid >> host >> started;
    const bool stale = pid > 0 && host == host_name() && !pid_alive(pid);
    if (!stale) {
      std::string when = "an unknown time";
      if (started > 0) {
        const std::time_t t = static_cast<std::time_t>(started);
        char buf[64];
        if (std::strftime(buf, sizeof buf, "%Y-%m-%d %H:%M:%S UTC", std::gmtime(&t))) when = buf;
      }
      throw usage_error("--out '" + printable_path(out_dir) +
                        "' is in use by another batch run (process " + std::to_string(pid) +
                        " on host " + escape_excerpt(host, 64) + ", started " + when +
                        "; lock file '" + printable_path(path_) +
                        "'). Wait for it, or remove the lock file if that run is gone");
    }
    std::error_code ec;
    fs::remove(path_, ec);  // stale: the holder's pid no longer runs here
  }
  throw usage_error("--out '" + printable_path(out_dir) + "': cannot take the lock file '" +
                    printable_path(path_) + "'");
}

BatchLock::~BatchLock() {
  std::error_code ec;
  fs::remove(path_, ec);
}

StopSignalHandlers::StopSignalHandlers(std::atomic<int>& flag, void (*handler)(int)) {
  flag = 0;
  struct sigaction sa;
  std::memset(&sa, 0, sizeof sa);
  sa.sa_handler = handler;
  sigemptyset(&sa.sa_mask);
  sigaction(SIGINT, &sa, &old_int_);
  sigaction(SIGTERM, &sa, &old_term_);
}

StopSignalHandlers::~StopSignalHandlers() {
  sigaction(SIGINT, &old_int_, nullptr);
  sigaction(SIGTERM, &old_term_, nullptr);
}

InterruptScope::InterruptScope() : handlers_(g_signal, on_command_signal) {}

int InterruptScope::signal_received() { return g_signal.load(); }

}  // namespace sw::cli
