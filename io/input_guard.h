#pragma once
// Checks that every input file passes before a reader touches it (docs/file_formats.md
// "Limits"). The readers of io/ only read through these functions, so a hostile or mistaken
// input cannot make streakwright hang (FIFO, device), exhaust memory (declared sizes, /dev/zero),
// overflow its stack (deep nesting), read outside the folders it was given, or print file
// contents and terminal control bytes.
//
// All functions throw sw::Error(kInput) (exit 3) with a message that names the file and the
// limit; none of them allocates in proportion to a size it has not checked first.

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

namespace sw {

/// The documented input limits (docs/file_formats.md "Limits"). Chosen so that the largest
/// accepted scan still fits a workstation (a few hundred MB in the engines) and so that no real
/// detector or sidecar comes near them.
namespace limits {
inline constexpr std::uint64_t kMaxSidecarBytes = 1u << 20;     ///< 1 MiB per sidecar
inline constexpr std::uint64_t kMaxDataFileBytes = 1ull << 31;  ///< 2 GiB per data file
inline constexpr int kMaxNestingDepth = 64;          ///< brackets / indentation levels of a sidecar
inline constexpr std::size_t kMaxAxisCount = 65536;  ///< values of one axis (or image side)
inline constexpr std::size_t kMaxSamples = 1u << 24;  ///< energies x delays (16.8 M samples)
inline constexpr int kMaxEchoDepth = 8;               ///< nesting of an echoed unknown key
inline constexpr std::size_t kMaxEchoBytes = 16384;   ///< JSON text of one echoed unknown key
inline constexpr std::size_t kMaxExcerptChars = 24;   ///< quoted excerpt of an offending cell
/// Declared photoelectron lines of one sidecar. The line analysis compares every pair of lines
/// and the joint fit carries one strength and delay per line; a real scan has two to six (the
/// inner- and outer-valence states of one or two gases).
inline constexpr std::size_t kMaxDeclaredLines = 16;
}  // namespace limits

/// Throws unless `path` names an existing regular file (after following symbolic links) of at
/// most `max_bytes` bytes. FIFOs, devices, sockets and folders are refused by their type, before
/// any open(2), so nothing blocks. `what` starts the message ("sidecar", "data file").
void check_regular_file(const std::string& path, std::uint64_t max_bytes, const std::string& what);

/// check_regular_file, then reads the whole file (opened O_NONBLOCK and re-checked with fstat,
/// so a file swapped for a FIFO in between cannot block either; at most max_bytes are read).
std::string read_regular_file(const std::string& path, std::uint64_t max_bytes,
                              const std::string& what);

/// A short printable excerpt of untrusted text: printable ASCII kept, every other byte (ESC,
/// CR, NUL, UTF-8 bytes) written as \xNN, cut to `max_chars` characters with "...".
std::string escape_excerpt(std::string_view s, std::size_t max_chars = limits::kMaxExcerptChars);

/// A path for messages: the same escaping without the length cut (file names may hold
/// control bytes or invalid UTF-8).
std::string printable_path(std::string_view path);

/// Whether `s` is valid UTF-8 (RFC 3629: no overlongs, no surrogates, <= U+10FFFF).
bool is_valid_utf8(std::string_view s);

/// Whether `file` lies inside the folder tree of `root` after resolving ".." and symbolic
/// links of both (std::filesystem::weakly_canonical). A file equal to root counts as inside.
bool path_inside(const std::string& file, const std::string& root);

/// Greatest nesting depth of a JSON text ('{' / '[' outside strings) or, with `yaml`, of a
/// YAML text (flow brackets plus block indentation levels and "- " sequence entries), found
/// by one loop without recursion. `line` (optional) receives the 1-based line where the
/// depth first exceeded `limit` (0 if it never did). Scanning stops at that line.
int nesting_depth(std::string_view text, bool yaml, int limit, int* line = nullptr);

/// What a PNG or TIFF header says about the image, read without decoding it.
struct ImageHeader {
  std::string format;         ///< "png" or "tiff"
  std::uint64_t width = 0;    ///< samples per row
  std::uint64_t height = 0;   ///< rows
  int bits_per_sample = 0;    ///< 1, 8, 16, 32, 64
  int samples_per_pixel = 0;  ///< 1 = grey
  int sample_format = 1;      ///< TIFF SampleFormat: 1 unsigned, 2 signed, 3 float
  int pages = 1;              ///< TIFF image file directories (pages), counted up to 1000
};

/// Reads the header of the PNG (ISO/IEC 15948, IHDR chunk) or TIFF (TIFF 6.0, first IFD and
/// the chain of IFDs) at `path`. Throws for anything else (naming the format it expected) and
/// for a truncated or inconsistent header.
ImageHeader read_image_header(const std::string& path);

}  // namespace sw
