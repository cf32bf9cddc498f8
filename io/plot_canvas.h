#pragma once
// Drawing machinery behind io/figures.h (OpenCV core + imgproc): a white canvas with text in
// Hershey fonts, dashed and clipped polylines, and a Cartesian axes frame with ticks, tick
// labels, axis labels, grid and legend. Figures compose these; nothing here knows physics.
// Coordinates are pixels (x to the right, y downward) as doubles; lines are anti-aliased and
// drawn with sub-pixel precision.
//
// Two back ends from the same drawing calls: the raster (always drawn; encode_png) and, when
// the canvas is made with `vector = true`, an SVG 1.1 document recorded call by call
// (encode_svg): text as <text> (sans-serif, sized to the raster font's cap height), lines and
// markers as <path>/<line>/<circle>/<rect> clipped with <clipPath>, and regions painted pixel
// by pixel (trace images, colour bars) embedded as base64 PNG <image> elements via
// embed_raster(). SVG user units are the raster's pixels, so both outputs share one layout.

#include <string>
#include <vector>

#include <opencv2/core.hpp>

#include "io/figures.h"
#include "io/plot.h"

namespace sw::plot {

/// Text styles used throughout (Hershey simplex, anti-aliased, thickness 1).
enum class TextStyle { kTick, kLabel, kTitle, kLegend };

/// Horizontal / vertical anchor of a text position.
enum class HAlign { kLeft, kCenter, kRight };
enum class VAlign { kTop, kMiddle, kBottom };

cv::Scalar to_bgr(Rgb c);
/// Centre of the pixel containing continuous coordinate px, for crisp 1-pixel lines.
double snap(double px);

class Canvas {
 public:
  /// A white canvas; `vector` also records the SVG document (encode_svg).
  Canvas(int width, int height, bool vector = false);
  cv::Mat& image() { return img_; }
  const cv::Mat& image() const { return img_; }
  int width() const { return img_.cols; }
  int height() const { return img_.rows; }

  /// Size (width, height above baseline + below) of text in a style.
  static cv::Size text_size(const std::string& text, TextStyle style);
  /// Draws text anchored at (x, y); `vertical` rotates it 90 degrees counter-clockwise
  /// (reading bottom to top, for y-axis labels); the anchor then refers to the rotated box.
  void text(const std::string& text, double x, double y, TextStyle style, Rgb color,
            HAlign h = HAlign::kLeft, VAlign v = VAlign::kBottom, bool vertical = false);
  /// Horizontal text on a translucent box (background blended with `opacity` in [0, 1]),
  /// readable over images. The anchor refers to the box (VAlign::kBottom: box bottom at y).
  void text_boxed(const std::string& text, double x, double y, TextStyle style, Rgb color,
                  Rgb background, double opacity, HAlign h = HAlign::kLeft,
                  VAlign v = VAlign::kBottom);
  /// Polyline through the points, clipped to `clip` (pixels); dashes continue across
  /// vertices. Non-finite points break the line.
  void polyline(const std::vector<cv::Point2d>& pts, Rgb color, int thickness, bool dashed,
                const cv::Rect& clip);
  void line(cv::Point2d a, cv::Point2d b, Rgb color, int thickness, bool dashed,
            const cv::Rect& clip);
  void filled_circle(cv::Point2d c, double radius, Rgb color, const cv::Rect& clip);
  void rect(const cv::Rect& r, Rgb color, int thickness);  ///< thickness < 0 fills
  /// A crisp 1-pixel line between the centres of pixels (x0, y0) and (x1, y1), both included
  /// (frames and ticks).
  void pixel_line(int x0, int y0, int x1, int y1, Rgb color);
  /// Declares that the raster inside `r` was painted directly through image() (a trace image,
  /// a colour bar): the vector document gets those pixels, as they are now, as an embedded
  /// PNG <image>. Call it after painting and before drawing anything over the region. No-op
  /// without the vector back end.
  void embed_raster(const cv::Rect& r);
  /// PNG bytes of the canvas.
  std::vector<unsigned char> encode_png() const;
  /// True when the canvas records the SVG document.
  bool has_vector() const { return vector_; }
  /// The SVG document (UTF-8 text, XML declaration first). Throws sw::Error (kInternal) when
  /// the canvas was made without the vector back end.
  std::string encode_svg() const;

