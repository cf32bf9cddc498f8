#include "cli/provenance.h"

#include <chrono>
#include <ctime>
#include <filesystem>
#include <fstream>
#include <iterator>

#include <cstdio>
#include "streakwright_version.h"

namespace sw::cli {

namespace {
void fnv1a(const std::string& path, unsigned long long& h) {
  std::ifstream f(path, std::ios::binary);
  char buf[1 << 16];
  while (f) {
    f.read(buf, sizeof buf);
    for (std::streamsize i = 0; i < f.gcount(); ++i) {
      h ^= static_cast<unsigned char>(buf[i]);
      h *= 1099511628211ULL;
    }
  }
}
}  // namespace

std::string input_hash(const std::string& sidecar, const std::string& image) {
  namespace fs = std::filesystem;
  unsigned long long h = 1469598103934665603ULL;
  if (!fs::exists(sidecar)) return "";
  fnv1a(sidecar, h);
  std::string img = image;
  const auto colon = img.find(".h5:");
  if (colon != std::string::npos) img = img.substr(0, colon + 3);
  fs::path p(img);
  if (p.is_relative()) p = fs::path(sidecar).parent_path() / p;
  fnv1a(p.string(), h);
  char hex[17];
  std::snprintf(hex, sizeof hex, "%016llx", h);
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
