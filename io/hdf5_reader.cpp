#include "io/hdf5_reader.h"

#include <algorithm>
#include <cctype>
#include <filesystem>
#include <vector>

#include "io/input_guard.h"
#include "retrieval/core/error.h"

#ifdef STREAKWRIGHT_HAVE_HDF5
#include <poll.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <chrono>
#include <cstdint>

#include <H5Cpp.h>
#endif

namespace sw {

bool split_hdf5_reference(const std::string& ref, std::string* file, std::string* dataset) {
  static const char* const kExtensions[] = {".h5:", ".hdf5:", ".he5:", ".nxs:"};
  std::string lower = ref;
  std::transform(lower.begin(), lower.end(), lower.begin(),
                 [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
  for (const char* ext : kExtensions) {
    const std::string e(ext);
    const auto p = lower.find(e);
    if (p == std::string::npos) continue;
    const std::size_t colon = p + e.size() - 1;
    *file = ref.substr(0, colon);
    *dataset = ref.substr(colon + 1);
    return true;
  }
  return false;
}

#ifdef STREAKWRIGHT_HAVE_HDF5
namespace {

// The HDF5 library itself can crash on a damaged file (a fuzzed file made H5Lexists read out
// of bounds). So the file is read in a child process: a crash there becomes an input error
// here, and this process is never touched by the library's reading of hostile bytes.
Eigen::MatrixXd read_in_process(const std::string& file, const std::string& dataset,
                                const std::string& what) {
  H5::Exception::dontPrint();
  try {
    if (!H5::H5File::isHdf5(file)) throw input_error(what + ": '" + file + "' is not an HDF5 file");
    H5::H5File h5(file, H5F_ACC_RDONLY);
    // Walk the path so a missing group gives a clear message rather than an HDF5 stack.
    std::size_t pos = 1;
    while (pos <= dataset.size()) {
      const auto next = dataset.find('/', pos);
      const std::string prefix = dataset.substr(0, next);
      if (!prefix.empty() && prefix.back() != '/' &&
          H5Lexists(h5.getId(), prefix.c_str(), H5P_DEFAULT) <= 0)
        throw input_error(what + ": '" + prefix + "' does not exist in '" + file + "'");
      if (next == std::string::npos) break;
      pos = next + 1;
    }
    if (h5.childObjType(dataset) != H5O_TYPE_DATASET)
      throw input_error(what + ": '" + dataset + "' is a group, not a dataset");
    H5::DataSet ds = h5.openDataSet(dataset);
    const H5T_class_t cls = ds.getTypeClass();
    if (cls != H5T_INTEGER && cls != H5T_FLOAT)
      throw input_error(what +
                        ": the dataset is not numeric; expected an integer or "
                        "floating-point 2-D dataset");
    H5::DataSpace space = ds.getSpace();
    const int rank = space.getSimpleExtentNdims();
    if (rank != 2)
      throw input_error(what + ": the dataset has " + std::to_string(rank) +
                        " dimensions; expected a 2-D dataset");
    hsize_t dims[2] = {0, 0};
    space.getSimpleExtentDims(dims);
    if (dims[0] == 0 || dims[1] == 0)
      throw input_error(what + ": the dataset is empty (" + std::to_string(dims[0]) + " x " +
                        std::to_string(dims[1]) + ")");
    if (dims[0] > limits::kMaxAxisCount || dims[1] > limits::kMaxAxisCount ||
        dims[0] * dims[1] > limits::kMaxSamples)
      throw input_error(what + ": the dataset declares " + std::to_string(dims[0]) + " x " +
                        std::to_string(dims[1]) + " values, above the limits of " +
                        std::to_string(limits::kMaxAxisCount) + " per side and " +
                        std::to_string(limits::kMaxSamples) +
                        " in all (docs/file_formats.md, Limits); it was not read");
    std::vector<double> buffer(static_cast<std::size_t>(dims[0] * dims[1]));
    ds.read(buffer.data(), H5::PredType::NATIVE_DOUBLE);
    Eigen::MatrixXd m(static_cast<Eigen::Index>(dims[0]), static_cast<Eigen::Index>(dims[1]));
    for (hsize_t i = 0; i < dims[0]; ++i)
      for (hsize_t j = 0; j < dims[1]; ++j)
        m(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = buffer[i * dims[1] + j];
    return m;
  } catch (const H5::Exception& e) {
    throw input_error(what + ": HDF5 could not read it (" + e.getFuncName() + ": " +
                      e.getDetailMsg() + ")");
  }
}

// The bookkeeping of one ::read or ::write call that moved `done` bytes (its result) of the n
// left at c: true to go on (c and n advanced past the bytes moved, or nothing moved because a
// signal interrupted the call: call again), false when the transfer failed (an error, or end of
// data).
template <typename Byte>
bool advance(ssize_t done, Byte*& c, std::size_t& n) {
  if (done < 0 && errno == EINTR) return true;
  if (done <= 0) return false;
  c += done;
  n -= static_cast<std::size_t>(done);
  return true;
}

bool write_all(int fd, const void* p, std::size_t n) {
  const char* c = static_cast<const char*>(p);
  while (n > 0)
    if (!advance(::write(fd, c, n), c, n)) return false;
  return true;
}

// Reads exactly n bytes before the deadline; false on end of data, error or timeout.
bool read_all(int fd, void* p, std::size_t n, std::chrono::steady_clock::time_point deadline) {
  char* c = static_cast<char*>(p);
  while (n > 0) {
    const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(
        deadline - std::chrono::steady_clock::now());
    if (left.count() <= 0) return false;
    pollfd pfd{fd, POLLIN, 0};
    const int r = ::poll(&pfd, 1, static_cast<int>(std::min<long long>(left.count(), 1000)));
    if (r < 0 && errno == EINTR) continue;
    if (r < 0) return false;
    if (r == 0) continue;
    if (!advance(::read(fd, c, n), c, n)) return false;
  }
  return true;
}

Eigen::MatrixXd read_isolated(const std::string& file, const std::string& dataset,
                              const std::string& what) {
  int fds[2];
  if (::pipe(fds) != 0) return read_in_process(file, dataset, what);
  const pid_t pid = ::fork();
  if (pid < 0) {
    ::close(fds[0]);
    ::close(fds[1]);
    return read_in_process(file, dataset, what);
  }
  if (pid == 0) {  // child: status byte, then the matrix or the message; never returns
    ::close(fds[0]);
    ::signal(SIGINT, SIG_DFL);  // the parent's interrupt handlers clean up its output, not ours
    ::signal(SIGTERM, SIG_DFL);
    std::uint8_t status = 0;
    try {
      const Eigen::MatrixXd m = read_in_process(file, dataset, what);
      const std::uint64_t dims[2] = {static_cast<std::uint64_t>(m.rows()),
                                     static_cast<std::uint64_t>(m.cols())};
      (void)(write_all(fds[1], &status, 1) && write_all(fds[1], dims, sizeof dims) &&
             write_all(fds[1], m.data(), sizeof(double) * static_cast<std::size_t>(m.size())));
    } catch (const std::exception& e) {
      status = 1;
      const std::string msg = e.what();
      const std::uint64_t len = msg.size();
      (void)(write_all(fds[1], &status, 1) && write_all(fds[1], &len, sizeof len) &&
             write_all(fds[1], msg.data(), msg.size()));
    }
    ::_exit(0);
  }
  ::close(fds[1]);
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(300);
  std::uint8_t status = 255;
  Eigen::MatrixXd m;
  std::string msg;
  bool ok = read_all(fds[0], &status, 1, deadline);
  if (ok && status == 0) {
    std::uint64_t dims[2] = {0, 0};
    ok = read_all(fds[0], dims, sizeof dims, deadline) && dims[0] <= limits::kMaxAxisCount &&
         dims[1] <= limits::kMaxAxisCount && dims[0] * dims[1] <= limits::kMaxSamples;
    if (ok) {
      m.resize(static_cast<Eigen::Index>(dims[0]), static_cast<Eigen::Index>(dims[1]));
      ok =
          read_all(fds[0], m.data(), sizeof(double) * static_cast<std::size_t>(m.size()), deadline);
    }
  } else if (ok && status == 1) {
    std::uint64_t len = 0;
    ok = read_all(fds[0], &len, sizeof len, deadline) && len < (1u << 20);
    if (ok) {
      msg.resize(static_cast<std::size_t>(len));
      ok = read_all(fds[0], msg.data(), msg.size(), deadline);
    }
  }
  ::close(fds[0]);
  if (!ok) ::kill(pid, SIGKILL);
  int ws = 0;
  while (::waitpid(pid, &ws, 0) < 0 && errno == EINTR) {
  }
  if (ok && status == 0) return m;
  if (ok && status == 1) throw input_error(msg);
  if (WIFSIGNALED(ws) && WTERMSIG(ws) != SIGKILL)
    throw input_error(
        what + ": the HDF5 library crashed reading it (signal " + std::to_string(WTERMSIG(ws)) +
        "): the file is damaged; export the dataset again, or convert it to a 16-bit PNG, a TIFF "
        "or a CSV file");
  throw input_error(
      what +
      ": the HDF5 file could not be read within 300 s or its reader stopped early; "
      "export the dataset again, or convert it to a 16-bit PNG, a TIFF or a CSV file");
}

}  // namespace
#endif

Eigen::MatrixXd read_hdf5_matrix(const std::string& file, const std::string& dataset,
                                 const std::string& where) {
  const std::string what = where + ": image '" + file + ":" + dataset + "'";
  if (dataset.empty() || dataset.front() != '/')
    throw input_error(what +
                      ": expected an absolute dataset path after the colon, such as "
                      "'FILE.h5:/group/counts'");
  std::error_code ec;
  if (!std::filesystem::exists(file, ec))
    throw input_error(what + ": the HDF5 file '" + printable_path(file) + "' does not exist");
  check_regular_file(file, limits::kMaxDataFileBytes, what + ": the HDF5 file");
#ifndef STREAKWRIGHT_HAVE_HDF5
  throw input_error(what +
                    ": this build of streakwright has no HDF5 support; convert the "
                    "dataset to a 16-bit PNG, a TIFF or a CSV file");
#else
  return read_isolated(file, dataset, what);
#endif
}

}  // namespace sw
