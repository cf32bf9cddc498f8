// Pulse metrics (retrieval/physics/pulse_metrics.h) on analytic profiles and on synthetic fields
// with known truth.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/pulse_metrics.h"
#include "retrieval/physics/xuv_builders.h"
#include "tests/test_support.h"

using namespace sw;
using sw::test::axis;

namespace {

template <class F>
std::vector<double> sample(const std::vector<double>& x, F f) {
  std::vector<double> y(x.size());
  for (std::size_t i = 0; i < x.size(); ++i) y[i] = f(x[i]);
  return y;
}

double gauss(double x, double mu, double sigma) {
  return std::exp(-(x - mu) * (x - mu) / (2.0 * sigma * sigma));
}

// 1024 points with a 0.25 eV energy step: 16.5 fs window, 16 as time step.
TimeGrid standard_grid() { return TimeGrid::for_energy_step(1024, units::eV_to_au(0.25)); }

}  // namespace

TEST_CASE("fwhm of analytic profiles", "[metrics]") {
  const auto x = axis(-10.0, 0.01, 2001);
  // Gaussian: FWHM = 2 sqrt(2 ln 2) sigma = 2.3548 sigma (standard result).
  const double sigma = 1.3;
  const auto g = sample(x, [&](double v) { return gauss(v, 0.4, sigma); });
  CHECK(fwhm(x, g) == Approx(2.3548 * sigma).epsilon(1e-4));
  CHECK(fwhm_of_main_peak(x, g) == Approx(2.3548 * sigma).epsilon(1e-4));
  // sech^2(t/T): FWHM = 2 arccosh(sqrt 2) T = 1.7627 T (standard result, e.g. Diels and Rudolph,
  // Ultrashort Laser Pulse Phenomena).
  const double T = 0.7;
  const auto s = sample(x, [&](double v) {
    const double c = 1.0 / std::cosh((v + 1.0) / T);
    return c * c;
  });
  CHECK(fwhm(x, s) == Approx(1.7627 * T).epsilon(1e-4));
  // The width does not depend on the scale of the profile.
  auto s3 = s;
  for (auto& v : s3) v *= 3.7e5;
  CHECK(fwhm(x, s3) == Approx(fwhm(x, s)).epsilon(1e-12));
  // Coarse sampling (about 5 samples per FWHM): linear interpolation still within 2 %.
  const auto xc = axis(-10.0, 0.6, 34);
  const auto gc = sample(xc, [&](double v) { return gauss(v, 0.1, sigma); });
  CHECK(fwhm(xc, gc) == Approx(2.3548 * sigma).epsilon(0.02));
}

TEST_CASE("fwhm is 0 when the half maximum is not crossed on both sides", "[metrics]") {
  const auto x = axis(0.0, 0.01, 500);
  // Peak at the left edge: no left crossing.
  const auto y = sample(x, [](double v) { return gauss(v, 0.0, 1.0); });
  CHECK(fwhm(x, y) == 0.0);
  CHECK(fwhm_of_main_peak(x, y) == 0.0);
  CHECK(fwhm(x, std::vector<double>(x.size(), 0.0)) == 0.0);
  CHECK(fwhm(std::vector<double>{0.0, 1.0}, std::vector<double>{1.0, 0.0}) == 0.0);
  CHECK_THROWS_AS(fwhm(x, std::vector<double>(3, 1.0)), Error);
}

TEST_CASE("outermost vs main-peak FWHM on a double peak", "[metrics]") {
  // Main Gaussian peak at 0 (height 1) and a second one at 5 (height 0.7), same sigma.
  // Outermost crossings (closed form): left of the main one at -sqrt(2 ln 2) sigma, right of the
  // second one at 5 + sqrt(2 ln(0.7 / 0.5)) sigma.
  const double sigma = 0.5;
  const auto x = axis(-5.0, 0.005, 3001);
  const auto y =
      sample(x, [&](double v) { return gauss(v, 0.0, sigma) + 0.7 * gauss(v, 5.0, sigma); });
  const double outer =
      5.0 + std::sqrt(2.0 * std::log(2.0)) * sigma + std::sqrt(2.0 * std::log(0.7 / 0.5)) * sigma;
  CHECK(fwhm(x, y) == Approx(outer).epsilon(1e-4));
  CHECK(fwhm_of_main_peak(x, y) == Approx(2.3548 * sigma).epsilon(1e-4));
}

