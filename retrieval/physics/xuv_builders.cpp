#include "retrieval/physics/xuv_builders.h"

#include <cmath>
#include <sstream>
#include <string>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"

namespace sw {

namespace {

std::string describe(const char* field, double value, const char* constraint) {
  std::ostringstream os;
  os << field << " = " << value << " is invalid: it must be " << constraint << ".";
  return os.str();
}

// The checks a train and a burst with satellites share: the burst, then the driver wavelength.
std::string validate_burst_and_driver(const GaussianXuvPulse& burst, double driver_wavelength_nm) {
  if (std::string m = burst.validate(); !m.empty()) return "burst." + m;
  if (!(driver_wavelength_nm > 0.0) || !std::isfinite(driver_wavelength_nm))
    return describe("driver_wavelength_nm", driver_wavelength_nm, "a finite wavelength > 0 nm");
  return {};
}

void throw_if_invalid(const std::string& what, const std::string& message) {
  if (!message.empty()) throw usage_error(what + ": " + message);
}

// The Gaussian burst's spectrum (centred order) with its spectral phase but without the group
// delay term; photon energies carrier + omega_centered(j) with carrier = Omega0.
CVec gaussian_spectrum(const TimeGrid& grid, const GaussianXuvPulse& p) {
  const double tl = units::as_to_au(p.transform_limited_fwhm_as);
  // Intensity FWHM tl of the flat-phase pulse <-> amplitude width sigma_w (see header).
  const double sigma_w = 2.0 * std::sqrt(std::log(2.0)) / tl;
  const double gdd = units::as2_to_au(p.gdd_as2);
  const double tod = units::as3_to_au(p.tod_as3);
  const std::size_t n = grid.size();
  CVec s(n);
  for (std::size_t j = 0; j < n; ++j) {
    const double x = grid.omega_centered(j);  // Omega - Omega0
    const double amp = std::exp(-x * x / (2.0 * sigma_w * sigma_w));
    const double phi = 0.5 * gdd * x * x + tod / 6.0 * x * x * x;
    s[j] = std::polar(amp, phi);
  }
  return s;
}

void check_inside_window(const TimeGrid& grid, double t_au, const char* what) {
  const double first = grid.time(0);
  const double last = grid.time(grid.size() - 1);
  if (t_au < first || t_au > last) {
    std::ostringstream os;
    os << what << " at t = " << units::au_to_as(t_au) << " as lies outside the time window ["
       << units::au_to_as(first) << ", " << units::au_to_as(last)
       << "] as; the FFT grid is periodic, so it would wrap around. Use a wider grid.";
    throw usage_error(os.str());
  }
}

// The start a train and a burst with satellites share (Params: XuvTrain or XuvWithSatellites):
// the parameters checked (a usage error "<who>: <problem>"), the driver period T and the main
// burst's centre, which must lie inside the time window (else the usage error of
// check_inside_window, naming it `centre`).
struct BurstTiming {
  double period_au = 0.0, center_au = 0.0;
};
template <typename Params>
BurstTiming periodic_burst_timing(const TimeGrid& grid, const Params& p, const char* who,
                                  const char* centre) {
  throw_if_invalid(who, p.validate());
  const BurstTiming b{driver_period_au(p.driver_wavelength_nm),
                      units::as_to_au(p.burst.center_time_as)};
  check_inside_window(grid, b.center_au, centre);
  return b;
}

}  // namespace

double driver_period_au(double driver_wavelength_nm) {
  return units::period_au(units::wavelength_nm_to_omega_au(driver_wavelength_nm));
}

std::string GaussianXuvPulse::validate() const {
  if (!(center_eV > 0.0) || !std::isfinite(center_eV))
    return describe("center_eV", center_eV, "a finite photon energy > 0 eV");
  if (!(transform_limited_fwhm_as > 0.0) || !std::isfinite(transform_limited_fwhm_as))
    return describe("transform_limited_fwhm_as", transform_limited_fwhm_as,
                    "a finite duration > 0 as");
  if (!std::isfinite(gdd_as2)) return describe("gdd_as2", gdd_as2, "finite");
  if (!std::isfinite(tod_as3)) return describe("tod_as3", tod_as3, "finite");
  if (!std::isfinite(center_time_as)) return describe("center_time_as", center_time_as, "finite");
  return {};
}

std::string XuvTrain::validate() const {
  if (std::string m = validate_burst_and_driver(burst, driver_wavelength_nm); !m.empty()) return m;
  if (!(train_fwhm_fs > 0.0) || !std::isfinite(train_fwhm_fs))
    return describe("train_fwhm_fs", train_fwhm_fs, "a finite duration > 0 fs");
  if (max_bursts < 1) return describe("max_bursts", max_bursts, "at least 1");
  return {};
}

std::string XuvWithSatellites::validate() const {
  if (std::string m = validate_burst_and_driver(burst, driver_wavelength_nm); !m.empty()) return m;
  if (!(satellite_intensity_ratio_before >= 0.0) ||
      !std::isfinite(satellite_intensity_ratio_before))
    return describe("satellite_intensity_ratio_before", satellite_intensity_ratio_before,
                    "a finite ratio >= 0");
  if (!(satellite_intensity_ratio_after >= 0.0) || !std::isfinite(satellite_intensity_ratio_after))
    return describe("satellite_intensity_ratio_after", satellite_intensity_ratio_after,
                    "a finite ratio >= 0");
  return {};
}

XuvField make_gaussian_xuv(const TimeGrid& grid, const GaussianXuvPulse& pulse) {
  throw_if_invalid("make_gaussian_xuv", pulse.validate());
  const double tc = units::as_to_au(pulse.center_time_as);
  check_inside_window(grid, tc, "make_gaussian_xuv: the pulse centre (center_time_as)");
  CVec s = gaussian_spectrum(grid, pulse);
  // Linear phase +t_c (Omega - Omega0): delays the pulse to t = +t_c.
  for (std::size_t j = 0; j < s.size(); ++j) s[j] *= std::polar(1.0, tc * grid.omega_centered(j));
  return XuvField::from_spectrum(grid, units::eV_to_au(pulse.center_eV), s);
}

XuvField make_tabulated_xuv(const TimeGrid& grid, double carrier_eV,
                            const std::vector<double>& photon_energy_eV,
                            const std::vector<double>& spectral_intensity,
                            const std::vector<double>& spectral_phase_rad) {
  const std::size_t m = photon_energy_eV.size();
  if (m < 2)
    throw input_error(
        "make_tabulated_xuv: the spectrum table needs at least 2 photon energies, got " +
        std::to_string(m) + ".");
  if (spectral_intensity.size() != m || spectral_phase_rad.size() != m)
    throw input_error("make_tabulated_xuv: the table columns differ in length (photon energies " +
                      std::to_string(m) + ", intensities " +
                      std::to_string(spectral_intensity.size()) + ", phases " +
                      std::to_string(spectral_phase_rad.size()) + ").");
  for (std::size_t i = 0; i < m; ++i) {
    if (!std::isfinite(photon_energy_eV[i]) || !std::isfinite(spectral_intensity[i]) ||
        !std::isfinite(spectral_phase_rad[i]))
      throw input_error("make_tabulated_xuv: row " + std::to_string(i) +
                        " of the spectrum table holds a non-finite number.");
    if (i > 0 && !(photon_energy_eV[i] > photon_energy_eV[i - 1]))
      throw input_error("make_tabulated_xuv: photon energies must be strictly ascending; row " +
                        std::to_string(i) + " (" + std::to_string(photon_energy_eV[i]) +
                        " eV) does not exceed row " + std::to_string(i - 1) + " (" +
                        std::to_string(photon_energy_eV[i - 1]) + " eV).");
    if (spectral_intensity[i] < 0.0)
      throw input_error("make_tabulated_xuv: spectral intensity must be >= 0; row " +
                        std::to_string(i) + " holds " + std::to_string(spectral_intensity[i]) +
                        ".");
  }
  if (!(carrier_eV > 0.0) || !std::isfinite(carrier_eV))
    throw usage_error("make_tabulated_xuv: " +
                      describe("carrier_eV", carrier_eV, "a finite photon energy > 0 eV"));

  const double carrier = units::eV_to_au(carrier_eV);
  const std::size_t n = grid.size();
  CVec s(n);
  std::size_t seg = 0;  // photon energies ascend with j: the table segment only moves forward
  for (std::size_t j = 0; j < n; ++j) {
    const double e = units::au_to_eV(carrier + grid.omega_centered(j));
    if (e < photon_energy_eV.front() || e > photon_energy_eV.back()) continue;
    while (seg + 2 < m && e > photon_energy_eV[seg + 1]) ++seg;
    const double e0 = photon_energy_eV[seg], e1 = photon_energy_eV[seg + 1];
    const double f = (e - e0) / (e1 - e0);
    const double inten = (1.0 - f) * spectral_intensity[seg] + f * spectral_intensity[seg + 1];
    const double phase = (1.0 - f) * spectral_phase_rad[seg] + f * spectral_phase_rad[seg + 1];
    s[j] = std::polar(std::sqrt(std::max(inten, 0.0)), phase);
  }
  return XuvField::from_spectrum(grid, carrier, s);
}

XuvField make_xuv_train(const TimeGrid& grid, const XuvTrain& train) {
  const auto [T, t_center] = periodic_burst_timing(
      grid, train, "make_xuv_train", "make_xuv_train: the train centre (burst.center_time_as)");
  const double fwhm = units::fs_to_au(train.train_fwhm_fs);
  const double first = grid.time(0) + 0.25 * T;
  const double last = grid.time(grid.size() - 1) - 0.25 * T;
  const double w0 = units::eV_to_au(train.burst.center_eV);

  const CVec burst = gaussian_spectrum(grid, train.burst);
  const std::size_t n = grid.size();
  // Comb factor sum_k (-1)^k sqrt(I_env(k T/2)) exp(i Omega t_k), absolute photon energy Omega.
  CVec comb(n, cdouble(0.0, 0.0));
  const int kmax = train.max_bursts / 2;
  for (int k = -kmax; k <= kmax; ++k) {
    const double tk = t_center + 0.5 * T * k;
    if (tk < first || tk > last) continue;
    const double rel = 0.5 * T * k;
    const double amp = std::sqrt(std::exp(-4.0 * std::log(2.0) * rel * rel / (fwhm * fwhm)));
    const double sign = (k % 2 == 0) ? 1.0 : -1.0;
    for (std::size_t j = 0; j < n; ++j)
      comb[j] += sign * amp * std::polar(1.0, (w0 + grid.omega_centered(j)) * tk);
  }
  // Express the burst about its own centre: the constant exp(-i Omega0 t_center) keeps the k = 0
  // burst identical to make_gaussian_xuv of the same pulse.
  const cdouble ref = std::polar(1.0, -w0 * t_center);
  for (std::size_t j = 0; j < n; ++j) comb[j] *= burst[j] * ref;
  return XuvField::from_spectrum(grid, w0, comb);
}

XuvField make_xuv_with_satellites(const TimeGrid& grid, const XuvWithSatellites& p) {
  const auto [T, tc] =
      periodic_burst_timing(grid, p, "make_xuv_with_satellites",
                            "make_xuv_with_satellites: the main burst (burst.center_time_as)");
  const double w0 = units::eV_to_au(p.burst.center_eV);
  const double a_before = -std::sqrt(p.satellite_intensity_ratio_before);
  const double a_after = -std::sqrt(p.satellite_intensity_ratio_after);
  CVec s = gaussian_spectrum(grid, p.burst);
  for (std::size_t j = 0; j < s.size(); ++j) {
    const double x = grid.omega_centered(j);
    const double omega = w0 + x;  // absolute photon energy: the shift moves the field itself
    // Main burst: linear phase about Omega0 (as in make_gaussian_xuv); satellites: the same
    // field E(t - tc) shifted by -+T/2, i.e. times exp(i Omega (-+T/2)).
    const cdouble main = std::polar(1.0, tc * x);
    const cdouble sat =
        a_before * std::polar(1.0, -omega * 0.5 * T) + a_after * std::polar(1.0, omega * 0.5 * T);
    s[j] *= main * (1.0 + sat);
  }
  return XuvField::from_spectrum(grid, w0, s);
}

}  // namespace sw
