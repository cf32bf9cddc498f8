// Tests of io/plot.h (ticks, colour maps) and io/figures.h (PNG figures).
#include <catch2/catch.hpp>

#include <cmath>
#include <filesystem>
#include <set>
#include <string>

#include <unistd.h>

#include <opencv2/imgcodecs.hpp>

#include "io/figures.h"
#include "io/plot.h"
#include "retrieval/core/error.h"
#include "tests/plot_test_support.h"
#include "tests/test_support.h"

namespace fs = std::filesystem;
using sw::plot::Rgb;

namespace {

using sw::test::TempDir;
using sw::test::write_text;

// A fresh, empty folder per test case, removed afterwards.

Rgb pixel(const cv::Mat& img, int row, int col) {
  const cv::Vec3b p = img.at<cv::Vec3b>(row, col);
  return Rgb{p[2], p[1], p[0]};
}

bool is_125_step(double step) {
  const double e = std::floor(std::log10(step));
  const double m = step / std::pow(10.0, e);
  return std::abs(m - 1) < 1e-9 || std::abs(m - 2) < 1e-9 || std::abs(m - 5) < 1e-9;
}

// Relative luminance of sRGB-ish 8-bit colour (Rec. 709 luma weights; common practice).
double luma(Rgb c) { return 0.2126 * c.r + 0.7152 * c.g + 0.0722 * c.b; }

}  // namespace

// ---------------------------------------------------------------------------------------
// Ticks

TEST_CASE("nice ticks use 1-2-5 steps and cover the range", "[figures][ticks]") {
  // Rule: step in {1, 2, 5} x 10^k, ticks at integer multiples of the step, the whole range
  // covered with at most one step left over at each end (common practice; Heckbert, "Nice
  // numbers for graph labels", Graphics Gems I, 1990).
  const std::vector<std::pair<double, double>> ranges = {
      {0, 1},       {-6.05, 6.05}, {40.0, 115.0}, {0.0123, 0.0456}, {-3.2e-4, 7.7e-4},
      {1.0, 1.001}, {-250, 12000}, {3e12, 8e12},  {-1, -0.2},       {87.3, 87.9}};
  for (const auto& [lo, hi] : ranges) {
    for (int target : {4, 6, 9}) {
      const sw::plot::Ticks t = sw::plot::nice_ticks(lo, hi, target);
      INFO("range [" << lo << ", " << hi << "], target " << target << ", step " << t.step);
      REQUIRE(t.step > 0);
      CHECK(is_125_step(t.step));
      REQUIRE(t.values.size() >= 3);  // at least three labelled ticks on every axis
      CHECK(t.values.size() <= static_cast<std::size_t>(2 * target + 1));
      CHECK(t.values.front() >= lo - 1e-9 * t.step);
      CHECK(t.values.back() <= hi + 1e-9 * t.step);
      CHECK(t.values.front() - lo < t.step);
      CHECK(hi - t.values.back() < t.step);
      for (std::size_t i = 0; i < t.values.size(); ++i) {
        const double k = t.values[i] / t.step;
        CHECK(std::abs(k - std::round(k)) < 1e-6);
        if (i > 0) CHECK(t.values[i] - t.values[i - 1] == Approx(t.step).epsilon(1e-9));
      }
    }
  }
}

TEST_CASE("nice ticks of [0, 1] are 0, 0.2, ..., 1 and labels are clean", "[figures][ticks]") {
  // Hand count: (1 - 0)/(6 - 1) = 0.2 is already a 1-2-5 number (common practice).
  const sw::plot::Ticks t = sw::plot::nice_ticks(0.0, 1.0, 6);
  REQUIRE(t.values.size() == 6);
  CHECK(t.step == Approx(0.2));
  std::vector<std::string> labels;
  for (double v : t.values) labels.push_back(sw::plot::format_tick(v, t.step, t.exponent));
  CHECK(labels == std::vector<std::string>{"0.0", "0.2", "0.4", "0.6", "0.8", "1.0"});
  CHECK(sw::plot::format_tick(0.30000000000000004, 0.1) == "0.3");
  CHECK(sw::plot::format_tick(-1e-17, 0.5) == "0.0");
  CHECK(sw::plot::format_tick(1500, 500) == "1500");
  CHECK(sw::plot::format_tick(2.5, 0.25) == "2.50");

  // Large values: the power of ten goes into the axis label, ticks stay short.
  const sw::plot::Ticks big = sw::plot::nice_ticks(3e12, 8e12, 6);
  CHECK(big.exponent == 12);
  CHECK(sw::plot::format_tick(big.values.front(), big.step, big.exponent) == "3");

  const auto [lo, hi] = sw::plot::nice_limits(0.13, 0.87, 6);
  CHECK(lo == Approx(0.1));
  CHECK(hi == Approx(0.9));
}

