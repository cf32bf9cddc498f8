#include "synthetic/xuv_source.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "retrieval/core/units.h"
#include "retrieval/physics/xuv_builders.h"

namespace sw::synthetic {

namespace {

// Spectral amplitude width sigma_w of a Gaussian burst (retrieval/physics/xuv_builders.h).
double sigma_w(const GaussianXuvPulse& b) {
  return 2.0 * std::sqrt(std::log(2.0)) / units::as_to_au(b.transform_limited_fwhm_as);
}

// 1e-9 of the spectral amplitude: exp(-x^2 / (2 sigma^2)) = 1e-9 at x = 6.44 sigma.
constexpr double kSpectralSupportSigmas = 6.5;
// 1e-9 of the temporal amplitude exp(-2 ln2 t^2 / fwhm^2) at t = 3.87 fwhm.
constexpr double kTemporalSupportFwhms = 3.9;

double burst_half_extent(const GaussianXuvPulse& b) {
  const double B = kSpectralSupportSigmas * sigma_w(b);
  const double gdd = units::as2_to_au(b.gdd_as2), tod = units::as3_to_au(b.tod_as3);
  double gd = 0;  // largest |group delay| over the spectral support
  for (int i = -20; i <= 20; ++i) {
    const double x = B * i / 20.0;
    gd = std::max(gd, std::abs(gdd * x + 0.5 * tod * x * x));
  }
  return std::abs(units::as_to_au(b.center_time_as)) +
         kTemporalSupportFwhms * units::as_to_au(b.transform_limited_fwhm_as) + gd;
}

// Grid sizes are powers of two: FFTW plans (made with FFTW_MEASURE, cached per size by sw::Fft)
// are cheapest to make for them, and repeated scans reuse the same few sizes.
std::size_t pow2_at_least(std::size_t n) {
  std::size_t p = 16;
  while (p < n) p *= 2;
  return p;
}

double edge_level(const XuvField& f) {
  const CVec& e = f.envelope();
  const std::size_t n = e.size();
  const std::size_t m = std::max<std::size_t>(4, n / 50);
  double peak = 0, edge = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const double a = std::abs(e[i]);
    peak = std::max(peak, a);
    if (i < m || i + m >= n) edge = std::max(edge, a);
  }
  return peak > 0 ? edge / peak : 0.0;
}

}  // namespace

double xuv_carrier_au(const XuvConfig& x) {
  if (const GaussianXuvPulse* b = x.burst()) return units::eV_to_au(b->center_eV);
  return units::eV_to_au(x.tabulated.carrier_eV);
}

double xuv_half_bandwidth_au(const XuvConfig& x) {
  if (const GaussianXuvPulse* b = x.burst()) return kSpectralSupportSigmas * sigma_w(*b);
  const TabulatedSpectrum& t = x.tabulated;
  const double wc = units::eV_to_au(t.carrier_eV);
  double B = 0;
  const std::size_t n = t.photon_energy_eV.size();
  for (std::size_t i = 0; i < n; ++i) {
    // A row contributes (through linear interpolation) when it or a neighbour is non-zero.
    const bool on = t.spectral_intensity[i] > 0 || (i > 0 && t.spectral_intensity[i - 1] > 0) ||
                    (i + 1 < n && t.spectral_intensity[i + 1] > 0);
    if (on) B = std::max(B, std::abs(units::eV_to_au(t.photon_energy_eV[i]) - wc));
  }
  return B;
}

