#include "cli/provenance.h"

#include <chrono>
#include <ctime>
#include <filesystem>
#include <fstream>
#include <iterator>

#include <cstdio>
#include "io/input_guard.h"
#include "streakwright_version.h"

namespace sw::cli {

std::uint64_t fnv1a64_update(std::uint64_t h, std::string_view bytes) {
  for (unsigned char c : bytes) {
    h ^= c;
    h *= 1099511628211ULL;
  }
  return h;
}

namespace {
void hash_file(const std::string& path, std::uint64_t& h) {
  // Only regular files within the data limit: a FIFO would block, /dev/zero never end
  // (the reader refuses them with a message; the hash just leaves them out).
  std::error_code ec;
  if (!std::filesystem::is_regular_file(path, ec) ||
      std::filesystem::file_size(path, ec) > limits::kMaxDataFileBytes || ec)
    return;
  std::ifstream f(path, std::ios::binary);
  char buf[1 << 16];
  while (f) {
    f.read(buf, sizeof buf);
    h = fnv1a64_update(h, std::string_view(buf, static_cast<std::size_t>(f.gcount())));
  }
}
}  // namespace

std::string input_hash(const std::string& sidecar, const std::string& image) {
  namespace fs = std::filesystem;
  std::uint64_t h = kFnv1a64Offset;
  std::error_code ec;
  if (!fs::is_regular_file(sidecar, ec)) return "";
  hash_file(sidecar, h);
  std::string img = image;
  const auto colon = img.find(".h5:");
  if (colon != std::string::npos) img = img.substr(0, colon + 3);
  fs::path p(img);
  if (p.is_relative()) p = fs::path(sidecar).parent_path() / p;
  hash_file(p.string(), h);
  char hex[17];
  std::snprintf(hex, sizeof hex, "%016llx", static_cast<unsigned long long>(h));
  return hex;
}

std::vector<Param> provenance(const std::string& sidecar, const std::string& image,
                              const std::string& command) {
  std::vector<Param> p;
  p.push_back({"provenance.program", std::string("streakwright")});
  p.push_back({"provenance.version", std::string(STREAKWRIGHT_VERSION)});
  p.push_back({"provenance.command", command});
  p.push_back({"provenance.input_hash_fnv1a64", input_hash(sidecar, image)});
  const std::time_t now = std::chrono::system_clock::to_time_t(std::chrono::system_clock::now());
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", std::gmtime(&now));
  p.push_back({"provenance.time_utc", std::string(buf)});
  return p;
}

}  // namespace sw::cli
