// XUV field builders (retrieval/physics/xuv_builders.h): Gaussian pulses with spectral phase,
// tabulated spectra, attosecond pulse trains and satellites. Checks are against textbook pulse
// optics and the published structure of HHG trains, on convention-free quantities (widths, delays,
// comb positions) plus the documented sign conventions.
#include <catch2/catch.hpp>

#include <cmath>
#include <string>
#include <vector>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/pulse_metrics.h"
#include "retrieval/physics/xuv_builders.h"

using namespace sw;

namespace {

// 2048 points with a 0.25 eV energy step: 16.5 fs window, 8 as time step.
TimeGrid fine_grid() { return TimeGrid::for_energy_step(2048, units::eV_to_au(0.25)); }

// Intensity-weighted mean time <t> of the field (a.u.).
double mean_time(const XuvField& f) {
  const auto I = f.intensity();
  double s0 = 0, s1 = 0;
  for (std::size_t i = 0; i < I.size(); ++i) {
    s0 += I[i];
    s1 += I[i] * f.grid().time(i);
  }
  return s1 / s0;
}

// Instantaneous photon energy w(t) = carrier - d arg(envelope)/dt (E ~ exp(-i w t)) between
// samples i and i+1, and the intensity-weighted least-squares slope dw/dt.
double instantaneous_frequency_slope(const XuvField& f) {
  const CVec& e = f.envelope();
  const auto& g = f.grid();
  double s0 = 0, st = 0, sw_ = 0, stt = 0, stw = 0;
  for (std::size_t i = 0; i + 1 < e.size(); ++i) {
    const double wgt = std::abs(e[i] * e[i + 1]);
    if (wgt < 1e-6 * std::norm(e[e.size() / 2])) continue;
    const double t = g.time(i) + 0.5 * g.dt();
    const double w = f.carrier_au() - std::arg(e[i + 1] * std::conj(e[i])) / g.dt();
    s0 += wgt;
    st += wgt * t;
    sw_ += wgt * w;
    stt += wgt * t * t;
    stw += wgt * t * w;
  }
  const double mt = st / s0, mw = sw_ / s0;
  return (stw / s0 - mt * mw) / (stt / s0 - mt * mt);
}

// Mean photon energy of the part of the pulse before (late = false) or after its peak.
double gated_mean_photon_energy(const XuvField& f, bool late) {
  const auto I = f.intensity();
  std::size_t peak = 0;
  for (std::size_t i = 0; i < I.size(); ++i)
    if (I[i] > I[peak]) peak = i;
  CVec e = f.envelope();
  for (std::size_t i = 0; i < e.size(); ++i)
    if ((i > peak) != late) e[i] = 0.0;
  return XuvField(f.grid(), f.carrier_au(), e).mean_photon_energy_au();
}

}  // namespace

TEST_CASE("parameter structs: defaults validate, bad fields are named", "[builders]") {
  CHECK(GaussianXuvPulse{}.validate().empty());
  CHECK(XuvTrain{}.validate().empty());
  CHECK(XuvWithSatellites{}.validate().empty());
  GaussianXuvPulse p;
  p.transform_limited_fwhm_as = -3.0;
  CHECK(p.validate().find("transform_limited_fwhm_as = -3") != std::string::npos);
  try {
    make_gaussian_xuv(fine_grid(), p);
    FAIL("negative duration accepted");
  } catch (const Error& e) {
    CHECK(e.kind() == ErrorKind::kUsage);
    CHECK(std::string(e.what()).find("transform_limited_fwhm_as") != std::string::npos);
  }
  XuvTrain t;
  t.train_fwhm_fs = 0.0;
  CHECK(t.validate().find("train_fwhm_fs") != std::string::npos);
  t = XuvTrain{};
  t.burst.center_eV = 0.0;
  CHECK(t.validate().find("burst.center_eV") != std::string::npos);
  XuvWithSatellites s;
  s.satellite_intensity_ratio_after = -0.1;
  CHECK(s.validate().find("satellite_intensity_ratio_after") != std::string::npos);
  // A pulse outside the (periodic) time window would wrap around: refused with the window.
  GaussianXuvPulse far;
  far.center_time_as = 20000.0;
  CHECK_THROWS_AS(make_gaussian_xuv(fine_grid(), far), Error);
}