double xuv_half_extent_au(const XuvConfig& x) {
  switch (x.kind) {
    case XuvKind::kGaussian:
      return burst_half_extent(x.gaussian);
    case XuvKind::kTrain: {
      const double T =
          units::period_au(units::wavelength_nm_to_omega_au(x.train.driver_wavelength_nm));
      const double env = kTemporalSupportFwhms * units::fs_to_au(x.train.train_fwhm_fs);
      const double kmax =
          std::min(static_cast<double>(x.train.max_bursts / 2), std::ceil(env / (0.5 * T)));
      return burst_half_extent(x.train.burst) + kmax * 0.5 * T + 0.25 * T;
    }
    case XuvKind::kSatellites: {
      const double T =
          units::period_au(units::wavelength_nm_to_omega_au(x.satellites.driver_wavelength_nm));
      return burst_half_extent(x.satellites.burst) + 0.5 * T;
    }
    case XuvKind::kTabulated: {
      const TabulatedSpectrum& t = x.tabulated;
      double gd = 0, lo = 1e300, hi = -1e300;
      for (std::size_t i = 0; i + 1 < t.photon_energy_eV.size(); ++i) {
        if (t.spectral_intensity[i] <= 0 && t.spectral_intensity[i + 1] <= 0) continue;
        const double dw = units::eV_to_au(t.photon_energy_eV[i + 1] - t.photon_energy_eV[i]);
        gd = std::max(gd, std::abs((t.spectral_phase_rad[i + 1] - t.spectral_phase_rad[i]) / dw));
        lo = std::min(lo, units::eV_to_au(t.photon_energy_eV[i]));
        hi = std::max(hi, units::eV_to_au(t.photon_energy_eV[i + 1]));
      }
      const double span = hi > lo ? hi - lo : units::eV_to_au(1.0);
      return gd + 16.0 * units::kTwoPi / span;
    }
  }
  return 0.0;
}

XuvField build_xuv(const XuvConfig& x, const TimeGrid& grid) {
  switch (x.kind) {
    case XuvKind::kTrain:
      return make_xuv_train(grid, x.train);
    case XuvKind::kSatellites:
      return make_xuv_with_satellites(grid, x.satellites);
    case XuvKind::kTabulated:
      return make_tabulated_xuv(grid, x.tabulated.carrier_eV, x.tabulated.photon_energy_eV,
                                x.tabulated.spectral_intensity, x.tabulated.spectral_phase_rad);
    default:
      return make_gaussian_xuv(grid, x.gaussian);
  }
}

double xuv_max_window_au(const XuvConfig& x) {
  if (x.kind != XuvKind::kTabulated) return std::numeric_limits<double>::infinity();
  const auto& e = x.tabulated.photon_energy_eV;
  double d = e.back() - e.front();
  for (std::size_t i = 1; i < e.size(); ++i) d = std::min(d, e[i] - e[i - 1]);
  return 0.8 * units::kTwoPi / units::eV_to_au(d);
}

BuiltXuv build_xuv_auto(const XuvConfig& x, double h, double edge_tolerance,
                        std::size_t max_points) {
  const double L = 2.5 * xuv_half_extent_au(x);  // 25 % margin on each side
  const double max_window = xuv_max_window_au(x);
  const auto n_cap = static_cast<std::size_t>(
      std::min(static_cast<double>(max_points), std::floor(max_window / h)));
  std::size_t n =
      pow2_at_least(std::max<std::size_t>(64, static_cast<std::size_t>(std::ceil(L / h))));
  while (n > 16 && n > n_cap) n /= 2;
  BuiltXuv best;
  bool have = false;
  for (;;) {
    BuiltXuv cur;
    cur.field = build_xuv(x, TimeGrid::centered(n, h));
    cur.edge_level = edge_level(cur.field);
    cur.edges_ok = cur.edge_level <= edge_tolerance;
    if (!have || cur.edge_level < best.edge_level) {
      best = std::move(cur);
      have = true;
    }
    if (best.edges_ok) return best;
    if (2 * n > n_cap) return best;
    n *= 2;
  }
}

XuvField refine_xuv(const XuvConfig& x, const TimeGrid& grid, double max_step, double min_window) {
  const double L = std::max(grid.window(), std::min(min_window, xuv_max_window_au(x)));
  const double step = std::min(max_step, grid.dt());
  const std::size_t n = pow2_at_least(static_cast<std::size_t>(std::ceil(L / step)));
  return build_xuv(x, TimeGrid::centered(n, L / static_cast<double>(n)));
}

double xuv_spectral_scale_au(const XuvConfig& x) {
  if (const GaussianXuvPulse* b = x.burst())
    return 4.0 * std::log(2.0) / units::as_to_au(b->transform_limited_fwhm_as);
  const auto& e = x.tabulated.photon_energy_eV;
  return units::eV_to_au((e.back() - e.front()) / 16.0);
}

}  // namespace sw::synthetic