 private:
  // Clip-path id of a rectangle (defined once in the document), "" when r covers the canvas.
  std::string clip_id(const cv::Rect& r);

  cv::Mat img_;  // CV_8UC3, BGR
  bool vector_ = false;
  std::vector<std::string> svg_;      // body elements in drawing order
  std::vector<std::string> defs_;     // <clipPath> definitions
  std::vector<cv::Rect> clip_rects_;  // rectangles of defs_, index = id number
};

/// One axis: data range, scale and ticks.
struct AxisSpec {
  double lo = 0, hi = 1;
  bool log = false;
  std::string label;
  Ticks ticks;  ///< filled by make_ticks()
  void make_ticks(int target);
  /// Label text for tick i (with the axis exponent factored out).
  std::string tick_label(std::size_t i) const;
  /// Axis label with " (x1eK)" suffix when ticks have an exponent.
  std::string full_label() const;
  /// Fraction 0..1 of value v along the axis (log-aware).
  double fraction(double v) const;
};

/// A rectangular data area with an x axis, a left y axis and an optional right y axis.
class Axes {
 public:
  Axes(cv::Rect area, AxisSpec x, AxisSpec y);
  void set_right_axis(AxisSpec y2) {
    y2_ = std::move(y2);
    has_y2_ = true;
  }

  const cv::Rect& area() const { return area_; }
  const AxisSpec& x() const { return x_; }
  const AxisSpec& y() const { return y_; }
  const AxisSpec& y2() const { return y2_; }
  bool has_right_axis() const { return has_y2_; }

  /// Pixel position of a data point (left axis or right axis).
  cv::Point2d to_px(double x, double y, bool right = false) const;
  double x_px(double x) const;
  double y_px(double y, bool right = false) const;

  /// Light grid lines at the major ticks (draw before data).
  void draw_grid(Canvas& c) const;
  /// Frame, inward ticks, tick labels; axis labels when the strings are non-empty and
  /// `labels` is true. Draw after data.
  void draw_frame(Canvas& c, bool labels = true, bool y_tick_labels = true) const;

  PlotGeometry geometry() const;

  /// Width in pixels of the widest tick label on an axis (for layout).
  static int max_tick_label_width(const AxisSpec& a);

 private:
  cv::Rect area_;
  AxisSpec x_, y_, y2_;
  bool has_y2_ = false;
};

/// A legend entry: a line sample (optionally dashed, with marker) and its label.
struct LegendEntry {
  std::string label;
  Rgb color;
  bool line = true, dashed = false, marker = false;
  int thickness = 2;
};

/// Draws a framed legend inside `area`, in the corner where it covers the fewest of the given
/// data points (pixels). Nothing is drawn when entries is empty.
void draw_legend(Canvas& c, const cv::Rect& area, const std::vector<LegendEntry>& entries,
                 const std::vector<cv::Point2d>& avoid, bool dark_background = false);

/// Writes bytes to `path` atomically through sw::write_file_atomic (io/atomic_file.h).
/// `what` names the file's role in error messages ("trace figure").
void write_file_atomically(const std::string& path, const std::vector<unsigned char>& bytes,
                           const std::string& what);

/// `text` escaped for markup character data and attribute values: & < > " as their entities and
/// the apostrophe as `apostrophe` ("&apos;" in SVG/XML, "&#39;" in the HTML report). With
/// `replace_controls`, the C0 controls XML 1.0 does not allow (all but tab, newline and carriage
/// return) become '?'.
std::string escape_markup(const std::string& text, const char* apostrophe, bool replace_controls);

}  // namespace sw::plot