TEST_CASE("Gaussian pulse: time-bandwidth product 0.441", "[builders]") {
  // Gaussian pulse, intensity FWHMs: dt * dnu = 2 ln 2 / pi = 0.441 (J.-C. Diels and W. Rudolph,
  // Ultrashort Laser Pulse Phenomena, 2nd ed., Academic Press (2006)).
  const TimeGrid grid = fine_grid();
  for (double tl_as : {100.0, 150.0, 300.0}) {
    GaussianXuvPulse p;
    p.transform_limited_fwhm_as = tl_as;
    const XuvField f = make_gaussian_xuv(grid, p);
    const double dt = intensity_fwhm(f);
    std::vector<double> spec;
    for (const auto& v : f.spectrum()) spec.push_back(std::norm(v));
    const double dw = fwhm(f.photon_energies_au(), spec);
    INFO("TL FWHM " << tl_as << " as");
    CHECK(dt * dw / units::kTwoPi == Approx(2.0 * std::log(2.0) / units::kPi).epsilon(2e-3));
    CHECK(dt * dw / units::kTwoPi == Approx(0.441).margin(1e-3));
    CHECK(units::au_to_as(dt) == Approx(tl_as).epsilon(2e-3));
    // The spectrum is centred on the requested photon energy.
    CHECK(units::au_to_eV(f.mean_photon_energy_au()) == Approx(p.center_eV).margin(1e-6));
  }
}

TEST_CASE("chirped Gaussian broadens as tau0 sqrt(1 + (4 ln2 GDD / tau0^2)^2)", "[builders]") {
  // Linearly chirped Gaussian pulse (Diels and Rudolph, Ultrashort Laser Pulse Phenomena):
  // intensity FWHM tau = tau0 sqrt(1 + (4 ln 2 GDD / tau0^2)^2), for either sign of GDD.
  const TimeGrid grid = fine_grid();
  const double tau0 = 150.0;
  for (double gdd : {-20000.0, -6000.0, 3000.0, 6000.0, 20000.0}) {
    GaussianXuvPulse p;
    p.transform_limited_fwhm_as = tau0;
    p.gdd_as2 = gdd;
    const double x = 4.0 * std::log(2.0) * gdd / (tau0 * tau0);
    INFO("GDD " << gdd << " as^2");
    CHECK(units::au_to_as(intensity_fwhm(make_gaussian_xuv(grid, p))) ==
          Approx(tau0 * std::sqrt(1.0 + x * x)).epsilon(3e-3));
  }
}

TEST_CASE("positive GDD: higher photon energies arrive later", "[builders]") {
  // Sign convention of xuv_builders.h (positive chirp, as in the attochirp of short-trajectory
  // HHG; Y. Mairesse et al., Science 302, 1540 (2003)). Two independent views:
  // (1) instantaneous photon energy w(t) = -d(total phase)/dt with E ~ exp(-i w t); for a
  //     Gaussian of amplitude width sigma_w (spectral amplitude exp(-x^2/(2 sigma_w^2))) and
  //     spectral phase GDD x^2/2 the Fourier transform gives dw/dt = GDD s^4 / (1 + GDD^2 s^4),
  //     s = sigma_w (Diels and Rudolph, chirped Gaussian pulses);
  // (2) the spectrum of the trailing half of the pulse lies above that of the leading half.
  const TimeGrid grid = fine_grid();
  const double tau0 = units::as_to_au(150.0);
  const double s = 2.0 * std::sqrt(std::log(2.0)) / tau0;
  for (double gdd_as2 : {-8000.0, 8000.0}) {
    GaussianXuvPulse p;
    p.transform_limited_fwhm_as = 150.0;
    p.gdd_as2 = gdd_as2;
    p.center_time_as = 400.0;
    const XuvField f = make_gaussian_xuv(grid, p);
    const double gdd = units::as2_to_au(gdd_as2);
    const double s4 = s * s * s * s;
    INFO("GDD " << gdd_as2 << " as^2");
    CHECK(instantaneous_frequency_slope(f) ==
          Approx(gdd * s4 / (1.0 + gdd * gdd * s4)).epsilon(1e-3));
    const double early = gated_mean_photon_energy(f, false);
    const double late = gated_mean_photon_energy(f, true);
    if (gdd_as2 > 0)
      CHECK(late - early > units::eV_to_au(1.0));
    else
      CHECK(early - late > units::eV_to_au(1.0));
  }
}

