#pragma once
// Internals shared by the files of the RABBITT analysis (rabbitt.cpp, rabbitt_fits.cpp); not
// part of its interface (rabbitt.h).

#include <vector>

namespace sw::rabbitt_detail {

/// Result of weighted_line: y = intercept + slope (x - x0) with 1-sigma errors.
struct LineFit {
  double intercept = 0, slope = 0, intercept_sigma = 0, slope_sigma = 0, reduced_chi2 = 0;
  bool scaled = false;
};

/// Weighted fit y = a + b (x - x0), weights 1/sigma^2; the sigmas are scaled by sqrt(chi2_red)
/// when it exceeds 1 (then `scaled`). With a singular design (one distinct x) only the weighted
/// mean is fitted (slope 0).
LineFit weighted_line(const std::vector<double>& x, const std::vector<double>& y,
                      const std::vector<double>& sigma, double x0);

}  // namespace sw::rabbitt_detail
