#pragma once
// The line plot shared by the figure tests (test_figures.cpp, test_svg_figures.cpp,
// test_report_html.cpp): a Gaussian intensity, a quadratic phase on the right axis (dashed) and
// three markers with error bars, under a title with characters that need escaping in SVG/HTML.

#include <cmath>

#include "io/figures.h"

namespace sw::test {

inline LinePlot pulse_and_phase_plot() {
  LinePlot lp;
  lp.title = "pulse & phase <test>";
  lp.x_label = "time (as)";
  lp.y_label = "intensity (arb. u.)";
  lp.y2_label = "phase (rad)";
  Series a, b;
  for (int k = 0; k <= 40; ++k) {
    const double t = -400.0 + 20.0 * k;
    a.x.push_back(t);
    a.y.push_back(std::exp(-0.5 * std::pow(t / 90.0, 2)));
    b.x.push_back(t);
    b.y.push_back(1e-5 * t * t);
  }
  a.label = "intensity";
  b.label = "phase";
  b.right_axis = true;
  b.dashed = true;
  Series e;  // markers with error bars
  e.x = {-200, 0, 200};
  e.y = {0.2, 0.9, 0.3};
  e.y_err = {0.05, 0.1, 0.05};
  e.line = false;
  e.markers = true;
  e.label = "points";
  lp.series = {a, b, e};
  return lp;
}

}  // namespace sw::test