TEST_CASE("a linear spectral phase delays the pulse by the group delay", "[builders]") {
  // E(t) = (1/2pi) Int E~ exp(-i w t): E~ exp(+i T w) gives E(t - T), a pulse delayed by +T
  // (Fourier shift theorem).
  const TimeGrid grid = fine_grid();
  for (double tc : {-2500.0, -300.0, 0.0, 450.0, 3000.0}) {
    GaussianXuvPulse p;
    p.center_time_as = tc;
    p.gdd_as2 = 2000.0;  // a symmetric chirp keeps the intensity symmetric about the delay
    const XuvField f = make_gaussian_xuv(grid, p);
    INFO("center_time_as " << tc);
    CHECK(units::au_to_as(mean_time(f)) == Approx(tc).margin(0.01));
    CHECK(units::au_to_as(burst_structure(f, driver_period_au(800.0)).main_peak_time) ==
          Approx(tc).margin(0.5));
  }
}

TEST_CASE("pulse train: odd harmonics of the driver, spaced by 2 omega", "[builders]") {
  // A train of bursts every half cycle with alternating sign has a comb of odd harmonics
  // q omega (q odd), spacing 2 omega (P. M. Paul et al., Science 292, 1689 (2001)).
  // 4096 points with a 0.0625 eV step: 66 fs window, fine enough to resolve the comb lines.
  const TimeGrid grid = TimeGrid::for_energy_step(4096, units::eV_to_au(0.0625));
  for (double lambda : {800.0, 1030.0}) {
    XuvTrain t;
    t.driver_wavelength_nm = lambda;
    t.burst.center_eV = 60.0;
    t.burst.transform_limited_fwhm_as = 250.0;
    t.burst.gdd_as2 = 4000.0;  // chirped bursts: the comb stays odd
    t.train_fwhm_fs = 8.0;
    const XuvField f = make_xuv_train(grid, t);
    const double omega_eV = units::kPlanckC_eV_nm / lambda;  // h c / lambda (SI 2019 exact)
    const CVec s = f.spectrum();
    const auto W = f.photon_energies_au();
    std::vector<double> I(s.size());
    double Imax = 0.0;
    for (std::size_t j = 0; j < s.size(); ++j) Imax = std::max(Imax, I[j] = std::norm(s[j]));
    std::vector<double> peaks_eV;
    for (std::size_t j = 1; j + 1 < I.size(); ++j)
      if (I[j] > 0.01 * Imax && I[j] > I[j - 1] && I[j] >= I[j + 1]) {
        // Sub-bin position from a parabola through log I (comb lines are Gaussian).
        const double a = std::log(I[j - 1]), b = std::log(I[j]), c = std::log(I[j + 1]);
        const double off = 0.5 * (a - c) / (a - 2 * b + c);
        peaks_eV.push_back(units::au_to_eV(W[j] + off * grid.dw()));
      }
    INFO("driver " << lambda << " nm, " << peaks_eV.size() << " comb lines");
    REQUIRE(peaks_eV.size() >= 5);
    for (double e : peaks_eV) {
      const double q = e / omega_eV;
      const double q_odd = 2.0 * std::round((q - 1.0) / 2.0) + 1.0;
      INFO("line at " << e << " eV = order " << q);
      CHECK(std::abs(q - q_odd) < 0.01);
    }
    for (std::size_t i = 1; i < peaks_eV.size(); ++i)
      CHECK(peaks_eV[i] - peaks_eV[i - 1] == Approx(2.0 * omega_eV).epsilon(2e-3));
    // Even orders are dark: at q omega, q even, near the spectral maximum.
    const double q_center = 60.0 / omega_eV;
    for (int q = static_cast<int>(q_center) - 4; q <= static_cast<int>(q_center) + 4; ++q) {
      if (q % 2 != 0) continue;
      const double x = units::eV_to_au(q * omega_eV) - f.carrier_au();
      const std::size_t j = static_cast<std::size_t>(std::lround(x / grid.dw())) + grid.size() / 2;
      CHECK(I[j] < 1e-6 * Imax);
    }
  }
}

