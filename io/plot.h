#pragma once
// Plotting vocabulary shared by every figure: colours, colour maps, and "nice" axis ticks.
// Free of OpenCV so that front ends can describe figures without pulling in image headers;
// the drawing itself lives in io/plot_canvas.h (OpenCV) and io/figures.h (the figures).
//
// Ticks follow the 1-2-5 rule that plotting packages and hand-drawn logbook plots share
// (common practice; see P. S. Heckbert, "Nice numbers for graph labels", Graphics Gems I,
// Academic Press, 1990): the step is 1, 2 or 5 times a power of ten, chosen so that about
// `target` ticks cover the range.

#include <cstdint>
#include <string>
#include <vector>

namespace sw::plot {

/// 8-bit sRGB colour (red, green, blue order; OpenCV's BGR order is handled internally).
struct Rgb {
  std::uint8_t r = 0, g = 0, b = 0;
  friend bool operator==(const Rgb&, const Rgb&) = default;
};

/// Colour `i` (cycled) of a qualitative palette of 8 well-separated colours on white, for
/// line series without an explicit colour. The first entry is a dark blue.
Rgb palette_color(std::size_t i);

/// Colour maps for images.
/// kViridis, kMagma, kInferno: perceptually uniform sequential maps (dark = low, bright = high).
/// kDiverging: blue - white - red, symmetric about the middle (t = 0.5 is white); meant for
/// signed quantities such as the difference measured - retrieved, with limits +-max|value|.
/// kGray: black to white.
enum class ColorMap { kViridis, kMagma, kInferno, kDiverging, kGray };
const char* to_string(ColorMap m);
/// Parses "viridis", "magma", "inferno", "diverging", "gray"; returns false otherwise.
bool parse_color_map(const std::string& s, ColorMap* out);

/// Colour of map `m` at position t in [0, 1] (clamped; NaN maps to the bottom colour).
/// The maps are sampled into 256 entries: t = 0 is entry 0 ("bottom colour"), t = 1 is
/// entry 255 ("top colour").
Rgb color_map_rgb(ColorMap m, double t);

/// File format of the figures: PNG raster (the default) or SVG vector (text as text, curves
/// as paths, trace images embedded as PNG), for papers.
enum class FigureFormat { kPng, kSvg };
const char* to_string(FigureFormat f);  ///< "png", "svg"
/// Parses "png" or "svg"; returns false otherwise.
bool parse_figure_format(const std::string& s, FigureFormat* out);
/// File extension with the dot: ".png", ".svg".
const char* figure_extension(FigureFormat f);
/// The format a figure path asks for: SVG when it ends in ".svg" (any case), else PNG.
FigureFormat figure_format_of_path(const std::string& path);
/// `name` with a trailing ".png" replaced by the format's extension ("scan.png" -> "scan.svg");
/// other names unchanged.
std::string with_figure_extension(const std::string& name, FigureFormat f);

/// Paths of the files an analysis writes into its output folder: `paths("burst.png")` is
/// DIR/burst.png, or DIR/burst.svg for FigureFormat::kSvg (with_figure_extension).
struct OutputPaths {
  std::string dir;
  FigureFormat format = FigureFormat::kPng;
  std::string operator()(const std::string& name) const;
};

/// Creates the output folder `dir` (and its parents) and returns its OutputPaths. Throws
/// sw::Error(kInput) "cannot create output folder '<dir>': <reason>".
OutputPaths make_output_folder(const std::string& dir, FigureFormat format);

/// Tick positions of one axis.
struct Ticks {
  double step = 0.0;           ///< spacing of the major ticks (1, 2 or 5 x 10^k); 0 for log
  std::vector<double> values;  ///< tick positions inside [lo, hi] (inclusive, ascending)
  /// Power of ten factored out of the labels (labels show value / 10^exponent); 0 when the
  /// values are readable as they are (|values| in [1e-3, 1e5)).
  int exponent = 0;
};

/// The "nice" number closest to x (> 0) among 1, 2, 5 x 10^k (round = true), or the smallest
/// such number >= x (round = false).
double nice_number(double x, bool round);

/// About `target` (>= 2) ticks at multiples of a 1-2-5 step covering [lo, hi], never fewer than
/// three when target >= 3 (the step is lowered to the next 1-2-5 value if needed). If lo == hi
/// the range is widened symmetrically first. Non-finite limits give an empty tick list.
Ticks nice_ticks(double lo, double hi, int target = 6);

/// Expands [lo, hi] outward to the nearest multiples of the nice step of nice_ticks(lo, hi,
/// target), so that the axis starts and ends on a tick ("nice limits"). Returns {lo', hi'}.
std::pair<double, double> nice_limits(double lo, double hi, int target = 6);

/// Decade ticks (10^k) covering [lo, hi] with 0 < lo < hi; when the range spans less than two
/// decades, the 2x and 5x sub-ticks are included too.
Ticks log_ticks(double lo, double hi);

/// Label text of a linear tick at `value` with spacing `step`, after dividing by 10^exponent:
/// as many decimals as the step needs and no more, "-0" printed as "0".
std::string format_tick(double value, double step, int exponent = 0);

/// Label text of a logarithmic tick: "1", "10", "100", "1000", "1e4", ... and "0.1", "0.01",
/// "1e-3", ...; 2x and 5x sub-ticks as "2e-3", "50", ...
std::string format_log_tick(double value);

}  // namespace sw::plot
