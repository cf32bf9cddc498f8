#include "io/atomic_file.h"

#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <sstream>

#include <opencv2/imgcodecs.hpp>

#include "io/input_guard.h"
#include "retrieval/core/error.h"

namespace sw {
namespace {

namespace fs = std::filesystem;

std::string temporary_name_for(const fs::path& target) {
  static std::atomic<unsigned long> counter{0};
  std::ostringstream name;
  name << '.' << target.filename().string() << ".tmp-" << ::getpid() << '-' << counter++;
  return (target.parent_path() / name.str()).string();
}

}  // namespace

void write_file_atomic(const std::string& path, std::string_view bytes) {
  const fs::path target(path);
  if (target.filename().empty())
    throw input_error("cannot write '" + path + "': expected a file name, not a folder");
  const fs::path dir = target.parent_path().empty() ? fs::path(".") : target.parent_path();
  std::error_code ec;
  if (!fs::is_directory(dir, ec))
    throw input_error("cannot write '" + path + "': folder '" + dir.string() + "' does not exist");
  const std::string tmp = temporary_name_for(target);
  std::FILE* f = std::fopen(tmp.c_str(), "wb");
  if (!f)
    throw input_error("cannot write '" + path + "': creating temporary file '" + tmp +
                      "' failed (" + std::strerror(errno) + ")");
  const std::size_t written = bytes.empty() ? 0 : std::fwrite(bytes.data(), 1, bytes.size(), f);
  const int write_errno = errno;
  const bool ok = written == bytes.size() && std::fflush(f) == 0;
  const bool closed = std::fclose(f) == 0;
  if (!ok || !closed) {
    fs::remove(tmp, ec);
    throw input_error("cannot write '" + path + "': writing " + std::to_string(bytes.size()) +
                      " bytes failed (" + std::strerror(write_errno) + ")");
  }
  fs::rename(tmp, target, ec);
  if (ec) {
    std::error_code ignored;
    fs::remove(tmp, ignored);
    throw input_error("cannot write '" + path +
                      "': renaming the temporary file into place failed (" + ec.message() + ")");
  }
}

void imwrite_atomic(const std::string& path, const cv::Mat& image, const std::vector<int>& params) {
  const std::string ext = fs::path(path).extension().string();
  if (ext.empty())
    throw input_error("cannot write image '" + path +
                      "': expected a file extension (.png, .tiff, ...) to choose the format");
  std::vector<uchar> buffer;
  bool ok = false;
  try {
    ok = cv::imencode(ext, image, buffer, params);
  } catch (const cv::Exception& e) {
    throw input_error("cannot write image '" + path + "': OpenCV could not encode a " +
                      std::to_string(image.channels()) + "-channel image of depth " +
                      std::to_string(image.depth()) + " as '" + ext + "' (" + e.what() + ")");
  }
  if (!ok)
    throw input_error("cannot write image '" + path + "': OpenCV could not encode it as '" + ext +
                      "'");
  write_file_atomic(path,
                    std::string_view(reinterpret_cast<const char*>(buffer.data()), buffer.size()));
}

std::string read_file_bytes(const std::string& path) {
  // Only regular files (a FIFO or device would block or never end), io/input_guard.h.
  return read_regular_file(path, limits::kMaxDataFileBytes, "file");
}

}  // namespace sw