TEST_CASE("satellites: copies at -+T/2 with the requested intensity and opposite sign",
          "[builders]") {
  const TimeGrid grid = TimeGrid::for_energy_step(2048, units::eV_to_au(0.125));
  const double T = driver_period_au(800.0);
  XuvWithSatellites s;
  s.burst.transform_limited_fwhm_as = 150.0;
  s.burst.gdd_as2 = 2500.0;
  s.satellite_intensity_ratio_before = 0.09;
  s.satellite_intensity_ratio_after = 0.16;
  const XuvField f = make_xuv_with_satellites(grid, s);
  const XuvField main = make_gaussian_xuv(grid, s.burst);
  // Definition of the builder: E(t) = E_m(t) - sqrt(r_b) E_m(t + T/2) - sqrt(r_a) E_m(t - T/2),
  // with E_m the main burst. A copy of E_m delayed by d is the Gaussian builder's pulse at
  // center_time d times exp(i Omega0 d) (its linear phase is about Omega0, the shift theorem
  // needs the absolute photon energy).
  auto shifted = [&](double d_au) {
    GaussianXuvPulse q = s.burst;
    q.center_time_as = units::au_to_as(d_au);
    XuvField g = make_gaussian_xuv(grid, q);
    for (auto& v : g.envelope()) v *= std::polar(1.0, units::eV_to_au(q.center_eV) * d_au);
    return g;
  };
  const XuvField before = shifted(-0.5 * T), after = shifted(0.5 * T);
  double d = 0.0, peak = 0.0;
  for (std::size_t i = 0; i < grid.size(); ++i) {
    const cdouble expect =
        main.envelope()[i] - 0.3 * before.envelope()[i] - 0.4 * after.envelope()[i];
    d = std::max(d, std::abs(f.envelope()[i] - expect));
    peak = std::max(peak, std::abs(expect));
  }
  CHECK(d < 1e-10 * peak);

  // Convention-free consequence of the opposite sign: with equal satellites (field ratio a) the
  // spectrum is the burst's times |1 - 2 a cos(Omega T/2)|^2, bright at odd harmonics of the
  // driver ((1 + 2a)^2) and dark at even ones ((1 - 2a)^2); same-sign satellites would swap them
  // (three-burst limit of the odd-harmonic comb, Paul et al., Science 292, 1689 (2001)).
  s.satellite_intensity_ratio_before = s.satellite_intensity_ratio_after = 0.25;  // a = 0.5
  const CVec with = make_xuv_with_satellites(grid, s).spectrum(), bare = main.spectrum();
  const double omega = units::wavelength_nm_to_omega_au(800.0);
  const double w0 = main.carrier_au();
  for (int q = 57; q <= 65; ++q) {
    const std::size_t j =
        static_cast<std::size_t>(std::lround((q * omega - w0) / grid.dw())) + grid.size() / 2;
    const double m = std::norm(with[j]) / std::norm(bare[j]);
    INFO("harmonic " << q << ": spectral modulation " << m);
    if (q % 2 != 0)
      CHECK(m > 3.5);  // (1 + 2a)^2 = 4, less the bin's offset from q omega
    else
      CHECK(m < 0.05);  // (1 - 2a)^2 = 0
  }

  // Zero-ratio satellites: the builder reduces to the Gaussian one.
  s.satellite_intensity_ratio_before = s.satellite_intensity_ratio_after = 0.0;
  const XuvField none = make_xuv_with_satellites(grid, s);
  d = 0.0;
  for (std::size_t i = 0; i < grid.size(); ++i)
    d = std::max(d, std::abs(none.envelope()[i] - main.envelope()[i]));
  CHECK(d < 1e-12 * peak);
}

