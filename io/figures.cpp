#include "io/figures.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <sstream>

#include <opencv2/imgproc.hpp>

#include "io/plot_canvas.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"

namespace sw {

using plot::Axes;
using plot::AxisSpec;
using plot::Canvas;
using plot::HAlign;
using plot::Rgb;
using plot::TextStyle;
using plot::VAlign;

double PlotGeometry::x_to_col(double x) const {
  return left + (x - x_min) / (x_max - x_min) * (right - left + 1);
}

double PlotGeometry::y_to_row(double y) const {
  double f;
  if (log_y) {
    f = (std::log10(y) - std::log10(y_min)) / (std::log10(y_max) - std::log10(y_min));
  } else {
    f = (y - y_min) / (y_max - y_min);
  }
  return top + (1.0 - f) * (bottom - top + 1);
}

namespace {

constexpr Rgb kBlack{0, 0, 0};
constexpr Rgb kMissing{200, 200, 200};  // non-finite data pixels

std::string check_size(const char* who, int w, int h, int min_w, int min_h) {
  if (w < min_w || w > 8000) {
    return std::string(who) + ".width_px = " + std::to_string(w) + " must be in [" +
           std::to_string(min_w) + ", 8000].";
  }
  if (h < min_h || h > 8000) {
    return std::string(who) + ".height_px = " + std::to_string(h) + " must be in [" +
           std::to_string(min_h) + ", 8000].";
  }
  return "";
}

std::string check_limits(const char* who, const char* lo_name, const std::optional<double>& lo,
                         const char* hi_name, const std::optional<double>& hi) {
  for (auto [name, v] : {std::pair{lo_name, lo}, std::pair{hi_name, hi}}) {
    if (v && !std::isfinite(*v)) {
      return std::string(who) + "." + name + " = " + format_g(*v) + " must be finite.";
    }
  }
  if (lo && hi && !(*lo < *hi)) {
    return std::string(who) + "." + lo_name + " = " + format_g(*lo) + " must be below " + who +
           "." + hi_name + " = " + format_g(*hi) + ".";
  }
  return "";
}

// Edges between bin centres: midpoints, the outer ones extended by half a neighbour spacing.
std::vector<double> bin_edges(const std::vector<double>& c) {
  std::vector<double> e(c.size() + 1);
  if (c.size() == 1) {
    e[0] = c[0] - 0.5;
    e[1] = c[0] + 0.5;
    return e;
  }
  for (std::size_t i = 1; i < c.size(); ++i) e[i] = 0.5 * (c[i - 1] + c[i]);
  e[0] = c[0] - 0.5 * (c[1] - c[0]);
  e[c.size()] = c.back() + 0.5 * (c.back() - c[c.size() - 2]);
  return e;
}

void check_axis(const std::vector<double>& a, const char* name, Eigen::Index expected,
                const char* dim, const std::string& figure, const std::string& path) {
  if (static_cast<Eigen::Index>(a.size()) != expected || a.empty()) {
    throw input_error("Cannot draw the " + figure + " '" + path + "': " + name + " has " +
                      std::to_string(a.size()) + " values but the data has " +
                      std::to_string(expected) + " " + dim + " (expected equal and > 0).");
  }
  for (std::size_t i = 0; i < a.size(); ++i) {
    if (!std::isfinite(a[i]) || (i > 0 && !(a[i] > a[i - 1]))) {
      throw input_error("Cannot draw the " + figure + " '" + path + "': " + name + "[" +
                        std::to_string(i) + "] = " + format_g(a[i]) +
                        " (the axis must be finite and strictly ascending).");
    }
  }
}

void require_valid(const std::string& msg, const std::string& figure, const std::string& path) {
  if (!msg.empty()) {
    throw usage_error("Cannot draw the " + figure + " '" + path + "': " + msg);
  }
}

int label_height() { return Canvas::text_size("Ag(", TextStyle::kLabel).height; }
int tick_height() { return Canvas::text_size("0", TextStyle::kTick).height; }

// Space below the data area for x tick labels and the x label.
int bottom_margin() { return 5 + 4 + tick_height() + 12 + label_height() + 14; }

int title_margin(const std::string& title) {
  return title.empty() ? 18 : Canvas::text_size(title, TextStyle::kTitle).height + 26;
}

int left_margin(const AxisSpec& y, bool with_label) {
  return 14 + (with_label && !y.label.empty() ? label_height() + 10 : 0) +
         Axes::max_tick_label_width(y) + 5 + 4;
}

int ticks_target(int pixels, int per_tick, int lo, int hi) {
  return std::clamp(pixels / per_tick, lo, hi);
}

// ---------------------------------------------------------------------------------------
// Trace panels

struct TracePanel {
  std::string title;
  std::string x_label, y_label, colorbar_label;
  plot::ColorMap map = plot::ColorMap::kViridis;
  double vmin = 0, vmax = 1;
  bool y_label_shown = true;
  const std::vector<OverlayCurve>* curves = nullptr;
  const std::vector<EnergyMarker>* markers = nullptr;
};

std::pair<double, double> finite_range(const Eigen::MatrixXd& m) {
  double lo = std::numeric_limits<double>::infinity();
  double hi = -std::numeric_limits<double>::infinity();
  for (Eigen::Index j = 0; j < m.cols(); ++j) {
    for (Eigen::Index i = 0; i < m.rows(); ++i) {
      const double v = m(i, j);
      if (std::isfinite(v)) {
        lo = std::min(lo, v);
        hi = std::max(hi, v);
      }
    }
  }
  if (!std::isfinite(lo)) return {0.0, 1.0};
  return {lo, hi};
}

std::pair<double, double> sequential_limits(const Eigen::MatrixXd& m,
                                            const std::optional<double>& lo_opt,
                                            const std::optional<double>& hi_opt) {
  auto [lo, hi] = finite_range(m);
  lo = std::min(lo, 0.0);
  if (lo_opt) lo = *lo_opt;
  if (hi_opt) hi = *hi_opt;
  if (!(hi > lo)) hi = lo + (lo == 0.0 ? 1.0 : std::abs(lo));
  return {lo, hi};
}

std::pair<double, double> symmetric_limits(const Eigen::MatrixXd& m,
                                           const std::optional<double>& lo_opt,
                                           const std::optional<double>& hi_opt) {
  auto [lo, hi] = finite_range(m);
  double a = std::max(std::abs(lo), std::abs(hi));
  if (!(a > 0.0)) a = 1.0;
  return {lo_opt ? *lo_opt : -a, hi_opt ? *hi_opt : a};
}

// Draws one image panel with its colour bar inside `box`; returns the image axes.
Axes draw_trace_panel(Canvas& c, const cv::Rect& box, const Eigen::MatrixXd& data,
                      const std::vector<double>& delay, const std::vector<double>& energy,
                      const TracePanel& p) {
  const std::vector<double> de = bin_edges(delay), ee = bin_edges(energy);
  AxisSpec x{de.front(), de.back(), false, p.x_label, {}};
  AxisSpec y{ee.front(), ee.back(), false, p.y_label, {}};
  AxisSpec cb{p.vmin, p.vmax, false, p.colorbar_label, {}};

  const int top = title_margin(p.title);
  const int est_h = box.height - top - bottom_margin();
  y.make_ticks(ticks_target(est_h, 70, 4, 9));
  cb.make_ticks(ticks_target(est_h, 80, 4, 8));
  const int left = left_margin(y, true);  // same width for every panel
  const int bar_gap = 16, bar_w = 18;
  const int right = bar_gap + bar_w + 5 + 4 + Axes::max_tick_label_width(cb) + 10 +
                    (cb.label.empty() ? 0 : label_height()) + 14;
  const cv::Rect area(box.x + left, box.y + top, box.width - left - right,
                      box.height - top - bottom_margin());
  x.make_ticks(ticks_target(area.width, 95, 3, 10));
  if (!p.y_label_shown) y.label.clear();
  Axes ax(area, x, y);

  // Image: each pixel takes the bin whose edges contain the pixel centre.
  std::vector<int> col_bin(static_cast<std::size_t>(area.width));
  for (int cidx = 0; cidx < area.width; ++cidx) {
    const double xv = x.lo + (cidx + 0.5) / area.width * (x.hi - x.lo);
    const auto it = std::upper_bound(de.begin(), de.end(), xv);
    col_bin[static_cast<std::size_t>(cidx)] =
        std::clamp(static_cast<int>(it - de.begin()) - 1, 0, static_cast<int>(delay.size()) - 1);
  }
  std::vector<int> row_bin(static_cast<std::size_t>(area.height));
  for (int r = 0; r < area.height; ++r) {
    const double yv = y.hi - (r + 0.5) / area.height * (y.hi - y.lo);
    const auto it = std::upper_bound(ee.begin(), ee.end(), yv);
    row_bin[static_cast<std::size_t>(r)] =
        std::clamp(static_cast<int>(it - ee.begin()) - 1, 0, static_cast<int>(energy.size()) - 1);
  }
  cv::Mat img = c.image();
  const double span = p.vmax - p.vmin;
  for (int r = 0; r < area.height; ++r) {
    auto* row = img.ptr<cv::Vec3b>(area.y + r);
    const int j = row_bin[static_cast<std::size_t>(r)];
    for (int cidx = 0; cidx < area.width; ++cidx) {
      const double v = data(col_bin[static_cast<std::size_t>(cidx)], j);
      const Rgb col = std::isfinite(v) ? plot::color_map_rgb(p.map, (v - p.vmin) / span) : kMissing;
      row[area.x + cidx] = cv::Vec3b(col.b, col.g, col.r);
    }
  }
  c.embed_raster(area);

  // Overlays.
  std::vector<plot::LegendEntry> legend;
  if (p.markers) {
    for (const auto& m : *p.markers) {
      if (!std::isfinite(m.energy_eV) || m.energy_eV < y.lo || m.energy_eV > y.hi) continue;
      const double py = plot::snap(ax.y_px(m.energy_eV));
      c.line({double(area.x), py}, {double(area.x + area.width), py}, m.color, 1, true, area);
    }
  }
  if (p.curves) {
    for (const auto& cu : *p.curves) {
      std::vector<cv::Point2d> pts;
      pts.reserve(cu.x.size());
      for (std::size_t i = 0; i < cu.x.size() && i < cu.y.size(); ++i) {
        pts.push_back(ax.to_px(cu.x[i], cu.y[i]));
      }
      c.polyline(pts, cu.color, cu.thickness_px, cu.dashed, area);
      if (!cu.label.empty()) {
        legend.push_back({cu.label, cu.color, true, cu.dashed, false, cu.thickness_px});
      }
    }
  }
  if (p.markers) {  // labels last, on top of the curves
    for (const auto& m : *p.markers) {
      if (!std::isfinite(m.energy_eV) || m.energy_eV < y.lo || m.energy_eV > y.hi) continue;
      const double py = plot::snap(ax.y_px(m.energy_eV));
      c.text_boxed(m.label, area.x + area.width - 8, py - 3, TextStyle::kTick, m.color,
                   Rgb{20, 20, 20}, 0.55, HAlign::kRight, VAlign::kBottom);
    }
  }
  if (!legend.empty()) {
    // Legend on white; lines in light colours get a dark sample so they stay visible.
    for (auto& e : legend) {
      if (int(e.color.r) + e.color.g + e.color.b > 600) e.color = Rgb{60, 60, 60};
    }
    plot::draw_legend(c, area, legend, {}, true);
  }

  ax.draw_frame(c, true, true);
  if (!p.title.empty()) {
    c.text(p.title, area.x + area.width / 2.0, box.y + top - 12, TextStyle::kTitle, kBlack,
           HAlign::kCenter, VAlign::kBottom);
  }

  // Colour bar.
  const cv::Rect bar(area.x + area.width + bar_gap, area.y, bar_w, area.height);
  for (int r = 0; r < bar.height; ++r) {
    const double t = 1.0 - (r + 0.5) / bar.height;
    const Rgb col = plot::color_map_rgb(p.map, t);
    cv::line(img, {bar.x, bar.y + r}, {bar.x + bar.width - 1, bar.y + r},
             cv::Scalar(col.b, col.g, col.r), 1, cv::LINE_8);
  }
  c.embed_raster(bar);
  Axes bar_axes(bar, AxisSpec{0, 1, false, "", plot::Ticks{1.0, {}, 0}}, AxisSpec{});
  bar_axes.set_right_axis(cb);
  bar_axes.draw_frame(c, true, false);
  return ax;
}

void check_trace_inputs(const Eigen::MatrixXd& data, const std::vector<double>& delay_fs,
                        const std::vector<double>& energy_eV, const std::string& figure,
                        const std::string& path) {
  check_axis(delay_fs, "delay_fs", data.rows(), "rows (delays)", figure, path);
  check_axis(energy_eV, "energy_eV", data.cols(), "columns (energies)", figure, path);
}

Canvas render_trace(const Eigen::MatrixXd& data, const std::vector<double>& delay_fs,
                    const std::vector<double>& energy_eV, const TraceFigureOptions& o,
                    const std::string& path, PlotGeometry* geometry, bool vector) {
  const std::string figure = "trace figure";
  require_valid(o.validate(), figure, path);
  check_trace_inputs(data, delay_fs, energy_eV, figure, path);
  Canvas c(o.width_px, o.height_px, vector);
  TracePanel p;
  p.title = o.title;
  p.x_label = o.x_label;
  p.y_label = o.y_label;
  p.colorbar_label = o.colorbar_label;
  if (o.diverging) {
    p.map = plot::ColorMap::kDiverging;
    std::tie(p.vmin, p.vmax) = symmetric_limits(data, o.value_min, o.value_max);
  } else {
    p.map = o.color_map;
    std::tie(p.vmin, p.vmax) = sequential_limits(data, o.value_min, o.value_max);
  }
  p.curves = &o.curves;
  p.markers = &o.markers;
  const Axes ax =
      draw_trace_panel(c, cv::Rect(0, 0, c.width(), c.height()), data, delay_fs, energy_eV, p);
  if (geometry) *geometry = ax.geometry();
  return c;
}

Canvas render_comparison(const Eigen::MatrixXd& measured, const Eigen::MatrixXd& retrieved,
                         const std::vector<double>& delay_fs, const std::vector<double>& energy_eV,
                         const ComparisonFigureOptions& o, const std::string& path, bool vector) {
  const std::string figure = "trace comparison figure";
  require_valid(o.validate(), figure, path);
  check_trace_inputs(measured, delay_fs, energy_eV, figure, path);
  if (retrieved.rows() != measured.rows() || retrieved.cols() != measured.cols()) {
    throw input_error("Cannot draw the " + figure + " '" + path + "': the retrieved trace is " +
                      std::to_string(retrieved.rows()) + " x " + std::to_string(retrieved.cols()) +
                      " but the measured one is " + std::to_string(measured.rows()) + " x " +
                      std::to_string(measured.cols()) + " (delays x energies; expected equal).");
  }
  double mu = 1.0;
  if (o.fit_scale) {
    double mr = 0.0, rr = 0.0;
    for (Eigen::Index j = 0; j < measured.cols(); ++j) {
      for (Eigen::Index i = 0; i < measured.rows(); ++i) {
        const double m = measured(i, j), r = retrieved(i, j);
        if (std::isfinite(m) && std::isfinite(r)) {
          mr += m * r;
          rr += r * r;
        }
      }
    }
    if (rr > 0.0 && std::isfinite(mr / rr) && mr / rr > 0.0) mu = mr / rr;
  }
  const Eigen::MatrixXd scaled = retrieved * mu;
  const Eigen::MatrixXd diff = measured - scaled;

  Canvas c(o.width_px, o.height_px, vector);
  const int top = o.title.empty() ? 0 : Canvas::text_size(o.title, TextStyle::kTitle).height + 22;
  if (!o.title.empty()) {
    c.text(o.title, c.width() / 2.0, top - 8, TextStyle::kTitle, kBlack, HAlign::kCenter,
           VAlign::kBottom);
  }
  const auto [m_lo, m_hi] = finite_range(measured);
  const auto [r_lo, r_hi] = finite_range(scaled);
  const double vmin = std::min({0.0, m_lo, r_lo});
  double vmax = std::max(m_hi, r_hi);
  if (!(vmax > vmin)) vmax = vmin + 1.0;
  const auto [d_lo, d_hi] = symmetric_limits(diff, std::nullopt, std::nullopt);

  const int panel_w = c.width() / 3;
  const Eigen::MatrixXd* mats[3] = {&measured, &scaled, &diff};
  for (int k = 0; k < 3; ++k) {
    TracePanel p;
    p.x_label = o.x_label;
    p.y_label = o.y_label;
    p.y_label_shown = k == 0;
    p.colorbar_label = o.colorbar_label;
    p.markers = &o.markers;
    if (k == 0) p.title = o.measured_title;
    if (k == 1) {
      char buf[64];
      std::snprintf(buf, sizeof buf, " (x%.4g)", mu);
      p.title = o.retrieved_title + (o.fit_scale ? std::string(buf) : std::string());
    }
    if (k == 2) p.title = o.difference_title;
    if (k < 2) {
      p.map = o.color_map;
      p.vmin = vmin;
      p.vmax = vmax;
    } else {
      p.map = plot::ColorMap::kDiverging;
      p.vmin = d_lo;
      p.vmax = d_hi;
    }
    const cv::Rect box(k * panel_w, top, k == 2 ? c.width() - 2 * panel_w : panel_w,
                       c.height() - top);
    draw_trace_panel(c, box, *mats[k], delay_fs, energy_eV, p);
  }
  return c;
}

// ---------------------------------------------------------------------------------------
// Line plots

struct Range {
  double lo = std::numeric_limits<double>::infinity();
  double hi = -std::numeric_limits<double>::infinity();
  void add(double v) {
    if (!std::isfinite(v)) return;
    lo = std::min(lo, v);
    hi = std::max(hi, v);
  }
  bool empty() const { return !(lo <= hi); }
};

bool usable_y(double y, bool log) { return std::isfinite(y) && (!log || y > 0.0); }

std::pair<double, double> padded(Range r, bool log, double pad_fraction) {
  if (r.empty()) return log ? std::pair{1.0, 10.0} : std::pair{0.0, 1.0};
  if (log) {
    double lo = std::pow(10.0, std::floor(std::log10(r.lo) + 1e-9));
    double hi = std::pow(10.0, std::ceil(std::log10(r.hi) - 1e-9));
    if (!(hi > lo)) hi = lo * 10.0;
    return {lo, hi};
  }
  if (r.hi == r.lo) {
    const double w = r.lo == 0.0 ? 1.0 : 0.1 * std::abs(r.lo);
    return {r.lo - w, r.hi + w};
  }
  const double w = r.hi - r.lo;
  return {r.lo - pad_fraction * w, r.hi + pad_fraction * w};
}

Canvas render_lines(const LinePlot& lp, const std::string& path, PlotGeometry* geometry,
                    bool vector) {
  const std::string figure = "line plot";
  require_valid(lp.validate(), figure, path);
  for (std::size_t k = 0; k < lp.series.size(); ++k) {
    const Series& s = lp.series[k];
    if (s.x.size() != s.y.size() || (!s.y_err.empty() && s.y_err.size() != s.y.size())) {
      throw input_error("Cannot draw the " + figure + " '" + path + "': series " +
                        std::to_string(k) + " ('" + s.label + "') has " +
                        std::to_string(s.x.size()) + " x, " + std::to_string(s.y.size()) +
                        " y and " + std::to_string(s.y_err.size()) +
                        " y_err values (expected x and y equal, y_err empty or equal).");
    }
  }
  bool any_right = false, any_points = false;
  Range rx, ry, ry2;
  for (const Series& s : lp.series) {
    const bool right = s.right_axis;
    any_right |= right;
    any_points |= s.markers || !s.y_err.empty();
    const bool log = !right && lp.log_y;
    Range& r = right ? ry2 : ry;
    for (std::size_t i = 0; i < s.x.size(); ++i) {
      if (!std::isfinite(s.x[i]) || !usable_y(s.y[i], log)) continue;
      if (lp.x_min && s.x[i] < *lp.x_min) continue;
      if (lp.x_max && s.x[i] > *lp.x_max) continue;
      rx.add(s.x[i]);
      r.add(s.y[i]);
      if (!s.y_err.empty() && std::isfinite(s.y_err[i])) {
        const double e = std::abs(s.y_err[i]);
        if (usable_y(s.y[i] - e, log)) r.add(s.y[i] - e);
        r.add(s.y[i] + e);
      }
    }
  }
  const bool drawable = !rx.empty() && (!ry.empty() || !ry2.empty());

  AxisSpec x, y, y2;
  std::tie(x.lo, x.hi) = padded(rx, false, any_points ? 0.03 : 0.0);
  if (lp.x_min) x.lo = *lp.x_min;
  if (lp.x_max) x.hi = *lp.x_max;
  std::tie(y.lo, y.hi) = padded(ry, lp.log_y, 0.06);
  if (lp.y_min) y.lo = *lp.y_min;
  if (lp.y_max) y.hi = *lp.y_max;
  std::tie(y2.lo, y2.hi) = padded(ry2, false, 0.06);
  if (lp.y2_min) y2.lo = *lp.y2_min;
  if (lp.y2_max) y2.hi = *lp.y2_max;
  if (!(x.hi > x.lo)) x.hi = x.lo + 1.0;
  if (!(y.hi > y.lo)) y.hi = y.lo + 1.0;
  if (!(y2.hi > y2.lo)) y2.hi = y2.lo + 1.0;
  // Both y axes signed and automatic: put their zeros at the same height.
  if (any_right && !lp.log_y && !lp.y_min && !lp.y_max && !lp.y2_min && !lp.y2_max && y.lo < 0.0 &&
      y.hi > 0.0 && y2.lo < 0.0 && y2.hi > 0.0) {
    const double f1 = -y.lo / (y.hi - y.lo), f2 = -y2.lo / (y2.hi - y2.lo);
    const double f = std::max(f1, f2);
    AxisSpec& lower = f1 < f2 ? y : y2;  // the axis whose zero sits lower moves its lo down
    lower.lo = -f * lower.hi / (1.0 - f);
  }
  y.log = lp.log_y;
  x.label = lp.x_label;
  y.label = lp.y_label;
  y2.label = lp.y2_label;

  Canvas c(lp.width_px, lp.height_px, vector);
  const int top = title_margin(lp.title);
  const int est_h = c.height() - top - bottom_margin();
  y.make_ticks(ticks_target(est_h, 75, 4, 10));
  y2.make_ticks(ticks_target(est_h, 75, 4, 10));
  const int left = left_margin(y, true);
  const int right = any_right ? left_margin(y2, true) : 28;
  const cv::Rect area(left, top, c.width() - left - right, c.height() - top - bottom_margin());
  x.make_ticks(ticks_target(area.width, 100, 3, 10));
  Axes ax(area, x, y);
  if (any_right) ax.set_right_axis(y2);

  ax.draw_grid(c);
  if (lp.zero_line && !lp.log_y && y.lo < 0.0 && y.hi > 0.0) {
    const double py = plot::snap(ax.y_px(0.0));
    c.line({double(area.x), py}, {double(area.x + area.width), py}, Rgb{120, 120, 120}, 1, true,
           area);
  }

  std::vector<plot::LegendEntry> legend;
  std::vector<cv::Point2d> drawn;
  std::size_t labelled = 0;
  for (const Series& s : lp.series) labelled += s.label.empty() ? 0 : 1;
  for (std::size_t k = 0; k < lp.series.size(); ++k) {
    const Series& s = lp.series[k];
    const Rgb col = s.color ? *s.color : plot::palette_color(k);
    const bool log = !s.right_axis && lp.log_y;
    const int th = std::clamp(s.thickness_px, 1, 6);
    std::vector<cv::Point2d> pts;
    pts.reserve(s.x.size());
    const double nan = std::numeric_limits<double>::quiet_NaN();
    for (std::size_t i = 0; i < s.x.size(); ++i) {
      if (!std::isfinite(s.x[i]) || !usable_y(s.y[i], log)) {
        pts.emplace_back(nan, nan);
        continue;
      }
      pts.push_back(ax.to_px(s.x[i], s.y[i], s.right_axis));
    }
    // Error bars with caps.
    if (!s.y_err.empty()) {
      for (std::size_t i = 0; i < s.x.size(); ++i) {
        if (!std::isfinite(pts[i].x) || !std::isfinite(s.y_err[i])) continue;
        const double e = std::abs(s.y_err[i]);
        const double lo_v = s.y[i] - e, hi_v = s.y[i] + e;
        const double py_hi = ax.y_px(hi_v, s.right_axis);
        const double py_lo =
            usable_y(lo_v, log) ? ax.y_px(lo_v, s.right_axis) : double(area.y + area.height + 10);
        const double px = plot::snap(pts[i].x);
        c.line({px, py_lo}, {px, py_hi}, col, 1, false, area);
        c.line({px - 4, py_lo}, {px + 4, py_lo}, col, 1, false, area);
        c.line({px - 4, py_hi}, {px + 4, py_hi}, col, 1, false, area);
        drawn.emplace_back(px, py_lo);
        drawn.emplace_back(px, py_hi);
      }
    }
    if (s.line) c.polyline(pts, col, th, s.dashed, area);
    if (s.markers) {
      for (const auto& p : pts) c.filled_circle(p, 2.0 + th, col, area);
    }
    // Points to keep clear of the legend: vertices plus interpolated points along lines.
    for (std::size_t i = 0; i < pts.size(); ++i) {
      if (!std::isfinite(pts[i].x)) continue;
      drawn.push_back(pts[i]);
      if (s.line && i + 1 < pts.size() && std::isfinite(pts[i + 1].x)) {
        const double len = cv::norm(pts[i + 1] - pts[i]);
        const int n = std::min(50, static_cast<int>(len / 6.0));
        for (int q = 1; q < n; ++q)
          drawn.push_back(pts[i] + (pts[i + 1] - pts[i]) * (q / double(n)));
      }
    }
    if (!s.label.empty() && lp.series.size() >= 2) {
      std::string label = s.label;
      if (any_right && labelled >= 2) label += s.right_axis ? " (right axis)" : " (left axis)";
      legend.push_back({label, col, s.line, s.dashed, s.markers, th});
    }
  }
  if (!drawable) {
    c.text("no data", area.x + area.width / 2.0, area.y + area.height / 2.0, TextStyle::kLabel,
           Rgb{120, 120, 120}, HAlign::kCenter, VAlign::kMiddle);
  }
  ax.draw_frame(c, true, true);
  if (!lp.title.empty()) {
    c.text(lp.title, area.x + area.width / 2.0, top - 12, TextStyle::kTitle, kBlack,
           HAlign::kCenter, VAlign::kBottom);
  }
  plot::draw_legend(c, area, legend, drawn);
  if (geometry) *geometry = ax.geometry();
  return c;
}

}  // namespace

// ---------------------------------------------------------------------------------------
// Options

std::string TraceFigureOptions::validate() const {
  if (auto m = check_size("TraceFigureOptions", width_px, height_px, 300, 200); !m.empty()) {
    return m;
  }
  if (auto m = check_limits("TraceFigureOptions", "value_min", value_min, "value_max", value_max);
      !m.empty()) {
    return m;
  }
  for (std::size_t k = 0; k < curves.size(); ++k) {
    if (curves[k].x.size() != curves[k].y.size()) {
      return "TraceFigureOptions.curves[" + std::to_string(k) + "] has " +
             std::to_string(curves[k].x.size()) + " x and " + std::to_string(curves[k].y.size()) +
             " y values (expected equal).";
    }
    if (curves[k].thickness_px < 1 || curves[k].thickness_px > 6) {
      return "TraceFigureOptions.curves[" + std::to_string(k) +
             "].thickness_px = " + std::to_string(curves[k].thickness_px) + " must be in [1, 6].";
    }
  }
  return "";
}

std::string ComparisonFigureOptions::validate() const {
  return check_size("ComparisonFigureOptions", width_px, height_px, 600, 200);
}

std::string LinePlot::validate() const {
  if (auto m = check_size("LinePlot", width_px, height_px, 300, 200); !m.empty()) return m;
  if (auto m = check_limits("LinePlot", "x_min", x_min, "x_max", x_max); !m.empty()) return m;
  if (auto m = check_limits("LinePlot", "y_min", y_min, "y_max", y_max); !m.empty()) return m;
  if (auto m = check_limits("LinePlot", "y2_min", y2_min, "y2_max", y2_max); !m.empty()) return m;
  if (log_y && y_min && !(*y_min > 0.0)) {
    return "LinePlot.y_min = " + format_g(*y_min) + " must be > 0 with log_y.";
  }
  for (std::size_t k = 0; k < series.size(); ++k) {
    if (series[k].thickness_px < 1 || series[k].thickness_px > 6) {
      return "LinePlot.series[" + std::to_string(k) +
             "].thickness_px = " + std::to_string(series[k].thickness_px) + " must be in [1, 6].";
    }
  }
  return "";
}

// ---------------------------------------------------------------------------------------
// Public entry points

namespace {

bool wants_svg(const std::string& path) {
  return plot::figure_format_of_path(path) == plot::FigureFormat::kSvg;
}

// The canvas in the format its path asks for, written atomically.
void write_canvas(const Canvas& c, const std::string& path, const std::string& what) {
  if (c.has_vector()) {
    const std::string svg = c.encode_svg();
    plot::write_file_atomically(path, std::vector<unsigned char>(svg.begin(), svg.end()), what);
  } else {
    plot::write_file_atomically(path, c.encode_png(), what);
  }
}

}  // namespace

PlotGeometry plot_trace_image(const Eigen::MatrixXd& data_rows_delay,
                              const std::vector<double>& delay_fs,
                              const std::vector<double>& energy_eV,
                              const TraceFigureOptions& options, const std::string& path) {
  PlotGeometry g;
  const Canvas c =
      render_trace(data_rows_delay, delay_fs, energy_eV, options, path, &g, wants_svg(path));
  write_canvas(c, path, "trace figure");
  return g;
}

void plot_trace_comparison(const Eigen::MatrixXd& measured, const Eigen::MatrixXd& retrieved,
                           const std::vector<double>& delay_fs,
                           const std::vector<double>& energy_eV,
                           const ComparisonFigureOptions& options, const std::string& path) {
  const Canvas c =
      render_comparison(measured, retrieved, delay_fs, energy_eV, options, path, wants_svg(path));
  write_canvas(c, path, "trace comparison figure");
}

PlotGeometry plot_lines(const LinePlot& plot, const std::string& path) {
  PlotGeometry g;
  const Canvas c = render_lines(plot, path, &g, wants_svg(path));
  write_canvas(c, path, "line plot");
  return g;
}

std::vector<unsigned char> render_trace_image_png(const Eigen::MatrixXd& data_rows_delay,
                                                  const std::vector<double>& delay_fs,
                                                  const std::vector<double>& energy_eV,
                                                  const TraceFigureOptions& options) {
  return render_trace(data_rows_delay, delay_fs, energy_eV, options, "(in memory)", nullptr, false)
      .encode_png();
}

std::vector<unsigned char> render_trace_comparison_png(const Eigen::MatrixXd& measured,
                                                       const Eigen::MatrixXd& retrieved,
                                                       const std::vector<double>& delay_fs,
                                                       const std::vector<double>& energy_eV,
                                                       const ComparisonFigureOptions& options) {
  return render_comparison(measured, retrieved, delay_fs, energy_eV, options, "(in memory)", false)
      .encode_png();
}

std::vector<unsigned char> render_lines_png(const LinePlot& plot) {
  return render_lines(plot, "(in memory)", nullptr, false).encode_png();
}

FigureBytes render_trace_image(const Eigen::MatrixXd& data_rows_delay,
                               const std::vector<double>& delay_fs,
                               const std::vector<double>& energy_eV,
                               const TraceFigureOptions& options, plot::FigureFormat format) {
  const bool v = format == plot::FigureFormat::kSvg;
  const Canvas c =
      render_trace(data_rows_delay, delay_fs, energy_eV, options, "(in memory)", nullptr, v);
  return {c.encode_png(), v ? c.encode_svg() : std::string()};
}

FigureBytes render_trace_comparison(const Eigen::MatrixXd& measured,
                                    const Eigen::MatrixXd& retrieved,
                                    const std::vector<double>& delay_fs,
                                    const std::vector<double>& energy_eV,
                                    const ComparisonFigureOptions& options,
                                    plot::FigureFormat format) {
  const bool v = format == plot::FigureFormat::kSvg;
  const Canvas c =
      render_comparison(measured, retrieved, delay_fs, energy_eV, options, "(in memory)", v);
  return {c.encode_png(), v ? c.encode_svg() : std::string()};
}

FigureBytes render_lines(const LinePlot& plot, plot::FigureFormat format) {
  const bool v = format == plot::FigureFormat::kSvg;
  const Canvas c = render_lines(plot, "(in memory)", nullptr, v);
  return {c.encode_png(), v ? c.encode_svg() : std::string()};
}

}  // namespace sw
