#include "io/plot.h"

#include "retrieval/core/enum_names.h"
#include "retrieval/core/error.h"

#include <algorithm>
#include <array>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <mutex>

#include <opencv2/core.hpp>
#include <opencv2/imgproc.hpp>

namespace sw::plot {

Rgb palette_color(std::size_t i) {
  static constexpr std::array<Rgb, 8> kPalette = {{
      {20, 80, 160},   // dark blue
      {215, 95, 20},   // orange
      {35, 140, 65},   // green
      {190, 30, 45},   // red
      {115, 70, 165},  // purple
      {130, 90, 50},   // brown
      {205, 75, 160},  // magenta
      {95, 95, 95},    // grey
  }};
  return kPalette[i % kPalette.size()];
}

constexpr EnumNames<ColorMap, 5> kColorMapNames{{{{ColorMap::kViridis, "viridis"},
                                                  {ColorMap::kMagma, "magma"},
                                                  {ColorMap::kInferno, "inferno"},
                                                  {ColorMap::kDiverging, "diverging"},
                                                  {ColorMap::kGray, "gray"}}}};

SW_ENUM_NAME_FUNCTIONS(ColorMap, parse_color_map, kColorMapNames)

constexpr EnumNames<FigureFormat, 2> kFigureFormatNames{
    {{{FigureFormat::kPng, "png"}, {FigureFormat::kSvg, "svg"}}}};

SW_ENUM_NAME_FUNCTIONS(FigureFormat, parse_figure_format, kFigureFormatNames)

const char* figure_extension(FigureFormat f) { return f == FigureFormat::kSvg ? ".svg" : ".png"; }

FigureFormat figure_format_of_path(const std::string& path) {
  if (path.size() < 4) return FigureFormat::kPng;
  std::string ext = path.substr(path.size() - 4);
  for (char& ch : ext) ch = static_cast<char>(std::tolower(static_cast<unsigned char>(ch)));
  return ext == ".svg" ? FigureFormat::kSvg : FigureFormat::kPng;
}

std::string with_figure_extension(const std::string& name, FigureFormat f) {
  if (name.size() < 4 || name.compare(name.size() - 4, 4, ".png") != 0) return name;
  return name.substr(0, name.size() - 4) + figure_extension(f);
}

std::string OutputPaths::operator()(const std::string& name) const {
  return (std::filesystem::path(dir) / with_figure_extension(name, format)).string();
}

OutputPaths make_output_folder(const std::string& dir, FigureFormat format) {
  std::error_code ec;
  std::filesystem::create_directories(dir, ec);
  if (ec) throw input_error("cannot create output folder '" + dir + "': " + ec.message());
  return {dir, format};
}

namespace {

using Lut = std::array<Rgb, 256>;

// Sequential perceptual maps come from OpenCV's tables (imgproc, OpenCV >= 4.1).
Lut opencv_lut(int cv_map) {
  cv::Mat ramp(1, 256, CV_8UC1);
  for (int i = 0; i < 256; ++i) ramp.at<std::uint8_t>(0, i) = static_cast<std::uint8_t>(i);
  cv::Mat bgr;
  cv::applyColorMap(ramp, bgr, cv_map);
  Lut lut;
  for (int i = 0; i < 256; ++i) {
    const cv::Vec3b p = bgr.at<cv::Vec3b>(0, i);
    lut[static_cast<std::size_t>(i)] = Rgb{p[2], p[1], p[0]};
  }
  return lut;
}

// Blue - white - red, piecewise linear between anchors chosen for roughly even lightness
// steps on each side; symmetric lightness so that +x and -x look equally strong.
Lut diverging_lut() {
  struct Anchor {
    double t;
    double r, g, b;
  };
  static constexpr std::array<Anchor, 7> kAnchors = {{
      {0.00, 30, 45, 120},
      {0.17, 45, 100, 180},
      {0.34, 140, 180, 225},
      {0.50, 255, 255, 255},
      {0.66, 235, 160, 135},
      {0.83, 195, 60, 50},
      {1.00, 115, 15, 25},
  }};
  Lut lut;
  for (int i = 0; i < 256; ++i) {
    const double t = i / 255.0;
    std::size_t k = 0;
    while (k + 2 < kAnchors.size() && t > kAnchors[k + 1].t) ++k;
    const Anchor& a = kAnchors[k];
    const Anchor& b = kAnchors[k + 1];
    const double u = std::clamp((t - a.t) / (b.t - a.t), 0.0, 1.0);
    auto mix = [u](double x, double y) {
      return static_cast<std::uint8_t>(std::lround(x + u * (y - x)));
    };
    lut[static_cast<std::size_t>(i)] = Rgb{mix(a.r, b.r), mix(a.g, b.g), mix(a.b, b.b)};
  }
  lut[127] = lut[128] = Rgb{255, 255, 255};  // exact white at the centre of the 256 entries
  return lut;
}

Lut gray_lut() {
  Lut lut;
  for (int i = 0; i < 256; ++i) {
    const auto v = static_cast<std::uint8_t>(i);
    lut[static_cast<std::size_t>(i)] = Rgb{v, v, v};
  }
  return lut;
}

const Lut& lut_for(ColorMap m) {
  static std::once_flag once;
  static std::array<Lut, 5> luts;
  std::call_once(once, [] {
    luts[0] = opencv_lut(cv::COLORMAP_VIRIDIS);
    luts[1] = opencv_lut(cv::COLORMAP_MAGMA);
    luts[2] = opencv_lut(cv::COLORMAP_INFERNO);
    luts[3] = diverging_lut();
    luts[4] = gray_lut();
  });
  return luts[static_cast<std::size_t>(m)];
}

}  // namespace

Rgb color_map_rgb(ColorMap m, double t) {
  if (!(t > 0.0)) t = 0.0;  // also NaN
  if (t > 1.0) t = 1.0;
  const auto idx = std::min<long>(255, static_cast<long>(t * 256.0));
  return lut_for(m)[static_cast<std::size_t>(idx)];
}

double nice_number(double x, bool round) {
  if (!(x > 0.0) || !std::isfinite(x)) return 1.0;
  const double e = std::floor(std::log10(x));
  const double p = std::pow(10.0, e);
  const double f = x / p;  // 1 <= f < 10
  double nf;
  if (round) {
    nf = f < 1.5 ? 1.0 : f < 3.0 ? 2.0 : f < 7.0 ? 5.0 : 10.0;
  } else {
    nf = f <= 1.0 ? 1.0 : f <= 2.0 ? 2.0 : f <= 5.0 ? 5.0 : 10.0;
  }
  return nf * p;
}

namespace {

int exponent_for(double lo, double hi, double step) {
  const double m = std::max(std::abs(lo), std::abs(hi));
  if (!(m > 0.0)) return 0;
  if (m >= 1e5 || (m < 1e-3 && step < 1e-3)) {
    return static_cast<int>(std::floor(std::log10(m)));
  }
  return 0;
}

}  // namespace

Ticks nice_ticks(double lo, double hi, int target) {
  Ticks t;
  if (!std::isfinite(lo) || !std::isfinite(hi)) return t;
  if (lo > hi) std::swap(lo, hi);
  if (hi == lo) {
    const double w = lo == 0.0 ? 1.0 : std::abs(lo) * 0.1;
    lo -= w;
    hi += w;
  }
  target = std::max(target, 2);
  t.step = nice_number((hi - lo) / (target - 1), true);
  for (int attempt = 0; attempt < 4; ++attempt) {
    t.values.clear();
    const double eps = 1e-9 * t.step;
    const double first = std::ceil((lo - eps) / t.step);
    for (double k = first;; k += 1.0) {
      double v = k * t.step;
      if (v > hi + eps) break;
      if (std::abs(v) < eps) v = 0.0;
      t.values.push_back(v);
      if (t.values.size() > 1000) break;  // cannot happen with the step above; a guard
    }
    if (t.values.size() >= 3 || target < 3) break;
    // Too few ticks for a readable axis: next smaller 1-2-5 step (5 -> 2 -> 1 -> 0.5).
    const double p = std::pow(10.0, std::floor(std::log10(t.step) + 1e-9));
    const double m = std::round(t.step / p);
    t.step = m == 5.0 ? 2.0 * p : m == 2.0 ? p : 0.5 * p;
  }
  t.exponent = exponent_for(lo, hi, t.step);
  return t;
}

std::pair<double, double> nice_limits(double lo, double hi, int target) {
  const Ticks t = nice_ticks(lo, hi, target);
  if (t.step <= 0.0) return {lo, hi};
  if (lo > hi) std::swap(lo, hi);
  const double eps = 1e-9 * t.step;
  return {std::floor((lo + eps) / t.step) * t.step, std::ceil((hi - eps) / t.step) * t.step};
}

Ticks log_ticks(double lo, double hi) {
  Ticks t;
  if (!(lo > 0.0) || !(hi > lo) || !std::isfinite(hi)) return t;
  const bool sub = hi / lo < 100.0 * (1 + 1e-9);  // at most two decades
  const int k0 = static_cast<int>(std::floor(std::log10(lo))) - 1;
  const int k1 = static_cast<int>(std::ceil(std::log10(hi))) + 1;
  // Many decades: label every n-th decade only.
  const int every = std::max(1, (k1 - k0 - 2 + 7) / 8);
  for (int k = k0; k <= k1; ++k) {
    const double p = std::pow(10.0, k);
    for (double m : {1.0, 2.0, 5.0}) {
      if (m != 1.0 && !sub) continue;
      if (m == 1.0 && k % every != 0) continue;
      const double v = m * p;
      if (v >= lo * (1 - 1e-9) && v <= hi * (1 + 1e-9)) t.values.push_back(v);
    }
  }
  if (t.values.size() < 2) return nice_ticks(lo, hi, 5);
  return t;
}

std::string format_tick(double value, double step, int exponent) {
  const double scale = std::pow(10.0, exponent);
  const double v = value / scale;
  const double s = step / scale;
  int decimals = 0;
  if (s > 0.0 && std::isfinite(s)) {
    decimals = std::max(0, static_cast<int>(-std::floor(std::log10(s) + 1e-9)));
    // Steps such as 0.25 (not produced by nice_ticks, but by callers) need one more digit.
    const double r = s * std::pow(10.0, decimals);
    if (std::abs(r - std::round(r)) > 1e-6) ++decimals;
    decimals = std::min(decimals, 12);
  }
  char buf[64];
  std::snprintf(buf, sizeof buf, "%.*f", decimals, v);
  std::string out = buf;
  // "-0", "-0.00" -> "0", "0.00"
  if (out[0] == '-' && out.find_first_not_of("-0.") == std::string::npos) out.erase(0, 1);
  return out;
}

std::string format_log_tick(double value) {
  if (!(value > 0.0)) return "0";
  const int k = static_cast<int>(std::floor(std::log10(value) + 1e-9));
  const double m = std::round(value / std::pow(10.0, k));
  char buf[64];
  if (k >= 0 && k <= 3) {
    std::snprintf(buf, sizeof buf, "%.0f", value);
  } else if (k < 0 && k >= -2) {
    std::snprintf(buf, sizeof buf, "%.*f", -k, value);
  } else {
    std::snprintf(buf, sizeof buf, "%.0fe%d", m, k);
  }
  return buf;
}

}  // namespace sw::plot
