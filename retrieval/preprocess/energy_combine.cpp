#include "retrieval/preprocess/energy_combine.h"

#include <algorithm>
#include <cmath>
#include <string>

#include "retrieval/core/error.h"
#include "retrieval/core/grid.h"
#include "retrieval/core/units.h"

namespace sw {

double signal_lag_extent(const Eigen::MatrixXd& counts, const Eigen::VectorXd& bg, double dW,
                         double z) {
  const Eigen::Index nd = counts.rows(), ne = counts.cols();
  std::size_t n = 64;
  while (n < 2 * static_cast<std::size_t>(ne)) n *= 2;
  const Fft fft(n);
  CVec in(n), out(n);
  std::vector<double> power(n / 2 + 1, 0.0), taper(static_cast<std::size_t>(ne));
  for (Eigen::Index j = 0; j < ne; ++j)
    taper[static_cast<std::size_t>(j)] =
        0.5 -
        0.5 * std::cos(units::kTwoPi * (static_cast<double>(j) + 0.5) / static_cast<double>(ne));
  double noise = 0, spread2 = 0;
  for (Eigen::Index i = 0; i < nd; ++i) {
    std::fill(in.begin(), in.end(), cdouble(0.0));
    double row_noise = 0;
    for (Eigen::Index j = 0; j < ne; ++j) {
      const double w = taper[static_cast<std::size_t>(j)];
      in[static_cast<std::size_t>(j)] = w * (counts(i, j) - bg(j));
      row_noise += w * w * std::max(counts(i, j), 0.0);
    }
    fft.time_to_freq(in, out);
    for (std::size_t m = 0; m <= n / 2; ++m) power[m] += std::norm(out[m]);
    noise += row_noise;
    spread2 += row_noise * row_noise;
  }
  const double threshold = noise + z * std::sqrt(spread2);
  std::size_t last = 0;
  for (std::size_t m = 0; m <= n / 2; ++m)
    if (power[m] > threshold) last = m;
  return units::kTwoPi * static_cast<double>(last) / (static_cast<double>(n) * dW);
}

EnergyCombineChoice choose_energy_combine(const Trace& trace, const PreprocessOptions& opt,
                                          const Eigen::MatrixXd& counts, const Eigen::VectorXd& bg,
                                          double dW) {
  const Eigen::Index ne = counts.cols();
  EnergyCombineChoice c;
  if (opt.energy_combine == 1) return c;
  if (opt.energy_combine >= 2) {
    if (ne / opt.energy_combine < 16)
      throw usage_error("preprocess: energy_combine = " + std::to_string(opt.energy_combine) +
                        " leaves " + std::to_string(ne / opt.energy_combine) + " of " +
                        std::to_string(ne) + " energy bins; expected at least 16");
    c.k = opt.energy_combine;
    return c;
  }
  const double period =
      units::period_au(units::wavelength_nm_to_omega_au(trace.meta.ir_wavelength_nm));
  const auto [lo, hi] = std::minmax_element(trace.delay_au.begin(), trace.delay_au.end());
  double window = std::max(opt.combine_min_window_periods * period,
                           opt.combine_min_window_span_factor * (*hi - *lo));
  // The XUV grid's time window is 2 pi / (k dW) (a.u.).
  if (std::floor(units::kTwoPi / (dW * window)) < 2) return c;
  const double lag = signal_lag_extent(counts, bg, dW, opt.combine_noise_sigmas);
  c.signal_lag_extent_fs = units::au_to_fs(lag);
  window = std::max(window, opt.combine_min_window_lags * lag);
  const double k = std::floor(units::kTwoPi / (dW * window));
  const double most = std::floor(static_cast<double>(ne) / 64.0);
  c.k = static_cast<int>(std::max(1.0, std::min(k, most)));
  return c;
}

std::size_t sum_energy_bins(int k, Eigen::MatrixXd& counts, Eigen::MatrixXd& blend,
                            Eigen::MatrixXd& saturated, Eigen::VectorXd& bg,
                            std::vector<double>& energy_au, std::vector<char>& masked) {
  const Eigen::Index ne = counts.cols(), ng = ne / k;
  auto sum_groups = [&](const Eigen::MatrixXd& m, bool largest) {
    Eigen::MatrixXd out(m.rows(), ng);
    for (Eigen::Index g = 0; g < ng; ++g)
      if (largest)
        out.col(g) = m.middleCols(g * k, k).rowwise().maxCoeff();
      else
        out.col(g) = m.middleCols(g * k, k).rowwise().sum();
    return out;
  };
  counts = sum_groups(counts, false);
  blend = sum_groups(blend, false);
  saturated = sum_groups(saturated, true);
  Eigen::VectorXd b2(ng);
  std::vector<double> w2(static_cast<std::size_t>(ng));
  std::vector<char> m2(masked.empty() ? 0 : static_cast<std::size_t>(ng), 0);
  for (Eigen::Index g = 0; g < ng; ++g) {
    b2(g) = bg.segment(g * k, k).sum();
    double w = 0;
    for (Eigen::Index j = g * k; j < (g + 1) * k; ++j) {
      w += energy_au[static_cast<std::size_t>(j)];
      if (!masked.empty() && masked[static_cast<std::size_t>(j)])
        m2[static_cast<std::size_t>(g)] = 1;
    }
    w2[static_cast<std::size_t>(g)] = w / k;
  }
  bg = b2;
  energy_au = w2;
  masked = m2;
  return static_cast<std::size_t>(ne - ng * k);
}

}  // namespace sw
