#include "io/input_guard.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <set>

#include "retrieval/core/error.h"

namespace sw {
namespace {

namespace fs = std::filesystem;

std::string type_of(mode_t m) {
  if (S_ISDIR(m)) return "a folder";
  if (S_ISFIFO(m)) return "a FIFO (named pipe)";
  if (S_ISCHR(m)) return "a character device";
  if (S_ISBLK(m)) return "a block device";
  if (S_ISSOCK(m)) return "a socket";
  return "not a regular file";
}

void check_stat(const struct stat& st, const std::string& path, std::uint64_t max_bytes,
                const std::string& what) {
  if (!S_ISREG(st.st_mode))
    throw input_error(what + " '" + printable_path(path) + "' is " + type_of(st.st_mode) +
                      "; only regular files are read");
  if (static_cast<std::uint64_t>(st.st_size) > max_bytes)
    throw input_error(what + " '" + printable_path(path) + "' has " +
                      std::to_string(static_cast<long long>(st.st_size)) +
                      " bytes, above the limit of " + std::to_string(max_bytes) +
                      " bytes (docs/file_formats.md, Limits)");
}

}  // namespace

void check_regular_file(const std::string& path, std::uint64_t max_bytes, const std::string& what) {
  struct stat st;
  if (::stat(path.c_str(), &st) != 0)
    throw input_error(what + " '" + printable_path(path) + "' " +
                      (errno == ENOENT
                           ? std::string("does not exist")
                           : "cannot be examined (" + std::string(std::strerror(errno)) + ")"));
  check_stat(st, path, max_bytes, what);
}

std::string read_regular_file(const std::string& path, std::uint64_t max_bytes,
                              const std::string& what) {
  check_regular_file(path, max_bytes, what);
  const int fd = ::open(path.c_str(), O_RDONLY | O_NONBLOCK | O_CLOEXEC);
  if (fd < 0)
    throw input_error("cannot open " + what + " '" + printable_path(path) + "' for reading (" +
                      std::strerror(errno) + ")");
  struct stat st;
  if (::fstat(fd, &st) != 0) {
    ::close(fd);
    throw input_error("cannot examine " + what + " '" + printable_path(path) + "'");
  }
  try {
    check_stat(st, path, max_bytes, what);
  } catch (...) {
    ::close(fd);
    throw;
  }
  std::string bytes(static_cast<std::size_t>(st.st_size), '\0');
  std::size_t have = 0;
  while (have < bytes.size()) {
    const ssize_t n = ::read(fd, bytes.data() + have, bytes.size() - have);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) break;
    have += static_cast<std::size_t>(n);
  }
  ::close(fd);
  bytes.resize(have);  // a file that shrank meanwhile gives what it had
  return bytes;
}

std::string escape_excerpt(std::string_view s, std::size_t max_chars) {
  std::string out;
  static const char* hex = "0123456789abcdef";
  std::size_t shown = 0;
  for (const char ch : s) {
    if (shown >= max_chars) {
      out += "...";
      break;
    }
    const auto c = static_cast<unsigned char>(ch);
    if (c >= 0x20 && c < 0x7f && c != '\\') {
      out += static_cast<char>(c);
    } else if (c == '\\') {
      out += "\\\\";
    } else {
      out += "\\x";
      out += hex[c >> 4];
      out += hex[c & 15];
    }
    ++shown;
  }
  return out;
}

std::string printable_path(std::string_view path) {
  return escape_excerpt(path, static_cast<std::size_t>(-1) / 2);
}

bool is_valid_utf8(std::string_view s) {
  std::size_t i = 0;
  while (i < s.size()) {
    const auto c = static_cast<unsigned char>(s[i]);
    int n = 0;
    std::uint32_t cp = 0;
    if (c < 0x80) {
      ++i;
      continue;
    } else if ((c & 0xE0) == 0xC0) {
      n = 1;
      cp = c & 0x1F;
    } else if ((c & 0xF0) == 0xE0) {
      n = 2;
      cp = c & 0x0F;
    } else if ((c & 0xF8) == 0xF0) {
      n = 3;
      cp = c & 0x07;
    } else {
      return false;
    }
    if (i + static_cast<std::size_t>(n) >= s.size()) return false;
    for (int k = 1; k <= n; ++k) {
      const auto d = static_cast<unsigned char>(s[i + static_cast<std::size_t>(k)]);
      if ((d & 0xC0) != 0x80) return false;
      cp = (cp << 6) | (d & 0x3F);
    }
    if ((n == 1 && cp < 0x80) || (n == 2 && cp < 0x800) || (n == 3 && cp < 0x10000) ||
        cp > 0x10FFFF || (cp >= 0xD800 && cp <= 0xDFFF))
      return false;
    i += static_cast<std::size_t>(n) + 1;
  }
  return true;
}