TEST_CASE("log ticks are decades inside the range", "[figures][ticks]") {
  const sw::plot::Ticks t = sw::plot::log_ticks(1e-4, 1.0);
  REQUIRE(t.values.size() == 5);
  for (std::size_t i = 0; i < t.values.size(); ++i) {
    CHECK(std::log10(t.values[i]) == Approx(-4.0 + double(i)));
  }
  CHECK(sw::plot::format_log_tick(1e-4) == "1e-4");
  CHECK(sw::plot::format_log_tick(0.01) == "0.01");
  CHECK(sw::plot::format_log_tick(100) == "100");
  // Less than two decades: 2x and 5x sub-ticks are labelled too.
  const sw::plot::Ticks s = sw::plot::log_ticks(0.01, 0.5);
  CHECK(s.values == std::vector<double>{0.01, 0.02, 0.05, 0.1, 0.2, 0.5});
}

// ---------------------------------------------------------------------------------------
// Colour maps

TEST_CASE("sequential maps brighten monotonically, the diverging map is white at 0",
          "[figures][colormap]") {
  // Viridis, magma and inferno were designed with monotonically increasing lightness
  // (S. van der Walt and N. Smith, matplotlib colour maps, SciPy 2015) — checked on luma.
  for (auto m : {sw::plot::ColorMap::kViridis, sw::plot::ColorMap::kMagma,
                 sw::plot::ColorMap::kInferno, sw::plot::ColorMap::kGray}) {
    INFO(sw::plot::to_string(m));
    double prev = -1;
    for (int i = 0; i <= 32; ++i) {
      const double l = luma(sw::plot::color_map_rgb(m, i / 32.0));
      CHECK(l >= prev - 2.0);  // allow 8-bit rounding of the tables
      prev = l;
    }
    CHECK(luma(sw::plot::color_map_rgb(m, 1.0)) - luma(sw::plot::color_map_rgb(m, 0.0)) > 150);
  }
  using sw::plot::ColorMap;
  CHECK(sw::plot::color_map_rgb(ColorMap::kDiverging, 0.5) == Rgb{255, 255, 255});
  const Rgb lo = sw::plot::color_map_rgb(ColorMap::kDiverging, 0.0);
  const Rgb hi = sw::plot::color_map_rgb(ColorMap::kDiverging, 1.0);
  CHECK(lo.b > lo.r);  // negative = blue
  CHECK(hi.r > hi.b);  // positive = red
  // Symmetric strength: equal distance from white on both sides (within 25 luma levels).
  CHECK(std::abs(luma(lo) - luma(hi)) < 25);
  ColorMap parsed;
  REQUIRE(sw::plot::parse_color_map("magma", &parsed));
  CHECK(parsed == ColorMap::kMagma);
  CHECK_FALSE(sw::plot::parse_color_map("rainbow", &parsed));
}

// ---------------------------------------------------------------------------------------
// Trace image

