#pragma once
// Atomic file writes (DESIGN.md "Errors and data safety": results are written to a temporary
// name and renamed into place). A reader never sees a half-written file: the bytes go to a
// temporary file in the same folder (".NAME.tmp-PID-N"), which is then renamed over the
// final name. rename(2) within one file system is atomic on POSIX (IEEE Std 1003.1, rename()).
// No fsync: the guarantee is "old file or complete new file" for concurrent readers and for a
// crash of this process, not durability across a power cut.
//
// Errors: sw::Error(kInput) naming the path and the operating-system reason. On any failure the
// temporary file is removed; the previous content of `path` (if any) is left untouched.

#include <string>
#include <string_view>
#include <vector>

#include <opencv2/core.hpp>

namespace sw {

/// Writes `bytes` to `path` atomically (temporary name in the same folder, then rename).
/// The folder must exist.
void write_file_atomic(const std::string& path, std::string_view bytes);

/// Encodes `image` with cv::imencode using the codec chosen by the extension of `path`
/// (".png", ".tif"/".tiff", ...), with optional imencode `params`, and writes it atomically.
/// Throws sw::Error(kInput) if the codec cannot encode this depth/channel count.
void imwrite_atomic(const std::string& path, const cv::Mat& image,
                    const std::vector<int>& params = {});

/// Reads a whole file into a string (binary). Throws sw::Error(kInput) naming the path.
std::string read_file_bytes(const std::string& path);

}  // namespace sw
