// The data file of a scan: PNG / TIFF (OpenCV, header checked before decoding), CSV matrix or
// HDF5 dataset, confined to the sidecar's folder tree.
#include <algorithm>
#include <cstdio>
#include <filesystem>
#include <mutex>

#include <unistd.h>

#include <opencv2/core.hpp>
#include <opencv2/core/utils/logger.hpp>
#include <opencv2/imgcodecs.hpp>

#include "io/atomic_file.h"
#include "io/csv.h"
#include "io/hdf5_reader.h"
#include "io/trace_reader_internal.h"

namespace sw::reader_detail {

namespace fs = std::filesystem;

namespace {

/// Runs cv::imread with OpenCV's logging silenced and stderr (where libpng/libtiff write their
/// own diagnostics) captured; what the decoders said comes back in `chatter`.
cv::Mat quiet_imread(const std::string& file, std::string* chatter) {
  static std::mutex m;
  std::lock_guard<std::mutex> lock(m);
  cv::utils::logging::setLogLevel(cv::utils::logging::LOG_LEVEL_SILENT);
  std::fflush(stderr);
  std::FILE* sink = std::tmpfile();
  const int saved = sink ? ::dup(STDERR_FILENO) : -1;
  if (saved >= 0) ::dup2(::fileno(sink), STDERR_FILENO);
  cv::Mat img;
  std::string error;
  try {
    img = cv::imread(file, cv::IMREAD_UNCHANGED);
  } catch (const cv::Exception& e) {
    error = e.err;
  }
  std::fflush(stderr);
  if (saved >= 0) {
    ::dup2(saved, STDERR_FILENO);
    ::close(saved);
  }
  if (sink) {
    std::rewind(sink);
    char buf[256];
    const std::size_t n = std::fread(buf, 1, sizeof buf, sink);
    std::fclose(sink);
    *chatter = escape_excerpt(std::string_view(buf, n), 120);
  }
  if (!error.empty()) throw input_error(escape_excerpt(error, 200));
  return img;
}

}  // namespace

Eigen::MatrixXd load_image(const Sidecar& sc, const std::string& image,
                           std::vector<std::string>* warnings, std::string* shown_name,
                           const TraceReadPolicy& policy) {
  const fs::path base = fs::path(sc.path()).parent_path();
  auto resolve = [&](const std::string& p) {
    const fs::path q(p);
    return (q.is_absolute() || base.empty() ? q : base / q).string();
  };
  // Confinement: the data file must lie in the sidecar's folder tree (or an allowed root).
  auto confine = [&](const std::string& file) {
    if (policy.allow_outside_data) return;
    if (path_inside(file, base.empty() ? "." : base.string())) return;
    for (const std::string& root : policy.allowed_roots)
      if (path_inside(file, root)) return;
    sc.fail("image", "names '" + printable_path(file) +
                         "', which lies outside the sidecar's folder tree (after resolving '..' "
                         "and symbolic links); expected a data file beside the sidecar or below "
                         "it, or pass --allow-outside-data to read it");
  };
  // Inside the allowed tree, and a regular file of at most the data-file limit.
  auto admit = [&](const std::string& f) {
    confine(f);
    try {
      check_regular_file(f, limits::kMaxDataFileBytes, "data file");
    } catch (const Error& e) {
      sc.fail("image", e.what());
    }
  };
  std::string h5_file, h5_dataset;
  if (split_hdf5_reference(image, &h5_file, &h5_dataset)) {
    const std::string f = resolve(h5_file);
    *shown_name = printable_path(f) + ":" + escape_excerpt(h5_dataset, 200);
    admit(f);
    return read_hdf5_matrix(f, h5_dataset,
                            "sidecar '" + printable_path(sc.path()) + "', field 'image'");
  }
  const std::string file = resolve(image);
  const std::string shown = printable_path(file);
  *shown_name = shown;
  admit(file);
  const bool quote_cells = path_inside(file, base.empty() ? "." : base.string()) ||
                           std::any_of(policy.allowed_roots.begin(), policy.allowed_roots.end(),
                                       [&](const std::string& r) { return path_inside(file, r); });
  const std::string ext = lower(fs::path(file).extension().string());
  if (ext == ".csv" || ext == ".txt" || ext == ".dat" || ext == ".tsv") {
    try {
      return parse_csv_matrix(read_regular_file(file, limits::kMaxDataFileBytes, "data file"),
                              shown, quote_cells);
    } catch (const Error& e) {
      sc.fail("image", e.what());
    }
  }

  ImageHeader h;
  try {
    h = read_image_header(file);
  } catch (const Error& e) {
    sc.fail("image", e.what());
  }
  if (h.samples_per_pixel != 1)
    sc.fail("image", "the data file '" + shown + "' has " + std::to_string(h.samples_per_pixel) +
                         " channels; expected a single-channel image (grey, no colour, no alpha)");
  if (h.width == 0 || h.height == 0)
    sc.fail("image", "the data file '" + shown + "' declares " + std::to_string(h.width) + " x " +
                         std::to_string(h.height) + " pixels; expected a non-empty image");
  if (h.width > limits::kMaxAxisCount || h.height > limits::kMaxAxisCount ||
      h.width * h.height > limits::kMaxSamples)
    sc.fail("image", "the data file '" + shown + "' declares " + std::to_string(h.width) + " x " +
                         std::to_string(h.height) + " pixels, above the limits of " +
                         std::to_string(limits::kMaxAxisCount) + " per side and " +
                         std::to_string(limits::kMaxSamples) +
                         " in all (docs/file_formats.md, Limits); it was not decoded");
  if (h.pages > 1)
    sc.fail("image", "the data file '" + shown + "' is a TIFF with " + std::to_string(h.pages) +
                         (h.pages >= 1000 ? "+" : "") +
                         " pages; expected one page (one scan per file): split the stack");
  if (h.format == "tiff" && h.bits_per_sample == 32 && h.sample_format == 1)
    sc.fail("image", "the data file '" + shown +
                         "' has unsigned 32-bit integer samples, which the image decoder "
                         "cannot represent; expected 16-bit unsigned, 32-bit signed integer or "
                         "32/64-bit float samples (convert it, e.g. to 32-bit float)");
  cv::Mat img;
  std::string chatter;
  try {
    img = quiet_imread(file, &chatter);
  } catch (const Error& e) {
    sc.fail("image", "the data file '" + shown + "' could not be decoded (" + e.what() + ")");
  }
  if (img.empty())
    sc.fail("image", "the data file '" + shown + "' could not be decoded as an image" +
                         (chatter.empty() ? std::string() : " (decoder: " + chatter + ")") +
                         "; expected a 16-bit PNG, a 16/32-bit TIFF, a CSV matrix or an HDF5 "
                         "dataset");
  if (!chatter.empty() && warnings)
    warnings->push_back("image '" + shown + "': the decoder reported: " + chatter);
  if (img.channels() != 1)
    sc.fail("image", "the data file '" + shown + "' has " + std::to_string(img.channels()) +
                         " channels; expected a single-channel image (grey, no colour, no alpha)");
  switch (img.depth()) {
    case CV_8U:
      if (warnings)
        warnings->push_back("image '" + shown +
                            "' has 8 bits per sample (256 levels); a 16-bit "
                            "PNG or a TIFF keeps the dynamic range of the detector");
      break;
    case CV_16U:
    case CV_16S:
    case CV_32S:
    case CV_32F:
    case CV_64F:
      break;
    default:
      sc.fail("image", "the data file '" + shown +
                           "' has an unsupported sample type (OpenCV depth " +
                           std::to_string(img.depth()) +
                           "); expected 16-bit or 32-bit integer or "
                           "32/64-bit float samples");
  }
  cv::Mat d;
  img.convertTo(d, CV_64F);
  Eigen::MatrixXd m(d.rows, d.cols);
  for (int i = 0; i < d.rows; ++i) {
    const double* row = d.ptr<double>(i);
    for (int j = 0; j < d.cols; ++j) m(i, j) = row[j];
  }
  return m;
}

}  // namespace sw::reader_detail