TEST_CASE("trace image: hot spot lands at its delay and energy; axis orientation",
          "[figures][trace]") {
  TempDir dir("trace");
  // Non-uniform delay axis (a jittering stage) and a uniform energy axis.
  std::vector<double> delay;
  double d = -5.0;
  for (int i = 0; i < 41; ++i) {
    delay.push_back(d);
    d += (i % 3 == 0) ? 0.4 : 0.2;
  }
  std::vector<double> energy;
  for (int j = 0; j < 60; ++j) energy.push_back(40.0 + 0.5 * j);

  struct Spot {
    int i, j;
    bool right, up;
  };
  // Late delay + high energy must appear right and up; early + low, left and down.
  for (const Spot& s : {Spot{33, 47, true, true}, Spot{4, 9, false, false}}) {
    INFO("hot spot at delay " << delay[s.i] << " fs, energy " << energy[s.j] << " eV");
    Eigen::MatrixXd data = Eigen::MatrixXd::Zero(41, 60);
    data(s.i, s.j) = 1234.0;
    sw::TraceFigureOptions o;
    o.title = "hot spot";
    const std::string png = dir.file("trace.png");
    const sw::PlotGeometry g = sw::plot_trace_image(data, delay, energy, o, png);

    const cv::Mat img = cv::imread(png, cv::IMREAD_UNCHANGED);
    REQUIRE(!img.empty());
    CHECK(img.cols == 1000);
    CHECK(img.rows == 700);
    CHECK(img.channels() == 3);

    const Rgb top = sw::plot::color_map_rgb(sw::plot::ColorMap::kViridis, 1.0);
    const Rgb bottom = sw::plot::color_map_rgb(sw::plot::ColorMap::kViridis, 0.0);
    int c0 = 1 << 30, c1 = -1, r0 = 1 << 30, r1 = -1, n_top = 0;
    bool others_bottom = true;
    for (int r = g.top; r <= g.bottom; ++r) {
      for (int c = g.left; c <= g.right; ++c) {
        const Rgb p = pixel(img, r, c);
        if (p == top) {
          ++n_top;
          c0 = std::min(c0, c);
          c1 = std::max(c1, c);
          r0 = std::min(r0, r);
          r1 = std::max(r1, r);
        } else if (!(p == bottom)) {
          others_bottom = false;
        }
      }
    }
    REQUIRE(n_top > 0);
    CHECK(others_bottom);  // zero counts everywhere else -> bottom colour (no overlays here)
    // The spot fills exactly the rectangle of its bin: delay bin between the midpoints to its
    // neighbours (non-uniform), energy bin between its half steps.
    CHECK(n_top == (c1 - c0 + 1) * (r1 - r0 + 1));
    const double d_lo = 0.5 * (delay[s.i - 1] + delay[s.i]);
    const double d_hi = 0.5 * (delay[s.i] + delay[s.i + 1]);
    CHECK(c0 == Approx(g.x_to_col(d_lo)).margin(1.0));
    CHECK(c1 + 1 == Approx(g.x_to_col(d_hi)).margin(1.0));
    CHECK(r0 == Approx(g.y_to_row(energy[s.j] + 0.25)).margin(1.0));
    CHECK(r1 + 1 == Approx(g.y_to_row(energy[s.j] - 0.25)).margin(1.0));
    // Geometry spans the outer bin edges.
    CHECK(g.x_min == Approx(delay.front() - 0.5 * (delay[1] - delay[0])));
    CHECK(g.y_max == Approx(energy.back() + 0.25));
    // Orientation, independent of the geometry's own mapping.
    const double cc = 0.5 * (c0 + c1), rc = 0.5 * (r0 + r1);
    const double mid_c = 0.5 * (g.left + g.right), mid_r = 0.5 * (g.top + g.bottom);
    CHECK((cc > mid_c) == s.right);
    CHECK((rc < mid_r) == s.up);
    // The non-uniform delay bin width in pixels follows its true width in fs.
    const double px_per_fs = (g.right - g.left + 1) / (g.x_max - g.x_min);
    CHECK(c1 - c0 + 1 == Approx((d_hi - d_lo) * px_per_fs).margin(1.5));
  }
  CHECK(dir.listing() == std::vector<std::string>{"trace.png"});  // no temporary files left
}