bool path_inside(const std::string& file, const std::string& root) {
  std::error_code ec;
  const fs::path f = fs::weakly_canonical(fs::absolute(file, ec), ec);
  if (ec) return false;
  const fs::path r = fs::weakly_canonical(fs::absolute(root, ec), ec);
  if (ec) return false;
  auto fi = f.begin();
  for (auto ri = r.begin(); ri != r.end(); ++ri, ++fi) {
    if (ri->empty()) continue;  // trailing separator of a folder
    if (fi == f.end() || *fi != *ri) return false;
  }
  return true;
}

int nesting_depth(std::string_view text, bool yaml, int limit, int* line_out) {
  int depth = 0, max_depth = 0, line = 1;
  if (line_out) *line_out = 0;
  auto note = [&](int d) {
    if (d > max_depth) max_depth = d;
    if (d > limit && line_out && *line_out == 0) *line_out = line;
    return d > limit;
  };
  if (!yaml) {
    bool in_string = false, escaped = false;
    for (const char c : text) {
      if (c == '\n') ++line;
      if (in_string) {
        if (escaped)
          escaped = false;
        else if (c == '\\')
          escaped = true;
        else if (c == '"')
          in_string = false;
        continue;
      }
      if (c == '"')
        in_string = true;
      else if (c == '{' || c == '[') {
        if (note(++depth)) return max_depth;
      } else if ((c == '}' || c == ']') && depth > 0)
        --depth;
    }
    return max_depth;
  }
  // YAML: block indentation levels (a stack of indents), "- " entries, flow brackets.
  std::vector<std::size_t> indents;
  int flow = 0;
  std::size_t pos = 0;
  while (pos < text.size()) {
    const std::size_t nl = text.find('\n', pos);
    const std::string_view l =
        text.substr(pos, nl == std::string_view::npos ? std::string_view::npos : nl - pos);
    pos = nl == std::string_view::npos ? text.size() : nl + 1;
    std::size_t i = 0;
    while (i < l.size() && (l[i] == ' ' || l[i] == '\t')) ++i;
    const bool blank = i == l.size() || l[i] == '#' || l[i] == '\r' || l[i] == '%' ||
                       l.substr(i, 3) == "---" || l.substr(i, 3) == "...";
    int dashes = 0;
    if (!blank && flow == 0) {
      while (!indents.empty() && indents.back() > i) indents.pop_back();
      if (indents.empty() || indents.back() < i) indents.push_back(i);
      std::size_t j = i;
      while (j < l.size() && l[j] == '-' && (j + 1 == l.size() || l[j + 1] == ' ')) {
        ++dashes;
        j += 2;
        while (j < l.size() && l[j] == ' ') ++j;
      }
    }
    if (note(static_cast<int>(indents.size()) + dashes + flow)) return max_depth;
    char quote = 0;
    for (std::size_t k = i; k < l.size(); ++k) {
      const char c = l[k];
      if (quote) {
        if (c == quote) quote = 0;
        continue;
      }
      if (c == '#' && (k == 0 || l[k - 1] == ' ')) break;
      if (c == '"' || c == '\'') {
        quote = c;
      } else if (c == '{' || c == '[') {
        ++flow;
        if (note(static_cast<int>(indents.size()) + dashes + flow)) return max_depth;
      } else if ((c == '}' || c == ']') && flow > 0) {
        --flow;
      }
    }
    ++line;
  }
  return max_depth;
}

namespace {

struct ByteReader {
  std::ifstream in;
  bool little = true;
  bool read(std::uint64_t offset, unsigned char* buf, std::size_t n) {
    in.clear();
    in.seekg(static_cast<std::streamoff>(offset));
    in.read(reinterpret_cast<char*>(buf), static_cast<std::streamsize>(n));
    return static_cast<std::size_t>(in.gcount()) == n;
  }
  std::uint32_t u(const unsigned char* p, int n) const {
    std::uint32_t v = 0;
    for (int k = 0; k < n; ++k) {
      const int idx = little ? n - 1 - k : k;
      v = (v << 8) | p[idx];
    }
    return v;
  }
};

}  // namespace