TEST_CASE("rms width of a Gaussian is sigma", "[metrics]") {
  // <(x - <x>)^2> = sigma^2 for a Gaussian weight (definition).
  const auto x = axis(-20.0, 0.01, 4001);
  const auto y = sample(x, [](double v) { return gauss(v, 2.0, 1.7); });
  CHECK(rms_width(x, y) == Approx(1.7).epsilon(1e-6));
  // Two equal delta-like spikes at -+a: rms width a.
  std::vector<double> xs{-3.0, -1.0, 0.0, 1.0, 3.0}, ys{0.0, 1.0, 0.0, 1.0, 0.0};
  CHECK(rms_width(xs, ys) == Approx(1.0).epsilon(1e-12));
  CHECK(rms_width(xs, std::vector<double>(5, 0.0)) == 0.0);
}

TEST_CASE("intensity FWHM of a field, also across the periodic window edge", "[metrics]") {
  const TimeGrid grid = standard_grid();
  GaussianXuvPulse p;
  p.transform_limited_fwhm_as = 200.0;
  const XuvField centred = make_gaussian_xuv(grid, p);
  // Builder definition: intensity FWHM of the flat-phase pulse = transform_limited_fwhm_as.
  CHECK(units::au_to_as(intensity_fwhm(centred)) == Approx(200.0).epsilon(5e-3));
  // The same pulse 40 as before the last sample straddles the (periodic) window edge.
  p.center_time_as = units::au_to_as(grid.time(grid.size() - 1)) - 40.0;
  const XuvField edge = make_gaussian_xuv(grid, p);
  CHECK(intensity_fwhm(edge) == Approx(intensity_fwhm(centred)).epsilon(5e-3));
}

TEST_CASE("transform-limited FWHM of a chirped pulse equals the flat-phase FWHM", "[metrics]") {
  const TimeGrid grid = standard_grid();
  // {centre eV, TL FWHM as, GDD as^2, TOD as^3, centre time as}
  const XuvField chirped = make_gaussian_xuv(grid, {95.0, 150.0, 12000.0, 4.0e5, 700.0});
  const double flat_fwhm = intensity_fwhm(make_gaussian_xuv(grid, {95.0, 150.0, 0.0, 0.0, 0.0}));
  // Chirp lengthens the pulse (Diels and Rudolph); its transform limit is the flat-phase pulse.
  CHECK(intensity_fwhm(chirped) > 1.5 * flat_fwhm);
  CHECK(transform_limited_fwhm(chirped) == Approx(flat_fwhm).epsilon(1e-6));
  CHECK(units::au_to_as(transform_limited_fwhm(chirped)) == Approx(150.0).epsilon(5e-3));
  // transform_limited keeps |E~| and centres the pulse at t = 0.
  const XuvField tl = transform_limited(chirped);
  const CVec a = chirped.spectrum(), b = tl.spectrum();
  double maxdiff = 0.0, maxamp = 0.0;
  for (std::size_t j = 0; j < a.size(); ++j) {
    maxdiff = std::max(maxdiff, std::abs(std::abs(a[j]) - std::abs(b[j])));
    maxamp = std::max(maxamp, std::abs(a[j]));
  }
  CHECK(maxdiff < 1e-10 * maxamp);
  CHECK(std::abs(burst_structure(tl, driver_period_au(800.0)).main_peak_time) < grid.dt() * 0.05);
}

TEST_CASE("fit_spectral_phase recovers delay, GDD and TOD", "[metrics]") {
  const TimeGrid grid = standard_grid();
  struct Case {
    double gd_as, gdd_as2, tod_as3;
  };
  // Includes a 3 fs group delay, whose phase wraps many times across the spectrum (tests the
  // unwrapping), and both chirp signs.
  for (Case c : {Case{0.0, 0.0, 0.0}, Case{250.0, 8000.0, 0.0}, Case{-400.0, -6000.0, 3.0e5},
                 Case{3000.0, 15000.0, -6.0e5}}) {
    GaussianXuvPulse p;
    p.center_eV = 90.0;
    p.transform_limited_fwhm_as = 120.0;
    p.center_time_as = c.gd_as;
    p.gdd_as2 = c.gdd_as2;
    p.tod_as3 = c.tod_as3;
    const XuvField f = make_gaussian_xuv(grid, p);
    const SpectralPhaseFit fit = fit_spectral_phase(f, 1e-3, 3);
    INFO("gd " << c.gd_as << " as, gdd " << c.gdd_as2 << " as^2, tod " << c.tod_as3 << " as^3");
    // Truth given to the builder (phase convention of xuv_builders.h).
    CHECK(units::au_to_eV(fit.center_photon_energy) == Approx(90.0).margin(1e-6));
    CHECK(units::au_to_as(fit.group_delay) == Approx(c.gd_as).margin(1e-3));
    CHECK(units::au_to_as2(fit.gdd) == Approx(c.gdd_as2).margin(1e-2));
    CHECK(units::au_to_as3(fit.tod) == Approx(c.tod_as3).margin(1.0));
    CHECK(fit.rms_residual_rad < 1e-8);
    // Spectral intensity FWHM of the Gaussian: 4 ln 2 / tau_TL (time-bandwidth product 0.441).
    CHECK(fit.bandwidth_fwhm == Approx(4.0 * std::log(2.0) / units::as_to_au(120.0)).epsilon(2e-3));
    CHECK(fit.bins_used > 20);
  }
}