TEST_CASE("difference trace uses the symmetric diverging map", "[figures][trace]") {
  TempDir dir("diff");
  std::vector<double> delay{-1.0, 0.0, 1.0, 2.0}, energy{10.0, 11.0, 12.0};
  Eigen::MatrixXd diff = Eigen::MatrixXd::Zero(4, 3);
  diff(0, 0) = 5.0;   // early, low: most positive
  diff(3, 2) = -3.0;  // late, high: negative, but |max| is 5
  sw::TraceFigureOptions o;
  o.diverging = true;
  o.colorbar_label = "counts";
  const sw::PlotGeometry g = sw::plot_trace_image(diff, delay, energy, o, dir.file("diff.png"));
  const cv::Mat img = cv::imread(dir.file("diff.png"));
  REQUIRE(!img.empty());
  auto at = [&](double dfs, double eev) {
    return pixel(img, static_cast<int>(g.y_to_row(eev)), static_cast<int>(g.x_to_col(dfs)));
  };
  using sw::plot::ColorMap;
  CHECK(at(-1.0, 10.0) == sw::plot::color_map_rgb(ColorMap::kDiverging, 1.0));
  CHECK(at(1.0, 11.0) == Rgb{255, 255, 255});
  // -3 on the symmetric scale -5..5 sits at t = 0.2.
  CHECK(at(2.0, 12.0) == sw::plot::color_map_rgb(ColorMap::kDiverging, 0.2));
}

TEST_CASE("trace comparison and line plots are written as 3-channel PNGs", "[figures]") {
  TempDir dir("multi");
  std::vector<double> delay, energy;
  for (int i = 0; i < 30; ++i) delay.push_back(-3.0 + 0.2 * i);
  for (int j = 0; j < 50; ++j) energy.push_back(60.0 + 0.4 * j);
  Eigen::MatrixXd m(30, 50), r(30, 50);
  for (int i = 0; i < 30; ++i) {
    for (int j = 0; j < 50; ++j) {
      const double c = 70.0 + 3.0 * std::sin(delay[i]);
      m(i, j) = 100.0 * std::exp(-std::pow((energy[j] - c) / 2.0, 2));
      r(i, j) = 0.5 * m(i, j) * (1.0 + 0.01 * std::cos(energy[j]));  // different scale
    }
  }
  sw::ComparisonFigureOptions co;
  co.title = "comparison";
  sw::plot_trace_comparison(m, r, delay, energy, co, dir.file("cmp.png"));
  const cv::Mat cmp = cv::imread(dir.file("cmp.png"), cv::IMREAD_UNCHANGED);
  REQUIRE(!cmp.empty());
  CHECK(cmp.cols == co.width_px);
  CHECK(cmp.rows == co.height_px);
  CHECK(cmp.channels() == 3);

  const sw::LinePlot lp = sw::test::pulse_and_phase_plot();
  sw::plot_lines(lp, dir.file("lines.png"));
  const cv::Mat lines = cv::imread(dir.file("lines.png"), cv::IMREAD_UNCHANGED);
  REQUIRE(!lines.empty());
  CHECK(lines.cols == 1000);
  CHECK(lines.rows == 700);
  CHECK(lines.channels() == 3);
  CHECK(dir.listing() == std::vector<std::string>{"cmp.png", "lines.png"});

  // In-memory rendering decodes to the same image size.
  const std::vector<unsigned char> bytes = sw::render_lines_png(lp);
  const cv::Mat dec = cv::imdecode(bytes, cv::IMREAD_COLOR);
  CHECK(dec.cols == 1000);
  CHECK(dec.rows == 700);
}

