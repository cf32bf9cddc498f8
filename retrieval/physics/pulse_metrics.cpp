#include "retrieval/physics/pulse_metrics.h"

#include <algorithm>
#include <cmath>
#include <string>

#include <Eigen/Dense>

#include "retrieval/core/error.h"
#include "retrieval/core/phase_unwrap.h"
#include "retrieval/core/units.h"

namespace sw {

namespace {

void check_same_size(const std::vector<double>& x, const std::vector<double>& y, const char* fn) {
  if (x.size() != y.size())
    throw Error(ErrorKind::kInternal, std::string(fn) + ": the axis has " +
                                          std::to_string(x.size()) + " samples but the profile " +
                                          std::to_string(y.size()) + ".");
}

// x where the straight line through (x0, y0), (x1, y1) reaches level h.
double crossing(double x0, double y0, double x1, double y1, double h) {
  if (y1 == y0) return 0.5 * (x0 + x1);
  return x0 + (h - y0) / (y1 - y0) * (x1 - x0);
}

std::size_t argmax(const std::vector<double>& y) {
  return static_cast<std::size_t>(std::max_element(y.begin(), y.end()) - y.begin());
}

long wrap(long i, long n) { return ((i % n) + n) % n; }

// Sub-sample offset (in samples, within +-0.5) and height of a peak at i from its neighbours,
// by a parabola through log y (exact for a Gaussian); plain parabola if a value is not positive.
void refine_peak(double ym, double y0, double yp, double& offset, double& height) {
  offset = 0.0;
  height = y0;
  if (!(y0 >= ym && y0 >= yp)) return;
  double a = ym, b = y0, c = yp;
  const bool logs = ym > 0 && y0 > 0 && yp > 0;
  if (logs) {
    a = std::log(ym);
    b = std::log(y0);
    c = std::log(yp);
  }
  const double den = a - 2.0 * b + c;
  if (!(den < 0.0)) return;
  offset = std::clamp(0.5 * (a - c) / den, -0.5, 0.5);
  const double v = b - 0.25 * (a - c) * offset;
  height = logs ? std::exp(v) : v;
}

}  // namespace

double fwhm(const std::vector<double>& x, const std::vector<double>& y) {
  check_same_size(x, y, "fwhm");
  const std::size_t n = y.size();
  if (n < 3) return 0.0;
  const double ymax = y[argmax(y)];
  if (!(ymax > 0.0)) return 0.0;
  const double h = 0.5 * ymax;
  std::size_t l = 0;
  while (y[l] < h) ++l;
  std::size_t r = n - 1;
  while (y[r] < h) --r;
  if (l == 0 || r == n - 1) return 0.0;
  return crossing(x[r], y[r], x[r + 1], y[r + 1], h) - crossing(x[l - 1], y[l - 1], x[l], y[l], h);
}

double periodic_main_peak_fwhm(const std::vector<double>& I, double dt, std::size_t* imax) {
  const std::size_t n = I.size();
  if (n == 0) return 0.0;
  const std::size_t m = argmax(I);
  if (imax) *imax = m;
  std::vector<double> x(n), y(n);
  for (std::size_t k = 0; k < n; ++k) {
    x[k] = (static_cast<double>(k) - static_cast<double>(n / 2)) * dt;
    y[k] = I[(m + k + n - n / 2) % n];
  }
  return fwhm_of_main_peak(x, y);
}

double fwhm_of_main_peak(const std::vector<double>& x, const std::vector<double>& y) {
  check_same_size(x, y, "fwhm_of_main_peak");
  const std::size_t n = y.size();
  if (n < 3) return 0.0;
  const std::size_t m = argmax(y);
  const double ymax = y[m];
  if (!(ymax > 0.0)) return 0.0;
  const double h = 0.5 * ymax;
  std::size_t l = m;
  while (l > 0 && y[l - 1] >= h) --l;
  std::size_t r = m;
  while (r + 1 < n && y[r + 1] >= h) ++r;
  if (l == 0 || r == n - 1) return 0.0;
  return crossing(x[r], y[r], x[r + 1], y[r + 1], h) - crossing(x[l - 1], y[l - 1], x[l], y[l], h);
}

double rms_width(const std::vector<double>& x, const std::vector<double>& y) {
  check_same_size(x, y, "rms_width");
  double s0 = 0, s1 = 0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    s0 += y[i];
    s1 += y[i] * x[i];
  }
  if (!(s0 > 0.0)) return 0.0;
  const double mean = s1 / s0;
  double s2 = 0;
  for (std::size_t i = 0; i < x.size(); ++i) s2 += y[i] * (x[i] - mean) * (x[i] - mean);
  return std::sqrt(std::max(s2 / s0, 0.0));
}

namespace {

// FWHM of the main peak of the field's intensity on its own (periodic) grid.
double grid_fwhm(const XuvField& f) {
  const std::vector<double> I = f.intensity();
  if (I.size() < 3) return 0.0;
  return periodic_main_peak_fwhm(I, f.grid().dt());
}

}  // namespace

