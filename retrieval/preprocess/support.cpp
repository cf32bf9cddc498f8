#include "retrieval/preprocess/support.h"

#include <algorithm>
#include <cmath>
#include <sstream>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"

namespace sw {

std::string SupportOptions::validate() const {
  std::ostringstream s;
  if (!(min_sigma > 0))
    s << "min_sigma = " << min_sigma << ": must be > 0";
  else if (smoothing_bins < 1)
    s << "smoothing_bins = " << smoothing_bins << ": must be >= 1";
  else if (!(max_gap_eV >= 0))
    s << "max_gap_eV = " << max_gap_eV << ": must be >= 0";
  else if (margin_bins < 0)
    s << "margin_bins = " << margin_bins << ": must be >= 0";
  else if (!(margin_fraction >= 0))
    s << "margin_fraction = " << margin_fraction << ": must be >= 0";
  return s.str();
}

EnergySupport find_energy_support(const Eigen::MatrixXd& signal, const Eigen::MatrixXd& raw,
                                  const std::vector<double>& W, const SupportOptions& o) {
  if (const std::string e = o.validate(); !e.empty()) throw usage_error("energy support: " + e);
  const Eigen::Index ne = signal.cols();
  if (raw.rows() != signal.rows() || raw.cols() != ne || static_cast<Eigen::Index>(W.size()) != ne)
    throw Error(ErrorKind::kInternal,
                "find_energy_support: signal, counts and energy axis differ in size");
  EnergySupport out;
  if (ne < 2) return out;
  const Eigen::VectorXd S = signal.colwise().sum().transpose();
  const Eigen::VectorXd V = raw.cwiseMax(1.0).colwise().sum().transpose();
  const long half = o.smoothing_bins / 2;
  std::vector<double> sb(static_cast<std::size_t>(ne)), z(static_cast<std::size_t>(ne));
  for (Eigen::Index j = 0; j < ne; ++j) {
    double a = 0, v = 0;
    for (long d = -half; d <= half; ++d) {
      const Eigen::Index k = j + d;
      if (k < 0 || k >= ne) continue;
      a += S(k);
      v += V(k);
    }
    sb[static_cast<std::size_t>(j)] = a;
    z[static_cast<std::size_t>(j)] = v > 0 ? a / std::sqrt(v) : 0.0;
  }
  out.peak_sigma = *std::max_element(z.begin(), z.end());
  const auto peak = static_cast<long>(std::max_element(sb.begin(), sb.end()) - sb.begin());
  if (!(z[static_cast<std::size_t>(peak)] >= o.min_sigma)) return out;
  const double dW = (W.back() - W.front()) / static_cast<double>(ne - 1);
  const long gap = std::max(0L, std::lround(units::eV_to_au(o.max_gap_eV) / dW));
  auto above = [&](long j) { return z[static_cast<std::size_t>(j)] >= o.min_sigma; };
  long lo = peak, hi = peak;
  // Grow while the next significant bin lies within `gap` sub-threshold bins.
  for (long j = hi + 1, run = 0; j < ne && run <= gap; ++j) {
    if (above(j)) {
      hi = j;
      run = 0;
    } else {
      ++run;
    }
  }
  for (long j = lo - 1, run = 0; j >= 0 && run <= gap; --j) {
    if (above(j)) {
      lo = j;
      run = 0;
    } else {
      ++run;
    }
  }
  const long width = hi - lo + 1;
  out.fills_axis = lo == 0 && hi == static_cast<long>(ne) - 1;
  out.core_share = static_cast<double>(width) / static_cast<double>(ne);
  const long margin = o.margin_bins + std::lround(o.margin_fraction * static_cast<double>(width));
  lo = std::max(0L, lo - margin);
  hi = std::min(static_cast<long>(ne) - 1, hi + margin);
  out.lo_index = static_cast<std::size_t>(lo);
  out.hi_index = static_cast<std::size_t>(hi);
  // Band edges at the outer bin edges.
  out.lo_au = W[out.lo_index] - 0.5 * dW;
  out.hi_au = W[out.hi_index] + 0.5 * dW;
  out.found = true;
  return out;
}

}  // namespace sw
