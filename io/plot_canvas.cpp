#include "io/plot_canvas.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <limits>

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "io/atomic_file.h"
#include "io/report_html.h"
#include "retrieval/core/error.h"

namespace sw::plot {

namespace {

constexpr int kFont = cv::FONT_HERSHEY_SIMPLEX;
constexpr int kShift = 4;  // sub-pixel bits of cv::line coordinates
constexpr double kSubpixel = 1 << kShift;
constexpr int kTickLength = 5;
constexpr int kTickGap = 4;  // between tick end and its label

double font_scale(TextStyle s) {
  switch (s) {
    case TextStyle::kTick:
      return 0.5;
    case TextStyle::kLabel:
      return 0.58;
    case TextStyle::kTitle:
      return 0.72;
    case TextStyle::kLegend:
      return 0.5;
  }
  return 0.5;
}

cv::Point fixed(cv::Point2d p) {
  return {static_cast<int>(std::lround(p.x * kSubpixel)),
          static_cast<int>(std::lround(p.y * kSubpixel))};
}

bool finite(cv::Point2d p) { return std::isfinite(p.x) && std::isfinite(p.y); }

// Liang-Barsky clipping of segment a-b to [x0, x1] x [y0, y1]; false if nothing is left.
bool clip_segment(cv::Point2d& a, cv::Point2d& b, double x0, double y0, double x1, double y1) {
  double t0 = 0.0, t1 = 1.0;
  const double dx = b.x - a.x, dy = b.y - a.y;
  const double p[4] = {-dx, dx, -dy, dy};
  const double q[4] = {a.x - x0, x1 - a.x, a.y - y0, y1 - a.y};
  for (int i = 0; i < 4; ++i) {
    if (p[i] == 0.0) {
      if (q[i] < 0.0) return false;
      continue;
    }
    const double r = q[i] / p[i];
    if (p[i] < 0.0) {
      if (r > t1) return false;
      t0 = std::max(t0, r);
    } else {
      if (r < t0) return false;
      t1 = std::min(t1, r);
    }
  }
  const cv::Point2d a0 = a;
  a = a0 + t0 * cv::Point2d(dx, dy);
  b = a0 + t1 * cv::Point2d(dx, dy);
  return true;
}

// ---- SVG helpers ----

// A coordinate or length with at most two decimals, trailing zeros dropped ("12.5", "3").
std::string f2(double v) {
  char buf[48];
  std::snprintf(buf, sizeof buf, "%.2f", v);
  std::string t = buf;
  while (!t.empty() && t.back() == '0') t.pop_back();
  if (!t.empty() && t.back() == '.') t.pop_back();
  if (t == "-0") t = "0";
  return t;
}

std::string svg_color(Rgb c) {
  char buf[16];
  std::snprintf(buf, sizeof buf, "#%02x%02x%02x", c.r, c.g, c.b);
  return buf;
}

// Text escaped for XML character data and attribute values.
std::string xml_text(const std::string& t) { return escape_markup(t, "&apos;", true); }

// SVG font size (px) whose sans-serif capitals are as tall as the raster font's: cap height of
// DejaVu Sans / Helvetica is about 0.72 em (from memory).
double svg_font_px(TextStyle style) {
  int baseline = 0;
  const cv::Size cap = cv::getTextSize("H", kFont, font_scale(style), 1, &baseline);
  return cap.height / 0.72;
}

std::string svg_text_element(const std::string& text, double x, double y, TextStyle style,
                             Rgb color, HAlign h, const std::string& extra) {
  const char* anchor = h == HAlign::kLeft ? "start" : h == HAlign::kCenter ? "middle" : "end";
  return "<text x=\"" + f2(x) + "\" y=\"" + f2(y) + "\" font-size=\"" + f2(svg_font_px(style)) +
         "\" text-anchor=\"" + anchor + "\" fill=\"" + svg_color(color) + "\"" + extra + ">" +
         xml_text(text) + "</text>";
}

}  // namespace

double snap(double px) { return std::floor(px) + 0.5; }

cv::Scalar to_bgr(Rgb c) { return cv::Scalar(c.b, c.g, c.r); }

Canvas::Canvas(int width, int height, bool vector)
    : img_(height, width, CV_8UC3, cv::Scalar(255, 255, 255)), vector_(vector) {}

std::string Canvas::clip_id(const cv::Rect& r) {
  if (r == cv::Rect(0, 0, img_.cols, img_.rows)) return "";
  // Ids "c0", "c1", ... (built with append: GCC 12 warns falsely on "c" + std::string).
  auto make_id = [](std::size_t i) {
    std::string id(1, 'c');
    id.append(std::to_string(i));
    return id;
  };
  for (std::size_t i = 0; i < clip_rects_.size(); ++i) {
    if (clip_rects_[i] == r) return make_id(i);
  }
  const std::string id = make_id(clip_rects_.size());
  clip_rects_.push_back(r);
  defs_.push_back("<clipPath id=\"" + id + "\"><rect x=\"" + std::to_string(r.x) + "\" y=\"" +
                  std::to_string(r.y) + "\" width=\"" + std::to_string(r.width) + "\" height=\"" +
                  std::to_string(r.height) + "\"/></clipPath>");
  return id;
}

cv::Size Canvas::text_size(const std::string& text, TextStyle style) {
  int baseline = 0;
  cv::Size s = cv::getTextSize(text, kFont, font_scale(style), 1, &baseline);
  return {s.width, s.height + baseline};
}

void Canvas::text(const std::string& text, double x, double y, TextStyle style, Rgb color, HAlign h,
                  VAlign v, bool vertical) {
  if (text.empty()) return;
  int baseline = 0;
  const double scale = font_scale(style);
  const cv::Size s = cv::getTextSize(text, kFont, scale, 1, &baseline);
  if (!vertical) {
    double ox = x;
    if (h == HAlign::kCenter) ox -= s.width / 2.0;
    if (h == HAlign::kRight) ox -= s.width;
    // (ox, oy) is the baseline origin; VAlign refers to the box [top of caps, baseline].
    double oy = y;
    if (v == VAlign::kTop) oy += s.height;
    if (v == VAlign::kMiddle) oy += s.height / 2.0;
    cv::putText(img_, text,
                cv::Point(static_cast<int>(std::lround(ox)), static_cast<int>(std::lround(oy))),
                kFont, scale, to_bgr(color), 1, cv::LINE_AA);
    if (vector_) {
      // The anchor x stays where it is (text-anchor), so a wider or narrower SVG font keeps
      // its alignment; the baseline is the raster's (bottom edge of its baseline row).
      svg_.push_back(svg_text_element(text, x, std::lround(oy) + 1.0, style, color, h, ""));
    }
    return;
  }
  // Render horizontally on white, rotate, and darken the canvas with it (text is dark).
  const int pad = 2;
  cv::Mat tmp(s.height + baseline + 2 * pad, s.width + 2 * pad, CV_8UC3, cv::Scalar(255, 255, 255));
  cv::putText(tmp, text, cv::Point(pad, pad + s.height), kFont, scale, to_bgr(color), 1,
              cv::LINE_AA);
  cv::Mat rot;
  cv::rotate(tmp, rot, cv::ROTATE_90_COUNTERCLOCKWISE);
  double ox = x, oy = y;
  if (h == HAlign::kCenter) ox -= rot.cols / 2.0;
  if (h == HAlign::kRight) ox -= rot.cols;
  if (v == VAlign::kMiddle) oy -= rot.rows / 2.0;
  if (v == VAlign::kBottom) oy -= rot.rows;
  cv::Rect dst(static_cast<int>(std::lround(ox)), static_cast<int>(std::lround(oy)), rot.cols,
               rot.rows);
  if (vector_) {
    // Rotated -90 degrees about its anchor (reads bottom to top): the baseline becomes the
    // vertical line at column bx, with the capitals to its left, centred on the box.
    const double bx = dst.x + pad + s.height, by = dst.y + dst.height / 2.0;
    svg_.push_back(svg_text_element(text, bx, by, style, color, HAlign::kCenter,
                                    " transform=\"rotate(-90 " + f2(bx) + " " + f2(by) + ")\""));
  }
  const cv::Rect inside = dst & cv::Rect(0, 0, img_.cols, img_.rows);
  if (inside.empty()) return;
  cv::Mat src = rot(cv::Rect(inside.x - dst.x, inside.y - dst.y, inside.width, inside.height));
  cv::Mat roi = img_(inside);
  cv::min(roi, src, roi);
}

void Canvas::text_boxed(const std::string& text, double x, double y, TextStyle style, Rgb color,
                        Rgb background, double opacity, HAlign h, VAlign v) {
  if (text.empty()) return;
  int baseline = 0;
  const double scale = font_scale(style);
  const cv::Size s = cv::getTextSize(text, kFont, scale, 1, &baseline);
  double ox = x, oy = y;
  if (h == HAlign::kCenter) ox -= s.width / 2.0;
  if (h == HAlign::kRight) ox -= s.width;
  const int pad = 3;
  // The anchor refers to the box around the text, not to the baseline.
  if (v == VAlign::kTop) oy += s.height + pad;
  if (v == VAlign::kMiddle) oy += (s.height - baseline) / 2.0;
  if (v == VAlign::kBottom) oy -= baseline + pad;
  const cv::Point o(static_cast<int>(std::lround(ox)), static_cast<int>(std::lround(oy)));
  const cv::Rect box =
      cv::Rect(o.x - pad, o.y - s.height - pad, s.width + 2 * pad, s.height + baseline + 2 * pad) &
      cv::Rect(0, 0, img_.cols, img_.rows);
  if (!box.empty()) {
    cv::Mat roi = img_(box);
    const cv::Mat fill(roi.size(), roi.type(), to_bgr(background));
    const double a = std::clamp(opacity, 0.0, 1.0);
    cv::addWeighted(roi, 1.0 - a, fill, a, 0.0, roi);
    if (vector_) {
      svg_.push_back("<rect x=\"" + std::to_string(box.x) + "\" y=\"" + std::to_string(box.y) +
                     "\" width=\"" + std::to_string(box.width) + "\" height=\"" +
                     std::to_string(box.height) + "\" fill=\"" + svg_color(background) +
                     "\" fill-opacity=\"" + f2(a) + "\"/>");
    }
  }
  cv::putText(img_, text, o, kFont, scale, to_bgr(color), 1, cv::LINE_AA);
  if (vector_) {
    const double ax = h == HAlign::kLeft     ? o.x
                      : h == HAlign::kCenter ? o.x + s.width / 2.0
                                             : o.x + s.width;
    svg_.push_back(svg_text_element(text, ax, o.y + 1.0, style, color, h, ""));
  }
}

void Canvas::line(cv::Point2d a, cv::Point2d b, Rgb color, int thickness, bool dashed,
                  const cv::Rect& clip) {
  polyline({a, b}, color, thickness, dashed, clip);
}

void Canvas::polyline(const std::vector<cv::Point2d>& pts, Rgb color, int thickness, bool dashed,
                      const cv::Rect& clip) {
  const cv::Rect c = clip & cv::Rect(0, 0, img_.cols, img_.rows);
  if (c.empty() || pts.size() < 2) return;
  // 1) Visible pieces (dashes, clipped) in canvas coordinates.
  const double m = thickness + 1.0;
  const double x0 = c.x - m, y0 = c.y - m, x1 = c.x + c.width + m, y1 = c.y + c.height + m;
  const double dash_on = 9.0 + 2.0 * thickness, dash_off = 5.0 + 2.0 * thickness;
  std::vector<std::pair<cv::Point2d, cv::Point2d>> pieces;
  double phase = 0.0;  // distance travelled within the current on+off period
  for (std::size_t i = 0; i + 1 < pts.size(); ++i) {
    if (!finite(pts[i]) || !finite(pts[i + 1])) {
      phase = 0.0;
      continue;
    }
    const cv::Point2d a = pts[i], b = pts[i + 1];
    const double full = cv::norm(b - a);
    cv::Point2d ca = a, cb = b;
    const bool visible = clip_segment(ca, cb, x0, y0, x1, y1);
    if (visible && !dashed) pieces.emplace_back(ca, cb);
    if (visible && dashed && full > 0.0) {
      // Dashes measured along the unclipped segment so the pattern does not jump at edges.
      const cv::Point2d dir = (b - a) / full;
      const double s_begin = cv::norm(ca - a), s_end = cv::norm(cb - a);
      double s = 0.0;
      while (s < full) {
        const double period_pos = std::fmod(phase + s, dash_on + dash_off);
        const bool on = period_pos < dash_on;
        const double left = on ? dash_on - period_pos : dash_on + dash_off - period_pos;
        const double e = std::min(full, s + left);
        const double u = std::max(s, s_begin), w = std::min(e, s_end);
        if (on && w > u) pieces.emplace_back(a + u * dir, a + w * dir);
        s = e;
      }
    }
    phase = std::fmod(phase + full, dash_on + dash_off);
  }
  if (pieces.empty()) return;
  if (vector_) {
    // One path through the points (a non-finite point starts a new subpath); dashes by
    // stroke-dasharray, which restarts at every subpath as the raster's pattern does.
    std::string d;
    bool open = false;
    std::size_t run = 0;
    std::string sub;
    auto flush = [&] {
      if (run >= 2) d += sub;
      sub.clear();
      run = 0;
    };
    for (const auto& p : pts) {
      if (!finite(p)) {
        flush();
        open = false;
        continue;
      }
      sub += (open ? "L" : "M") + f2(p.x) + " " + f2(p.y);
      open = true;
      ++run;
    }
    flush();
    if (!d.empty()) {
      std::string e = "<path d=\"" + d + "\" fill=\"none\" stroke=\"" + svg_color(color) +
                      "\" stroke-width=\"" + std::to_string(thickness) +
                      "\" stroke-linejoin=\"round\" stroke-linecap=\"" +
                      (dashed ? "butt" : "round") + "\"";
      if (dashed) e += " stroke-dasharray=\"" + f2(dash_on) + " " + f2(dash_off) + "\"";
      if (const std::string id = clip_id(c); !id.empty()) e += " clip-path=\"url(#" + id + ")\"";
      svg_.push_back(e + "/>");
    }
  }

  // 2) Coverage mask, 3x supersampled and drawn without anti-aliasing, so that joints of a
  //    many-segment curve are not blended twice (which shows as dark beads along AA lines).
  double bx0 = 1e300, by0 = 1e300, bx1 = -1e300, by1 = -1e300;
  for (const auto& [a, b] : pieces) {
    bx0 = std::min({bx0, a.x, b.x});
    by0 = std::min({by0, a.y, b.y});
    bx1 = std::max({bx1, a.x, b.x});
    by1 = std::max({by1, a.y, b.y});
  }
  const int pad = thickness + 2;
  const cv::Rect bb =
      cv::Rect(static_cast<int>(std::floor(bx0)) - pad, static_cast<int>(std::floor(by0)) - pad,
               static_cast<int>(std::ceil(bx1 - bx0)) + 2 * pad + 1,
               static_cast<int>(std::ceil(by1 - by0)) + 2 * pad + 1) &
      c;
  if (bb.empty()) return;
  constexpr int kS = 3;
  cv::Mat mask(bb.height * kS, bb.width * kS, CV_8UC1, cv::Scalar(0));
  auto to_mask = [&](cv::Point2d p) {
    // Canvas pixel i spans [i, i + 1); OpenCV puts the centre of mask pixel k at k.
    return fixed(cv::Point2d((p.x - bb.x) * kS - 0.5, (p.y - bb.y) * kS - 0.5));
  };
  for (const auto& [a, b] : pieces) {
    cv::line(mask, to_mask(a), to_mask(b), cv::Scalar(255), thickness * kS, cv::LINE_8, kShift);
  }
  cv::Mat alpha;
  cv::resize(mask, alpha, bb.size(), 0, 0, cv::INTER_AREA);
  const double cb = color.b, cg = color.g, cr = color.r;
  for (int r = 0; r < bb.height; ++r) {
    const auto* al = alpha.ptr<std::uint8_t>(r);
    auto* px = img_.ptr<cv::Vec3b>(bb.y + r) + bb.x;
    for (int k = 0; k < bb.width; ++k) {
      if (al[k] == 0) continue;
      const double f = al[k] / 255.0;
      cv::Vec3b& p = px[k];
      p[0] = static_cast<std::uint8_t>(std::lround(p[0] + f * (cb - p[0])));
      p[1] = static_cast<std::uint8_t>(std::lround(p[1] + f * (cg - p[1])));
      p[2] = static_cast<std::uint8_t>(std::lround(p[2] + f * (cr - p[2])));
    }
  }
}

void Canvas::filled_circle(cv::Point2d center, double radius, Rgb color, const cv::Rect& clip) {
  const cv::Rect c = clip & cv::Rect(0, 0, img_.cols, img_.rows);
  if (c.empty() || !finite(center)) return;
  const cv::Point2d p = center - cv::Point2d(c.x, c.y);
  if (p.x < -radius || p.y < -radius || p.x > c.width + radius || p.y > c.height + radius) {
    return;
  }
  cv::Mat roi = img_(c);
  cv::circle(roi, fixed(p - cv::Point2d(0.5, 0.5)),
             static_cast<int>(std::lround(radius * kSubpixel)), to_bgr(color), cv::FILLED,
             cv::LINE_AA, kShift);
  if (vector_) {
    std::string e = "<circle cx=\"" + f2(center.x) + "\" cy=\"" + f2(center.y) + "\" r=\"" +
                    f2(radius) + "\" fill=\"" + svg_color(color) + "\"";
    if (const std::string id = clip_id(c); !id.empty()) e += " clip-path=\"url(#" + id + ")\"";
    svg_.push_back(e + "/>");
  }
}

void Canvas::rect(const cv::Rect& r, Rgb color, int thickness) {
  cv::rectangle(img_, r, to_bgr(color), thickness < 0 ? cv::FILLED : thickness, cv::LINE_8);
  if (!vector_ || r.width <= 0 || r.height <= 0) return;
  if (thickness < 0) {
    svg_.push_back("<rect x=\"" + std::to_string(r.x) + "\" y=\"" + std::to_string(r.y) +
                   "\" width=\"" + std::to_string(r.width) + "\" height=\"" +
                   std::to_string(r.height) + "\" fill=\"" + svg_color(color) + "\"/>");
    return;
  }
  // OpenCV centres a thickness-t outline on the pixels x .. x + width - 1.
  svg_.push_back("<rect x=\"" + f2(r.x + 0.5) + "\" y=\"" + f2(r.y + 0.5) + "\" width=\"" +
                 std::to_string(r.width - 1) + "\" height=\"" + std::to_string(r.height - 1) +
                 "\" fill=\"none\" stroke=\"" + svg_color(color) + "\" stroke-width=\"" +
                 std::to_string(thickness) + "\"/>");
}

void Canvas::pixel_line(int x0, int y0, int x1, int y1, Rgb color) {
  cv::line(img_, {x0, y0}, {x1, y1}, to_bgr(color), 1, cv::LINE_8);
  if (vector_) {
    svg_.push_back(
        "<line x1=\"" + f2(x0 + 0.5) + "\" y1=\"" + f2(y0 + 0.5) + "\" x2=\"" + f2(x1 + 0.5) +
        "\" y2=\"" + f2(y1 + 0.5) + "\" stroke=\"" + svg_color(color) +
        "\" stroke-width=\"1\" stroke-linecap=\"square\" shape-rendering=\"crispEdges\"/>");
  }
}

void Canvas::embed_raster(const cv::Rect& r) {
  if (!vector_) return;
  const cv::Rect in = r & cv::Rect(0, 0, img_.cols, img_.rows);
  if (in.empty()) return;
  std::vector<unsigned char> png;
  if (!cv::imencode(".png", img_(in), png)) {
    throw Error(ErrorKind::kInternal,
                "PNG encoding of a figure's image region failed (OpenCV imencode).");
  }
  svg_.push_back("<image x=\"" + std::to_string(in.x) + "\" y=\"" + std::to_string(in.y) +
                 "\" width=\"" + std::to_string(in.width) + "\" height=\"" +
                 std::to_string(in.height) +
                 "\" preserveAspectRatio=\"none\" style=\"image-rendering:pixelated\" "
                 "xlink:href=\"data:image/png;base64," +
                 base64_encode(png) + "\"/>");
}

std::string Canvas::encode_svg() const {
  if (!vector_) {
    throw Error(ErrorKind::kInternal,
                "SVG requested from a figure canvas made without the vector back end.");
  }
  const std::string w = std::to_string(img_.cols), h = std::to_string(img_.rows);
  std::string o = "<?xml version=\"1.0\" encoding=\"UTF-8\" standalone=\"no\"?>\n";
  o += "<svg xmlns=\"http://www.w3.org/2000/svg\" xmlns:xlink=\"http://www.w3.org/1999/xlink\" "
       "version=\"1.1\" width=\"" +
       w + "\" height=\"" + h + "\" viewBox=\"0 0 " + w + " " + h +
       "\" font-family=\"DejaVu Sans, Helvetica, Arial, sans-serif\">\n";
  if (!defs_.empty()) {
    o += "<defs>\n";
    for (const auto& d : defs_) o += d + "\n";
    o += "</defs>\n";
  }
  o += "<rect width=\"" + w + "\" height=\"" + h + "\" fill=\"#ffffff\"/>\n";
  for (const auto& e : svg_) o += e + "\n";
  o += "</svg>\n";
  return o;
}

std::vector<unsigned char> Canvas::encode_png() const {
  std::vector<unsigned char> buf;
  if (!cv::imencode(".png", img_, buf)) {
    throw Error(ErrorKind::kInternal, "PNG encoding of a figure failed (OpenCV imencode).");
  }
  return buf;
}

// ----------------------------------------------------------------------------------------

void AxisSpec::make_ticks(int target) {
  ticks = log ? log_ticks(lo, hi) : nice_ticks(lo, hi, target);
}

std::string AxisSpec::tick_label(std::size_t i) const {
  const double v = ticks.values[i];
  if (log && ticks.step == 0.0) return format_log_tick(v);
  return format_tick(v, ticks.step, ticks.exponent);
}

std::string AxisSpec::full_label() const {
  if (ticks.exponent == 0 || label.empty()) return label;
  return label + "  (x1e" + std::to_string(ticks.exponent) + ")";
}

double AxisSpec::fraction(double v) const {
  if (log) {
    if (!(v > 0.0)) return -std::numeric_limits<double>::infinity();
    return (std::log10(v) - std::log10(lo)) / (std::log10(hi) - std::log10(lo));
  }
  return (v - lo) / (hi - lo);
}

Axes::Axes(cv::Rect area, AxisSpec x, AxisSpec y)
    : area_(area), x_(std::move(x)), y_(std::move(y)) {}

double Axes::x_px(double x) const { return area_.x + x_.fraction(x) * area_.width; }

double Axes::y_px(double y, bool right) const {
  const AxisSpec& a = right && has_y2_ ? y2_ : y_;
  return area_.y + (1.0 - a.fraction(y)) * area_.height;
}

cv::Point2d Axes::to_px(double x, double y, bool right) const { return {x_px(x), y_px(y, right)}; }

void Axes::draw_grid(Canvas& c) const {
  const Rgb grid{228, 228, 228};
  for (double v : x_.ticks.values) {
    const double px = snap(x_px(v));
    c.line({px, double(area_.y)}, {px, double(area_.y + area_.height)}, grid, 1, false, area_);
  }
  for (double v : y_.ticks.values) {
    const double py = snap(y_px(v));
    c.line({double(area_.x), py}, {double(area_.x + area_.width), py}, grid, 1, false, area_);
  }
}

int Axes::max_tick_label_width(const AxisSpec& a) {
  int w = 0;
  for (std::size_t i = 0; i < a.ticks.values.size(); ++i) {
    w = std::max(w, Canvas::text_size(a.tick_label(i), TextStyle::kTick).width);
  }
  return w;
}

namespace {

std::vector<double> log_minor_ticks(const AxisSpec& a) {
  std::vector<double> out;
  if (!a.log || !(a.lo > 0.0)) return out;
  const int k0 = static_cast<int>(std::floor(std::log10(a.lo)));
  const int k1 = static_cast<int>(std::ceil(std::log10(a.hi)));
  if (k1 - k0 > 12) return out;
  for (int k = k0; k <= k1; ++k) {
    for (int m = 2; m <= 9; ++m) {
      const double v = m * std::pow(10.0, k);
      if (v >= a.lo && v <= a.hi) out.push_back(v);
    }
  }
  return out;
}

}  // namespace

void Axes::draw_frame(Canvas& c, bool labels, bool y_tick_labels) const {
  auto crisp = [&c](int x0, int y0, int x1, int y1) { c.pixel_line(x0, y0, x1, y1, Rgb{0, 0, 0}); };
  const int l = area_.x - 1, t = area_.y - 1;
  const int r = area_.x + area_.width, b = area_.y + area_.height;
  crisp(l, t, r, t);
  crisp(l, b, r, b);
  crisp(l, t, l, b);
  crisp(r, t, r, b);
  const Rgb black{0, 0, 0};
  const int tick_h = Canvas::text_size("0", TextStyle::kTick).height;

  // x ticks (outward, below) with labels; light ticks on top too.
  for (std::size_t i = 0; i < x_.ticks.values.size(); ++i) {
    const int px = static_cast<int>(std::lround(x_px(x_.ticks.values[i])));
    if (px < l || px > r) continue;
    crisp(px, b, px, b + kTickLength);
    c.text(x_.tick_label(i), px, b + kTickLength + kTickGap, TextStyle::kTick, black,
           HAlign::kCenter, VAlign::kTop);
  }
  auto y_ticks = [&](const AxisSpec& a, bool right_side, bool with_labels) {
    for (std::size_t i = 0; i < a.ticks.values.size(); ++i) {
      const int py = static_cast<int>(std::lround(y_px(a.ticks.values[i], right_side)));
      if (py < t || py > b) continue;
      if (right_side) {
        crisp(r, py, r + kTickLength, py);
        c.text(a.tick_label(i), r + kTickLength + kTickGap, py, TextStyle::kTick, black,
               HAlign::kLeft, VAlign::kMiddle);
      } else {
        crisp(l, py, l - kTickLength, py);
        if (with_labels) {
          c.text(a.tick_label(i), l - kTickLength - kTickGap, py, TextStyle::kTick, black,
                 HAlign::kRight, VAlign::kMiddle);
        }
      }
    }
    for (double v : log_minor_ticks(a)) {
      const int py = static_cast<int>(std::lround(y_px(v, right_side)));
      if (py < t || py > b) continue;
      if (right_side)
        crisp(r, py, r + 3, py);
      else
        crisp(l, py, l - 3, py);
    }
  };
  y_ticks(y_, false, y_tick_labels);
  if (has_y2_) y_ticks(y2_, true, true);

  if (!labels) return;
  const double cx = area_.x + area_.width / 2.0, cy = area_.y + area_.height / 2.0;
  c.text(x_.full_label(), cx, b + kTickLength + kTickGap + tick_h + 12, TextStyle::kLabel, black,
         HAlign::kCenter, VAlign::kTop);
  if (y_tick_labels) {
    const int w = max_tick_label_width(y_);
    c.text(y_.full_label(), l - kTickLength - kTickGap - w - 10, cy, TextStyle::kLabel, black,
           HAlign::kRight, VAlign::kMiddle, true);
  }
  if (has_y2_) {
    const int w = max_tick_label_width(y2_);
    c.text(y2_.full_label(), r + kTickLength + kTickGap + w + 10, cy, TextStyle::kLabel, black,
           HAlign::kLeft, VAlign::kMiddle, true);
  }
}

PlotGeometry Axes::geometry() const {
  PlotGeometry g;
  g.left = area_.x;
  g.top = area_.y;
  g.right = area_.x + area_.width - 1;
  g.bottom = area_.y + area_.height - 1;
  g.x_min = x_.lo;
  g.x_max = x_.hi;
  g.y_min = y_.lo;
  g.y_max = y_.hi;
  g.log_y = y_.log;
  return g;
}

// ----------------------------------------------------------------------------------------

void draw_legend(Canvas& c, const cv::Rect& area, const std::vector<LegendEntry>& entries,
                 const std::vector<cv::Point2d>& avoid, bool dark_background) {
  if (entries.empty()) return;
  const int sample_w = 34, gap = 8, pad = 8, margin = 10;
  int text_w = 0, text_h = 0;
  for (const auto& e : entries) {
    const cv::Size s = Canvas::text_size(e.label, TextStyle::kLegend);
    text_w = std::max(text_w, s.width);
    text_h = std::max(text_h, s.height);
  }
  const int row_h = text_h + 8;
  const int w = pad + sample_w + gap + text_w + pad;
  const int h = pad + static_cast<int>(entries.size()) * row_h + pad - 8 + 4;
  const cv::Rect candidates[4] = {
      {area.x + area.width - margin - w, area.y + margin, w, h},  // upper right
      {area.x + margin, area.y + margin, w, h},                   // upper left
      {area.x + area.width - margin - w, area.y + area.height - margin - h, w, h},
      {area.x + margin, area.y + area.height - margin - h, w, h},
  };
  int best = 0;
  std::size_t best_count = std::numeric_limits<std::size_t>::max();
  for (int k = 0; k < 4; ++k) {
    const cv::Rect big(candidates[k].x - 4, candidates[k].y - 4, candidates[k].width + 8,
                       candidates[k].height + 8);
    std::size_t n = 0;
    for (const auto& p : avoid) {
      if (p.x >= big.x && p.x < big.x + big.width && p.y >= big.y && p.y < big.y + big.height) {
        ++n;
      }
    }
    if (n < best_count) {
      best_count = n;
      best = k;
    }
  }
  const cv::Rect box = candidates[best];
  c.rect(box, Rgb{255, 255, 255}, -1);
  c.rect(box, dark_background ? Rgb{255, 255, 255} : Rgb{150, 150, 150}, 1);
  int y = box.y + pad;
  for (const auto& e : entries) {
    const double cy = y + text_h / 2.0 + 1;
    const double x0 = box.x + pad, x1 = box.x + pad + sample_w;
    if (e.line) c.line({x0, cy}, {x1, cy}, e.color, e.thickness, e.dashed, box);
    if (e.marker) c.filled_circle({(x0 + x1) / 2.0, cy}, 4.0, e.color, box);
    c.text(e.label, x1 + gap, cy, TextStyle::kLegend, Rgb{0, 0, 0}, HAlign::kLeft, VAlign::kMiddle);
    y += row_h;
  }
}

void write_file_atomically(const std::string& path, const std::vector<unsigned char>& bytes,
                           const std::string& what) {
  if (std::filesystem::path(path).filename().empty()) {
    throw usage_error("Cannot write the " + what + ": output path '" + path + "' names no file.");
  }
  try {
    write_file_atomic(path,
                      std::string_view(reinterpret_cast<const char*>(bytes.data()), bytes.size()));
  } catch (const Error& e) {
    throw Error(e.kind(), "Cannot write the " + what + ": " + e.what());
  }
}

std::string escape_markup(const std::string& text, const char* apostrophe, bool replace_controls) {
  std::string out;
  out.reserve(text.size() + text.size() / 8);
  for (char ch : text) {
    switch (ch) {
      case '&':
        out += "&amp;";
        break;
      case '<':
        out += "&lt;";
        break;
      case '>':
        out += "&gt;";
        break;
      case '"':
        out += "&quot;";
        break;
      case '\'':
        out += apostrophe;
        break;
      default:
        if (replace_controls && static_cast<unsigned char>(ch) < 0x20 && ch != '\t' && ch != '\n' &&
            ch != '\r')
          out += '?';
        else
          out += ch;
    }
  }
  return out;
}

}  // namespace sw::plot