XuvField refine_time_grid(const XuvField& f, std::size_t factor) {
  if (factor < 1) throw usage_error("refine_time_grid: factor = 0: must be >= 1");
  if (factor == 1) return f;
  const TimeGrid& g = f.grid();
  const std::size_t n = g.size(), m = n * factor;
  const CVec s = f.spectrum();
  CVec padded(m, cdouble(0.0, 0.0));
  // Centred index j (w = (j - n/2) dw) goes to j - n/2 + m/2 on the finer grid (same dw).
  for (std::size_t j = 0; j < n; ++j) padded[j + m / 2 - n / 2] = s[j];
  return XuvField::from_spectrum(TimeGrid(m, g.dt() / static_cast<double>(factor), g.t0()),
                                 f.carrier_au(), padded);
}

double intensity_fwhm(const XuvField& f, int min_samples) {
  const double coarse = grid_fwhm(f);
  const double dt = f.grid().dt();
  if (min_samples <= 0 || f.grid().size() < 3) return coarse;
  // Width too narrow to measure on the grid (0) is treated as one sample.
  const double width = coarse > 0.0 ? coarse : dt;
  if (width >= min_samples * dt) return coarse;
  std::size_t factor = 1;
  const std::size_t max_points = std::size_t{1} << 20;
  while (width * static_cast<double>(factor) < min_samples * dt &&
         factor * f.grid().size() * 2 <= max_points && factor < 256)
    factor *= 2;
  return grid_fwhm(refine_time_grid(f, factor));
}

XuvField transform_limited(const XuvField& f) {
  CVec s = f.spectrum();
  for (auto& v : s) v = cdouble(std::abs(v), 0.0);
  return XuvField::from_spectrum(f.grid(), f.carrier_au(), s);
}

double transform_limited_fwhm(const XuvField& f, int min_samples) {
  return intensity_fwhm(transform_limited(f), min_samples);
}

XuvField within_band(const XuvField& f, double lo, double hi) {
  CVec s = f.spectrum();
  const std::vector<double> w = f.photon_energies_au();
  for (std::size_t j = 0; j < s.size(); ++j)
    if (w[j] < lo || w[j] > hi) s[j] = 0.0;
  return XuvField::from_spectrum(f.grid(), f.carrier_au(), s);
}

double spectral_energy_outside(const XuvField& f, double lo, double hi) {
  const CVec s = f.spectrum();
  const std::vector<double> w = f.photon_energies_au();
  double out = 0, all = 0;
  for (std::size_t j = 0; j < s.size(); ++j) {
    const double p = std::norm(s[j]);
    all += p;
    if (w[j] < lo || w[j] > hi) out += p;
  }
  return all > 0 ? out / all : 0.0;
}

SpectralPhaseFit fit_spectral_phase(const XuvField& f, double threshold, int order) {
  if (!(threshold > 0.0 && threshold < 1.0))
    throw usage_error("fit_spectral_phase: threshold = " + std::to_string(threshold) +
                      " is invalid: it must lie in (0, 1) (fraction of the peak spectral "
                      "intensity).");
  if (order < 1 || order > 6)
    throw usage_error("fit_spectral_phase: order = " + std::to_string(order) +
                      " is invalid: it must lie in 1..6.");
  const CVec s = f.spectrum();
  const std::vector<double> w = f.photon_energies_au();
  const std::size_t n = s.size();
  std::vector<double> I(n);
  for (std::size_t j = 0; j < n; ++j) I[j] = std::norm(s[j]);
  const std::size_t jmax = argmax(I);
  const double Imax = I[jmax];

  SpectralPhaseFit out;
  out.bandwidth_fwhm = fwhm(w, I);
  std::vector<std::size_t> sel;
  for (std::size_t j = 0; j < n; ++j)
    if (Imax > 0.0 && I[j] > threshold * Imax) sel.push_back(j);
  out.bins_used = static_cast<int>(sel.size());
  if (sel.size() < static_cast<std::size_t>(order) + 1)
    throw numeric_error("fit_spectral_phase: only " + std::to_string(sel.size()) +
                        " spectral bins exceed " + std::to_string(threshold) +
                        " of the peak intensity; a polynomial of order " + std::to_string(order) +
                        " needs at least " + std::to_string(order + 1) + ".");

  // Unwrap along energy over the selected bins, outward from the spectral maximum.
  std::vector<double> phi(n, 0.0);
  const auto start = std::find(sel.begin(), sel.end(), jmax) - sel.begin();
  phi[jmax] = std::arg(s[jmax]);
  auto unwrap_from = [&](std::size_t prev, std::size_t cur) {
    phi[cur] = unwrap_next(phi[prev], std::arg(s[cur]));
  };
  for (std::ptrdiff_t i = start + 1; i < static_cast<std::ptrdiff_t>(sel.size()); ++i)
    unwrap_from(sel[static_cast<std::size_t>(i - 1)], sel[static_cast<std::size_t>(i)]);
  for (std::ptrdiff_t i = start - 1; i >= 0; --i)
    unwrap_from(sel[static_cast<std::size_t>(i + 1)], sel[static_cast<std::size_t>(i)]);

  double s0 = 0, s1 = 0;
  for (std::size_t j : sel) {
    s0 += I[j];
    s1 += I[j] * w[j];
  }
  const double w0 = s1 / s0;
  double s2 = 0;
  for (std::size_t j : sel) s2 += I[j] * (w[j] - w0) * (w[j] - w0);
  double scale = std::sqrt(s2 / s0);  // scaled axis u = (W - W0)/scale keeps the QR well posed
  if (!(scale > 0.0)) scale = f.grid().dw();

  const int m = static_cast<int>(sel.size());
  Eigen::MatrixXd A(m, order + 1);
  Eigen::VectorXd b(m);
  for (int r = 0; r < m; ++r) {
    const std::size_t j = sel[static_cast<std::size_t>(r)];
    const double sw = std::sqrt(I[j] / Imax);
    const double u = (w[j] - w0) / scale;
    double p = 1.0;
    for (int k = 0; k <= order; ++k) {
      A(r, k) = sw * p;
      p *= u;
    }
    b(r) = sw * phi[j];
  }
  const Eigen::VectorXd c = A.colPivHouseholderQr().solve(b);
  const Eigen::VectorXd res = A * c - b;
  double wsum = 0;
  for (std::size_t j : sel) wsum += I[j] / Imax;
  out.rms_residual_rad = std::sqrt(res.squaredNorm() / wsum);

  out.center_photon_energy = w0;
  out.group_delay = c(1) / scale;
  if (order >= 2) out.gdd = 2.0 * c(2) / (scale * scale);
  if (order >= 3) out.tod = 6.0 * c(3) / (scale * scale * scale);
  return out;
}

