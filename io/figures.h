#pragma once
// Logbook figures as PNG files: photoelectron-energy-versus-delay images, a measured /
// retrieved / difference comparison, and line plots (pulse shapes, spectra, fields,
// convergence histories, RABBITT phases with error bars and fits).
//
// Figures for papers: a path ending in ".svg" gets the same figure as SVG 1.1 from the same
// drawing code (io/plot_canvas.h): text as <text>, lines, error bars and markers as vector
// paths, the trace images and colour bars embedded as base64 PNG <image> elements at the
// raster's resolution. Every other path gets the PNG, byte for byte as before.
//
// Every figure has a white background, labelled axes with units, ticks at 1-2-5 values
// (io/plot.h), a title, and a legend when several series are labelled. Text is drawn with
// OpenCV's Hershey fonts, which have no Greek letters: write "tau", "omega", "delay" in words.
// Files are written atomically (temporary name in the target folder, then renamed), so a
// reader never sees half a PNG. Errors (bad sizes, non-finite axes, unwritable folder) are
// sw::Error with a message that names the figure, the field and the path.
//
// Boundary units: delays in fs, energies in eV, times in fs or as, as the labels say; the
// figures never convert units themselves.

#include <optional>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "io/plot.h"

namespace sw {

/// Where the data area of a figure landed in the image, so that callers (and tests) can map
/// data coordinates to pixels. Pixel (col, row) with row 0 at the top of the image.
struct PlotGeometry {
  int left = 0, top = 0, right = 0, bottom = 0;  ///< data area, pixels, inclusive edges
  double x_min = 0, x_max = 0;                   ///< data values at left / right edges
  double y_min = 0, y_max = 0;                   ///< data values at bottom / top edges
  bool log_y = false;                            ///< y mapped logarithmically
  /// Continuous pixel coordinates of data x and data y (y increases upward on the image):
  /// x_min maps to `left`, x_max to `right + 1` (the outer edge of the last pixel); the pixel
  /// containing a point is floor() of its coordinates.
  double x_to_col(double x) const;
  double y_to_row(double y) const;
};

/// A curve drawn over a trace image, in the image's data units (x = delay fs, y = energy eV),
/// e.g. the classical centroid W0 - p0 A(tau).
struct OverlayCurve {
  std::vector<double> x;           ///< delay (fs), same length as y; non-finite points break it
  std::vector<double> y;           ///< energy (eV)
  std::string label;               ///< legend entry; "" = not in the legend
  plot::Rgb color{255, 255, 255};  ///< white reads well on the sequential maps
  bool dashed = false;
  int thickness_px = 2;
};

/// A horizontal dashed line across a trace image at a fixed energy, e.g. a sideband, with its
/// label written at the right end just above the line ("SB14").
struct EnergyMarker {
  double energy_eV = 0.0;
  std::string label;
  plot::Rgb color{255, 255, 255};
};

/// Options of plot_trace_image.
struct TraceFigureOptions {
  std::string title;                                    ///< figure title ("" = none)
  std::string x_label = "delay tau (fs)";               ///< x axis label with unit
  std::string y_label = "photoelectron energy (eV)";    ///< y axis label with unit
  std::string colorbar_label = "counts";                ///< colour-bar label with unit
  plot::ColorMap color_map = plot::ColorMap::kViridis;  ///< map for non-diverging images
  /// Signed data (e.g. measured - retrieved): the diverging map with limits -m..+m,
  /// m = max|value| unless value_min/value_max are given; 0 is white. Overrides color_map.
  bool diverging = false;
  /// Colour-scale limits in data units; default: min(0, data min) .. data max for sequential
  /// maps (so zero counts get the bottom colour), symmetric for diverging ones.
  std::optional<double> value_min, value_max;
  int width_px = 1000;                ///< image width, >= 300
  int height_px = 700;                ///< image height, >= 200
  std::vector<OverlayCurve> curves;   ///< drawn over the image
  std::vector<EnergyMarker> markers;  ///< horizontal dashed lines
  /// "" if the options are usable, else a message naming the field, its value and the rule.
  std::string validate() const;
};

/// Draws data(i, j) (row i = delay_fs[i], column j = energy_eV[j]) as an image with delay on
/// the x axis and energy on the y axis (increasing upward). Each delay occupies the pixel
/// columns between the midpoints to its neighbours (the first and last extend by half their
/// neighbour spacing), so non-uniform delay steps appear at their true positions; the same
/// holds for energies. Both axes must be strictly ascending and match the matrix size.
/// A colour bar with its own ticks and label sits at the right.
/// Throws sw::Error: kUsage for invalid options, kInput for data that do not fit the axes and
/// for an output path that cannot be written (missing folder, no permission).
/// `path` ending in ".svg": SVG, else PNG (also for plot_trace_comparison and plot_lines).
PlotGeometry plot_trace_image(const Eigen::MatrixXd& data_rows_delay,
                              const std::vector<double>& delay_fs,
                              const std::vector<double>& energy_eV,
                              const TraceFigureOptions& options, const std::string& path);

/// Options of plot_trace_comparison.
struct ComparisonFigureOptions {
  std::string title;  ///< figure title above the panels
  std::string x_label = "delay tau (fs)";
  std::string y_label = "photoelectron energy (eV)";
  std::string colorbar_label = "counts";
  std::string measured_title = "measured";
  std::string retrieved_title = "retrieved";
  std::string difference_title = "measured - retrieved";
  plot::ColorMap color_map = plot::ColorMap::kViridis;  ///< map of the first two panels
  /// Scale the retrieved trace by the least-squares factor mu = <M, R> / <R, R> before
  /// plotting and differencing (the factor is shown in the retrieved panel's title). Turn off
  /// when the retrieved trace is already in counts.
  bool fit_scale = true;
  int width_px = 1800;  ///< image width, >= 600
  int height_px = 620;  ///< image height, >= 200
  /// Overlays drawn on all three panels (e.g. sideband energies).
  std::vector<EnergyMarker> markers;
  std::string validate() const;
};

/// Three panels side by side: measured, retrieved (same colour scale as measured) and the
/// difference measured - retrieved with a symmetric diverging map, each with its colour bar.
/// Both matrices are delay rows x energy columns on the same axes.
void plot_trace_comparison(const Eigen::MatrixXd& measured, const Eigen::MatrixXd& retrieved,
                           const std::vector<double>& delay_fs,
                           const std::vector<double>& energy_eV,
                           const ComparisonFigureOptions& options, const std::string& path);

/// One series of a line plot.
struct Series {
  std::vector<double> x;
  std::vector<double> y;           ///< same length as x; non-finite points break the line
  std::vector<double> y_err;       ///< empty, or 1-sigma half-lengths of error bars per point
  std::string label;               ///< legend entry ("" = not in the legend)
  std::optional<plot::Rgb> color;  ///< default: palette colour of the series index
  bool dashed = false;             ///< dashed line
  bool line = true;                ///< connect the points
  bool markers = false;            ///< draw a filled circle at each point
  int thickness_px = 2;            ///< line thickness, 1..6
  bool right_axis = false;         ///< plot against the secondary (right) y axis
};

/// A line plot with an optional secondary y axis on the right (for phases).
struct LinePlot {
  std::string title;
  std::string x_label;   ///< with unit, e.g. "time (as)"
  std::string y_label;   ///< left axis, e.g. "intensity (arb. u.)"
  std::string y2_label;  ///< right axis, e.g. "phase (rad)"; used if any series
                         ///< has right_axis
  std::vector<Series> series;
  bool log_y = false;  ///< logarithmic left axis (convergence histories);
                       ///< non-positive values are skipped
  /// Axis limits; default: the data range (with error bars), padded and rounded to ticks.
  std::optional<double> x_min, x_max, y_min, y_max, y2_min, y2_max;
  /// A dotted horizontal line at y = 0 on the left axis when zero is inside the range.
  bool zero_line = false;
  int width_px = 1000;  ///< >= 300
  int height_px = 700;  ///< >= 200
  std::string validate() const;
};

/// Draws the line plot into a PNG. A series with fewer than one finite point is skipped (the
/// plot still appears, with "no data" if nothing was drawable).
PlotGeometry plot_lines(const LinePlot& plot, const std::string& path);

/// The same figures encoded as PNG bytes in memory (for embedding into reports without a file).
std::vector<unsigned char> render_trace_image_png(const Eigen::MatrixXd& data_rows_delay,
                                                  const std::vector<double>& delay_fs,
                                                  const std::vector<double>& energy_eV,
                                                  const TraceFigureOptions& options);
std::vector<unsigned char> render_trace_comparison_png(const Eigen::MatrixXd& measured,
                                                       const Eigen::MatrixXd& retrieved,
                                                       const std::vector<double>& delay_fs,
                                                       const std::vector<double>& energy_eV,
                                                       const ComparisonFigureOptions& options);
std::vector<unsigned char> render_lines_png(const LinePlot& plot);

/// A figure rendered in memory: the PNG bytes always, and the SVG document when asked for
/// (same layout; SVG user units are the PNG's pixels).
struct FigureBytes {
  std::vector<unsigned char> png;
  std::string svg;  ///< "" unless FigureFormat::kSvg was asked for
};
FigureBytes render_trace_image(const Eigen::MatrixXd& data_rows_delay,
                               const std::vector<double>& delay_fs,
                               const std::vector<double>& energy_eV,
                               const TraceFigureOptions& options, plot::FigureFormat format);
FigureBytes render_trace_comparison(const Eigen::MatrixXd& measured,
                                    const Eigen::MatrixXd& retrieved,
                                    const std::vector<double>& delay_fs,
                                    const std::vector<double>& energy_eV,
                                    const ComparisonFigureOptions& options,
                                    plot::FigureFormat format);
FigureBytes render_lines(const LinePlot& plot, plot::FigureFormat format);

}  // namespace sw