TEST_CASE("fit_spectral_phase argument checks", "[metrics]") {
  const XuvField f = make_gaussian_xuv(standard_grid(), GaussianXuvPulse{});
  CHECK_THROWS_AS(fit_spectral_phase(f, 0.0), Error);
  CHECK_THROWS_AS(fit_spectral_phase(f, 1.0), Error);
  CHECK_THROWS_AS(fit_spectral_phase(f, 0.05, 0), Error);
  try {
    fit_spectral_phase(f, 0.05, 9);
    FAIL("order 9 accepted");
  } catch (const Error& e) {
    CHECK(e.kind() == ErrorKind::kUsage);
    CHECK(std::string(e.what()).find("order = 9") != std::string::npos);
  }
  // Order 2 leaves tod at 0.
  CHECK(fit_spectral_phase(f, 0.05, 2).tod == 0.0);
}

TEST_CASE("burst_structure of an isolated pulse", "[metrics]") {
  const TimeGrid grid = standard_grid();
  GaussianXuvPulse p;
  p.center_time_as = -320.0;
  const BurstStructure b = burst_structure(make_gaussian_xuv(grid, p), driver_period_au(800.0));
  CHECK(units::au_to_as(b.main_peak_time) == Approx(-320.0).margin(0.5));
  CHECK(b.satellite_intensity_ratio < 1e-6);
  CHECK(b.main_burst_energy_fraction > 0.999);
  CHECK(b.comparable_bursts == 1);
  CHECK_THROWS_AS(burst_structure(make_gaussian_xuv(grid, p), 0.0), Error);
}

TEST_CASE("burst_structure recovers satellite ratios", "[metrics]") {
  const TimeGrid grid = standard_grid();
  struct Case {
    double before, after;
  };
  for (Case c : {Case{0.05, 0.0}, Case{0.0, 0.12}, Case{0.02, 0.3}, Case{0.6, 0.4}}) {
    XuvWithSatellites s;
    s.burst.transform_limited_fwhm_as = 180.0;
    s.burst.gdd_as2 = 3000.0;
    s.burst.center_time_as = 150.0;
    s.satellite_intensity_ratio_before = c.before;
    s.satellite_intensity_ratio_after = c.after;
    const BurstStructure b =
        burst_structure(make_xuv_with_satellites(grid, s), driver_period_au(800.0));
    INFO("before " << c.before << ", after " << c.after);
    // Truth given to the builder; satellites are copies of the main burst, so the energy ratio
    // equals the peak-intensity ratio.
    CHECK(b.satellite_intensity_ratio == Approx(std::max(c.before, c.after)).epsilon(0.02));
    CHECK(b.main_burst_energy_fraction == Approx(1.0 / (1.0 + c.before + c.after)).epsilon(0.01));
    CHECK(units::au_to_as(b.main_peak_time) == Approx(150.0).margin(2.0));
    CHECK(b.comparable_bursts == 1 + (c.before >= 0.5) + (c.after >= 0.5));
  }
}

TEST_CASE("burst_structure of a train counts comparable bursts", "[metrics]") {
  const TimeGrid grid = standard_grid();
  XuvTrain t;
  t.burst.transform_limited_fwhm_as = 200.0;
  t.train_fwhm_fs = 5.0;
  const double T = driver_period_au(800.0);
  const BurstStructure b = burst_structure(make_xuv_train(grid, t), T);
  // Gaussian train envelope exp(-4 ln 2 t^2 / F^2): bursts at k T/2 keep >= 50 % of the central
  // intensity while |k T/2| <= F/2, i.e. |k| <= F / T (definition of the FWHM).
  const int expected = 1 + 2 * static_cast<int>(std::floor(units::fs_to_au(5.0) / T));
  CHECK(b.comparable_bursts == expected);
  CHECK(b.comparable_bursts >= 3);
  CHECK(std::abs(b.main_peak_time) < 0.5 * grid.dt());
  // Neighbours at -+T/2 with intensity exp(-4 ln 2 (T/2)^2 / F^2) relative to the central burst.
  const double half = 0.5 * T, F = units::fs_to_au(5.0);
  CHECK(b.satellite_intensity_ratio ==
        Approx(std::exp(-4.0 * std::log(2.0) * half * half / (F * F))).epsilon(0.02));
  CHECK(b.main_burst_energy_fraction < 0.5);
}