BurstStructure burst_structure(const XuvField& f, double driver_period_au) {
  if (!(driver_period_au > 0.0) || !std::isfinite(driver_period_au))
    throw usage_error("burst_structure: driver_period_au = " + std::to_string(driver_period_au) +
                      " is invalid: it must be a finite period > 0 a.u.");
  const std::vector<double> I = f.intensity();
  const long n = static_cast<long>(I.size());
  const double dt = f.grid().dt();
  BurstStructure out;
  if (n < 3) return out;
  auto at = [&](long i) { return I[static_cast<std::size_t>(wrap(i, n))]; };

  const long m = static_cast<long>(argmax(I));
  double off = 0.0, Imain = I[static_cast<std::size_t>(m)];
  refine_peak(at(m - 1), at(m), at(m + 1), off, Imain);
  out.main_peak_time = f.grid().time(static_cast<std::size_t>(m)) + off * dt;
  if (!(Imain > 0.0)) return out;

  const double T = driver_period_au;
  const long half_window = static_cast<long>(std::floor(0.125 * T / dt));
  // Peak in the window centred at main + shift (samples); local = interior local maximum.
  auto window_peak = [&](double shift_samples, bool& local) {
    const long c = m + static_cast<long>(std::lround(shift_samples));
    long best = c - half_window;
    for (long i = c - half_window; i <= c + half_window; ++i)
      if (at(i) > at(best)) best = i;
    local = at(best) >= at(best - 1) && at(best) >= at(best + 1) && best > c - half_window &&
            best < c + half_window;
    double o = 0.0, h = at(best);
    if (local) refine_peak(at(best - 1), at(best), at(best + 1), o, h);
    return h;
  };

  const double half_period_samples = 0.5 * T / dt;
  bool local = false;
  const double before = window_peak(-half_period_samples, local);
  const double after = window_peak(half_period_samples, local);
  out.satellite_intensity_ratio = std::max(before, after) / Imain;

  const long quarter = static_cast<long>(std::floor(0.25 * T / dt));
  double inside = 0.0, total = 0.0;
  for (long i = 0; i < n; ++i) total += I[static_cast<std::size_t>(i)];
  for (long i = m - std::min(quarter, (n - 1) / 2); i <= m + std::min(quarter, (n - 1) / 2); ++i)
    inside += at(i);
  out.main_burst_energy_fraction = total > 0.0 ? inside / total : 0.0;

  // Windows at k T/2 must not reach their wrapped images: |k| T/2 + T/8 < window/2.
  const double window = static_cast<double>(n) * dt;
  int count = 1;
  for (int k = 1; 0.5 * T * k + 0.125 * T < 0.5 * window; ++k)
    for (int sgn : {-1, 1}) {
      const double h = window_peak(sgn * k * half_period_samples, local);
      if (local && h >= 0.5 * Imain) ++count;
    }
  out.comparable_bursts = count;
  return out;
}

}  // namespace sw