ImageHeader read_image_header(const std::string& path) {
  const std::string shown = printable_path(path);
  ByteReader r;
  r.in.open(path, std::ios::binary);
  if (!r.in) throw input_error("cannot open the data file '" + shown + "' for reading");
  unsigned char h[32] = {};
  const bool got = r.read(0, h, 8);
  ImageHeader hd;
  static const unsigned char png_sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
  if (got && std::memcmp(h, png_sig, 8) == 0) {
    hd.format = "png";
    if (!r.read(8, h, 25) || std::memcmp(h + 4, "IHDR", 4) != 0)
      throw input_error("the data file '" + shown +
                        "' is a truncated PNG (no IHDR chunk); expected a complete PNG file");
    r.little = false;
    hd.width = r.u(h + 8, 4);
    hd.height = r.u(h + 12, 4);
    hd.bits_per_sample = h[16];
    const int colour = h[17];
    hd.samples_per_pixel = colour == 0   ? 1
                           : colour == 2 ? 3
                           : colour == 3 ? 3
                           : colour == 4 ? 2
                                         : 4;
    return hd;
  }
  if (got && ((h[0] == 'I' && h[1] == 'I') || (h[0] == 'M' && h[1] == 'M'))) {
    hd.format = "tiff";
    r.little = h[0] == 'I';
    const std::uint32_t magic = r.u(h + 2, 2);
    if (magic == 43)
      throw input_error("the data file '" + shown +
                        "' is a BigTIFF; expected a classic TIFF (TIFF 6.0) or a 16-bit PNG");
    if (magic != 42)
      throw input_error("the data file '" + shown + "' has a TIFF byte-order mark but magic " +
                        std::to_string(magic) + "; expected 42 (TIFF 6.0)");
    std::uint64_t ifd = r.u(h + 4, 4);
    std::set<std::uint64_t> seen;
    hd.pages = 0;
    while (ifd != 0 && hd.pages < 1000) {
      if (!seen.insert(ifd).second) break;  // a loop of IFDs
      unsigned char cnt[2];
      if (!r.read(ifd, cnt, 2))
        throw input_error("the data file '" + shown + "' is a truncated TIFF (image directory " +
                          std::to_string(hd.pages + 1) + " missing)");
      const std::uint32_t n = r.u(cnt, 2);
      if (hd.pages == 0) {
        for (std::uint32_t e = 0; e < n && e < 4096; ++e) {
          unsigned char ent[12];
          if (!r.read(ifd + 2 + 12ull * e, ent, 12))
            throw input_error("the data file '" + shown + "' is a truncated TIFF directory");
          const std::uint32_t tag = r.u(ent, 2), type = r.u(ent + 2, 2), count = r.u(ent + 4, 4);
          auto first_value = [&]() -> std::uint32_t {
            const int size = type == 3 ? 2 : 4;
            if (static_cast<std::uint64_t>(size) * count <= 4) return r.u(ent + 8, size);
            unsigned char v[4];
            if (!r.read(r.u(ent + 8, 4), v, static_cast<std::size_t>(size))) return 0;
            return r.u(v, size);
          };
          if (tag == 256)
            hd.width = first_value();
          else if (tag == 257)
            hd.height = first_value();
          else if (tag == 258)
            hd.bits_per_sample = static_cast<int>(first_value());
          else if (tag == 277)
            hd.samples_per_pixel = static_cast<int>(first_value());
          else if (tag == 339)
            hd.sample_format = static_cast<int>(first_value());
        }
        if (hd.samples_per_pixel == 0) hd.samples_per_pixel = 1;  // TIFF 6.0 default
        if (hd.bits_per_sample == 0) hd.bits_per_sample = 1;
      }
      ++hd.pages;
      unsigned char next[4];
      if (!r.read(ifd + 2 + 12ull * n, next, 4)) break;
      ifd = r.u(next, 4);
    }
    if (hd.pages == 0)
      throw input_error("the data file '" + shown + "' is a TIFF without an image directory");
    return hd;
  }
  throw input_error("the data file '" + shown +
                    "' could not be decoded: it is neither a PNG nor a TIFF (by its first "
                    "bytes); expected a 16-bit PNG, "
                    "a 16/32-bit TIFF, a CSV matrix (.csv/.txt/.dat/.tsv) or an HDF5 dataset");
}

}  // namespace sw