TEST_CASE("line plot: a series is drawn where the geometry says, also on log y",
          "[figures][lines]") {
  TempDir dir("geom");
  const Rgb red{230, 0, 0};
  sw::LinePlot lp;
  lp.x_label = "iteration";
  lp.y_label = "trace error";
  lp.log_y = true;
  sw::Series s;
  for (int k = 0; k <= 100; ++k) {
    s.x.push_back(k);
    s.y.push_back(0.01);  // flat line at 1e-2
  }
  s.color = red;
  sw::Series decay;
  for (int k = 0; k <= 100; ++k) {
    decay.x.push_back(k);
    decay.y.push_back(0.5 * std::exp(-0.06 * k));
  }
  lp.series = {s, decay};
  const sw::PlotGeometry g = sw::plot_lines(lp, dir.file("conv.png"));
  // Data from 1.2e-3 to 0.5: limits are the enclosing decades 1e-3 .. 1.
  CHECK(g.log_y);
  CHECK(g.y_min == Approx(1e-3));
  CHECK(g.y_max == Approx(1.0));
  const cv::Mat img = cv::imread(dir.file("conv.png"));
  REQUIRE(!img.empty());
  // The flat line sits at 1/3 of the height from the bottom (log10: -2 between -3 and 0).
  const int row = static_cast<int>(g.y_to_row(0.01));
  CHECK(row == Approx(g.top + 2.0 * (g.bottom - g.top + 1) / 3.0).margin(1.0));
  const int col = static_cast<int>(g.x_to_col(30.0));
  bool found = false;
  for (int dr = -2; dr <= 2; ++dr) {
    const Rgb p = pixel(img, row + dr, col);
    if (p.r > 200 && p.g < 60 && p.b < 60) found = true;
  }
  CHECK(found);
  // Error bars with values near zero on a linear axis, empty series, NaNs: no throw.
  sw::LinePlot e;
  e.x_label = "photoelectron energy (eV)";
  e.y_label = "group delay (as)";
  sw::Series pts;
  pts.x = {10, 13, 16, 19};
  pts.y = {120, std::nan(""), 80, 60};
  pts.y_err = {5, 5, 4, 6};
  pts.line = false;
  pts.markers = true;
  e.series = {pts, sw::Series{}};
  CHECK_NOTHROW(sw::plot_lines(e, dir.file("rabbitt.png")));
}

TEST_CASE("figure errors name the field and write nothing", "[figures][errors]") {
  TempDir dir("errors");
  CHECK(sw::TraceFigureOptions{}.validate().empty());
  CHECK(sw::ComparisonFigureOptions{}.validate().empty());
  CHECK(sw::LinePlot{}.validate().empty());

  Eigen::MatrixXd data = Eigen::MatrixXd::Ones(3, 4);
  std::vector<double> delay{0, 1, 2}, energy{1, 2, 3, 4};
  sw::TraceFigureOptions o;
  try {
    sw::plot_trace_image(data, {0, 1}, energy, o, dir.file("a.png"));
    FAIL("expected an error");
  } catch (const sw::Error& e) {
    CHECK(e.kind() == sw::ErrorKind::kInput);
    CHECK_THAT(e.what(), Catch::Contains("delay_fs") && Catch::Contains("a.png"));
  }
  try {
    sw::plot_trace_image(data, delay, {1, 2, 2, 4}, o, dir.file("b.png"));
    FAIL("expected an error");
  } catch (const sw::Error& e) {
    CHECK_THAT(e.what(), Catch::Contains("energy_eV[2]") && Catch::Contains("ascending"));
  }
  o.width_px = 10;
  try {
    sw::plot_trace_image(data, delay, energy, o, dir.file("c.png"));
    FAIL("expected an error");
  } catch (const sw::Error& e) {
    CHECK(e.kind() == sw::ErrorKind::kUsage);
    CHECK_THAT(e.what(), Catch::Contains("width_px = 10"));
  }
  sw::LinePlot lp;
  lp.log_y = true;
  lp.y_min = 0.0;
  CHECK_THAT(lp.validate(), Catch::Contains("y_min"));
  sw::LinePlot bad;
  sw::Series s;
  s.x = {1, 2, 3};
  s.y = {1, 2};
  bad.series = {s};
  CHECK_THROWS_AS(sw::plot_lines(bad, dir.file("d.png")), sw::Error);
  // Missing folder: an error naming the path, nothing written anywhere.
  CHECK_THROWS_WITH(sw::plot_lines(sw::LinePlot{}, dir.file("missing/e.png")),
                    Catch::Contains("missing"));
  CHECK(dir.listing().empty());
}