TEST_CASE("tabulated spectrum reproduces the analytic Gaussian pulse", "[builders]") {
  // Table of a Gaussian spectral intensity exp(-x^2 / sigma_w^2) with phase GDD x^2 / 2
  // (same physics as make_gaussian_xuv), sampled every 0.1 eV; linear interpolation onto the
  // 0.25 eV grid must give the same pulse: duration and fitted GDD within 0.5 %.
  const TimeGrid grid = fine_grid();
  const double tl = units::as_to_au(150.0);
  const double sigma_w = 2.0 * std::sqrt(std::log(2.0)) / tl;
  const double gdd = units::as2_to_au(9000.0);
  std::vector<double> e, in, ph;
  for (double ev = 50.0; ev <= 140.0; ev += 0.1) {
    const double x = units::eV_to_au(ev - 95.0);
    e.push_back(ev);
    in.push_back(std::exp(-x * x / (sigma_w * sigma_w)));
    ph.push_back(0.5 * gdd * x * x);
  }
  const XuvField tab = make_tabulated_xuv(grid, 95.0, e, in, ph);
  GaussianXuvPulse p;
  p.gdd_as2 = 9000.0;
  const XuvField ref = make_gaussian_xuv(grid, p);
  CHECK(intensity_fwhm(tab) == Approx(intensity_fwhm(ref)).epsilon(5e-3));
  CHECK(units::au_to_as2(fit_spectral_phase(tab).gdd) == Approx(9000.0).epsilon(5e-3));
  // Amplitude = sqrt(intensity): at a grid bin that coincides with a table row, |E~|^2 equals
  // the tabulated intensity (95 eV is both a table row and the grid's carrier bin).
  const CVec spec = tab.spectrum();
  CHECK(std::norm(spec[grid.size() / 2]) == Approx(1.0).epsilon(1e-9));
  // Zero outside the table.
  const auto W = tab.photon_energies_au();
  for (std::size_t j = 0; j < W.size(); ++j)
    if (units::au_to_eV(W[j]) < 49.9 || units::au_to_eV(W[j]) > 140.1)
      CHECK(std::abs(spec[j]) < 1e-9);
}

TEST_CASE("tabulated spectrum: malformed tables are input errors", "[builders]") {
  const TimeGrid grid = fine_grid();
  auto message = [&](std::vector<double> e, std::vector<double> i, std::vector<double> p) {
    try {
      make_tabulated_xuv(grid, 95.0, e, i, p);
    } catch (const Error& err) {
      CHECK(err.kind() == ErrorKind::kInput);
      return std::string(err.what());
    }
    return std::string("no error");
  };
  CHECK(message({90, 95, 94}, {1, 1, 1}, {0, 0, 0}).find("ascending") != std::string::npos);
  CHECK(message({90, 95, 100}, {1, 1}, {0, 0, 0}).find("differ in length") != std::string::npos);
  CHECK(message({90, 95, 100}, {1, -1, 1}, {0, 0, 0}).find(">= 0") != std::string::npos);
  CHECK(message({90}, {1}, {0}).find("at least 2") != std::string::npos);
}