TEST_CASE("intensity FWHM of a coarsely sampled Gaussian is exact after refinement", "[metrics]") {
  // Closed form: a transform-limited Gaussian pulse of intensity FWHM 150 as (the builder's
  // parameter; exp(-4 ln2 t^2 / FWHM^2)). On a 256-point grid with a 0.25 eV energy step the
  // time step is 64.6 as: 2.3 samples per FWHM. Refined to >= 16 samples per FWHM by
  // zero-padding the spectrum (band-limited interpolation), the width is exact to 0.5 %.
  const TimeGrid coarse = TimeGrid::for_energy_step(256, units::eV_to_au(0.25));
  REQUIRE(units::au_to_as(coarse.dt()) > 60.0);
  for (double shift_as : {0.0, 17.0, 31.0}) {  // peak between samples
    GaussianXuvPulse p;
    p.transform_limited_fwhm_as = 150.0;
    p.center_time_as = shift_as;
    const XuvField f = make_gaussian_xuv(coarse, p);
    CHECK(units::au_to_as(intensity_fwhm(f)) == Approx(150.0).epsilon(0.005));
    CHECK(units::au_to_as(transform_limited_fwhm(f)) == Approx(150.0).epsilon(0.005));
  }
  // Without refinement the same samples give a width off by more than 1 % for some offset:
  // the check above can fail.
  double worst = 0.0;
  for (double shift_as : {0.0, 17.0, 31.0}) {
    GaussianXuvPulse p;
    p.center_time_as = shift_as;
    worst = std::max(
        worst,
        std::abs(units::au_to_as(intensity_fwhm(make_gaussian_xuv(coarse, p), 0)) / 150.0 - 1));
  }
  CHECK(worst > 0.01);
}

TEST_CASE("refine_time_grid keeps the field's samples and spectrum", "[metrics]") {
  // Zero-padding the spectrum is band-limited (Whittaker-Shannon) interpolation: the refined
  // field equals the original at the original sample times (common practice, exact in exact
  // arithmetic for a spectrum inside the band).
  const TimeGrid grid = TimeGrid::for_energy_step(256, units::eV_to_au(0.25));
  GaussianXuvPulse p;
  p.gdd_as2 = 5000.0;
  const XuvField f = make_gaussian_xuv(grid, p);
  const XuvField g = refine_time_grid(f, 4);
  REQUIRE(g.grid().size() == 1024);
  double mx = 0, err = 0;
  for (std::size_t i = 0; i < 256; ++i) {
    mx = std::max(mx, std::abs(f.envelope()[i]));
    err = std::max(err, std::abs(f.envelope()[i] - g.envelope()[4 * i]));
  }
  CHECK(err < 1e-9 * mx);
  CHECK_THROWS_AS(refine_time_grid(f, 0), Error);
}

TEST_CASE("within_band and spectral_energy_outside split a two-line spectrum", "[metrics]") {
  // Two Gaussian spectra of equal energy at 90 and 110 eV (400 as each: 4.56 eV FWHM, rms
  // 1.94 eV, time-bandwidth product 1.825 eV fs); a band [80, 100] eV around the first holds
  // half the energy (closed form: the Gaussian tails beyond 10 eV = 5.2 rms are below 1e-6).
  const TimeGrid grid = standard_grid();
  GaussianXuvPulse a, b;
  a.transform_limited_fwhm_as = b.transform_limited_fwhm_as = 400.0;
  a.center_eV = 100.0 - 10.0;
  b.center_eV = 100.0 + 10.0;
  const XuvField fa = make_gaussian_xuv(grid, a).with_carrier(units::eV_to_au(100.0));
  const XuvField fb = make_gaussian_xuv(grid, b).with_carrier(units::eV_to_au(100.0));
  CVec sum = fa.envelope();
  for (std::size_t i = 0; i < sum.size(); ++i) sum[i] += fb.envelope()[i];
  const XuvField f(grid, units::eV_to_au(100.0), sum);
  const double lo = units::eV_to_au(80.0), hi = units::eV_to_au(100.0);
  CHECK(spectral_energy_outside(f, lo, hi) == Approx(0.5).margin(1e-4));
  const XuvField in = within_band(f, lo, hi);
  CHECK(spectral_energy_outside(in, lo, hi) < 1e-12);
  // The in-band part is the 90 eV pulse alone: its FWHM is 400 as.
  CHECK(units::au_to_as(intensity_fwhm(in)) == Approx(400.0).epsilon(0.01));
}
