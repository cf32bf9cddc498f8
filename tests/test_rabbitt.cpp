// RABBITT analysis and the average burst of the train, on synthetic scans with known truth:
// an odd-harmonic train (retrieval/physics/xuv_builders.h) with a chirped burst, dressed by a weak
// IR pulse, through the SFA forward model with the full momentum dependence, plus Poisson noise.
#include <catch2/catch.hpp>

#include <cmath>
#include <random>

#include "retrieval/analysis/rabbitt.h"
#include "retrieval/analysis/train_burst.h"
#include "retrieval/core/error.h"
#include "retrieval/core/phase_unwrap.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/forward_model.h"
#include "retrieval/physics/gas.h"
#include "retrieval/physics/pulse_metrics.h"
#include "retrieval/physics/xuv_builders.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "tests/check_support.h"
#include "tests/trace_support.h"

using namespace sw;

namespace {

// hbar in eV as (CODATA 2018: 6.582 119 569e-16 eV s): attochirp (as/eV) = GDD (as^2) / hbar.
constexpr double kHbar_eV_as = 658.2119569;

struct Scenario {
  double gdd_as2 = 9900.0;
  double center_eV = 34.1;  // burst centre photon energy
  double tl_fwhm_as = 130.0;
  double center_time_as = 0.0;
  double ir_intensity = 1e10;  // W/cm^2: perturbative regime (one-photon sidebands)
  double energy_first_eV = 0.5;
  int energies = 901;  // 0.05 eV bins
  double delay_first_fs = -4.0;
  int delays = 81;  // 0.1 fs steps
};

// Noise-free energy density on the scenario's axes (argon, 800 nm, constant dipole).
Trace clean_trace(const Scenario& s) {
  const Gas& ar = find_gas("Ar");
  const double ip = units::eV_to_au(ar.ionization_energy_eV);
  const TimeGrid grid = TimeGrid::for_energy_step(2048, units::eV_to_au(0.05));
  XuvTrain tr;
  tr.burst.center_eV = s.center_eV;
  tr.burst.transform_limited_fwhm_as = s.tl_fwhm_as;
  tr.burst.gdd_as2 = s.gdd_as2;
  tr.burst.center_time_as = s.center_time_as;
  tr.train_fwhm_fs = 8.0;
  const XuvField x = make_xuv_train(grid, tr);
  const GaussianIrPulse P{800.0, 30.0, s.ir_intensity, 0.0, 0.0, 0.0};
  const IrField ir = make_gaussian_ir(P, units::fs_to_au(-70), units::fs_to_au(70), 1.0);
  Trace t;
  for (int j = 0; j < s.energies; ++j)
    t.energy_au.push_back(units::eV_to_au(s.energy_first_eV + 0.05 * j));
  for (int i = 0; i < s.delays; ++i)
    t.delay_au.push_back(units::fs_to_au(s.delay_first_fs + 0.1 * i));
  t.counts = test::full_momentum_density(ip, x, ir, t.delay_au, t.energy_au);
  t.meta.gas = "Ar";
  t.meta.ir_wavelength_nm = 800.0;
  t.meta.kind = TraceKind::kRabbitt;
  return t;
}

// Poisson counts with the given expected peak counts per bin.
Trace noisy(const Trace& clean, double peak_counts, unsigned long long seed) {
  Trace t = clean;
  std::mt19937_64 rng(seed);
  t.counts = test::poisson_counts(clean.counts, peak_counts / clean.counts.maxCoeff(), rng);
  return t;
}

RabbittOptions no_atomic() {
  RabbittOptions o;
  o.atomic.mode = AtomicDelayMode::kNone;  // the SFA has no atomic delays
  return o;
}

// Truth: group delay of photon energy Omega for the builder's spectral phase
// t_c + GDD (Omega - Omega0) (retrieval/physics/xuv_builders.h), in as.
double true_group_delay_as(const Scenario& s, double photon_eV) {
  return s.center_time_as + s.gdd_as2 * (photon_eV - s.center_eV) / kHbar_eV_as;
}

// Slope of the straight line fitted to (x, y) by least squares with weights 1 / sigma^2 (the
// normal equations of a weighted linear fit; e.g. Bevington and Robinson, Data Reduction and
// Error Analysis for the Physical Sciences, 3rd ed. (2003), ch. 6).
double weighted_slope(const std::vector<double>& x, const std::vector<double>& y,
                      const std::vector<double>& sigma) {
  double S = 0, Sx = 0, Sy = 0, Sxx = 0, Sxy = 0;
  for (std::size_t k = 0; k < x.size(); ++k) {
    const double wt = 1.0 / (sigma[k] * sigma[k]);
    S += wt;
    Sx += wt * x[k];
    Sy += wt * y[k];
    Sxx += wt * x[k] * x[k];
    Sxy += wt * x[k] * y[k];
  }
  return (S * Sxy - Sx * Sy) / (S * Sxx - Sx * Sx);
}

bool has_warning(const RabbittAnalysis& r, const std::string& what) {
  for (const auto& w : r.warnings)
    if (w.find(what) != std::string::npos) return true;
  return false;
}

}  // namespace

TEST_CASE("fit_cosine recovers amplitude and phase; sigmas match the Poisson scatter",
          "[rabbitt]") {
  // Non-uniform delays; model A + B cos(Omega tau + phi) (the header's definition).
  std::vector<double> tau;
  std::mt19937_64 rng(3);
  std::uniform_real_distribution<double> jitter(-0.3, 0.3);
  for (int i = 0; i < 60; ++i) tau.push_back(5.0 * i + jitter(rng));
  const double Om = 0.114, A = 80, B = 50, phi = 0.7;
  std::vector<double> S(tau.size());
  for (std::size_t i = 0; i < tau.size(); ++i) S[i] = A + B * std::cos(Om * tau[i] + phi);
  const CosineFit exact = fit_cosine(tau, S, Om);
  CHECK(exact.mean == Approx(A).margin(1e-9));
  CHECK(exact.amplitude == Approx(B).margin(1e-9));
  CHECK(exact.phase_rad == Approx(phi).margin(1e-12));
  CHECK(exact.modulation_depth == Approx(B / A).margin(1e-12));

  // Monte Carlo: the scatter of phi over Poisson draws vs the reported sigma (common practice:
  // a correct covariance gives a ratio near 1; 400 draws resolve it to ~4 %).
  double sum = 0, sum2 = 0, sig = 0;
  const int draws = 400;
  for (int k = 0; k < draws; ++k) {
    std::vector<double> Sn(S.size());
    for (std::size_t i = 0; i < S.size(); ++i) {
      std::poisson_distribution<int> pd(S[i]);
      Sn[i] = pd(rng);
    }
    const CosineFit f = fit_cosine(tau, Sn, Om);
    sum += f.phase_rad;
    sum2 += f.phase_rad * f.phase_rad;
    sig += f.phase_rad_sigma;
  }
  const double scatter = std::sqrt(sum2 / draws - (sum / draws) * (sum / draws));
  CHECK(scatter / (sig / draws) == Approx(1.0).margin(0.15));
  CHECK(sum / draws == Approx(phi).margin(3 * scatter / std::sqrt(draws) + 1e-3));
  CHECK_THROWS_AS(fit_cosine({1, 2, 3}, {1, 2, 3}, Om), Error);
}

TEST_CASE("unwrap_phase picks the branch nearest to the previous phase", "[rabbitt]") {
  const std::vector<double> u = unwrap_phase({3.0, -3.0, -2.5, 3.1});
  CHECK(u[1] == Approx(-3.0 + units::kTwoPi));
  CHECK(u[2] == Approx(-2.5 + units::kTwoPi));
  CHECK(u[3] == Approx(3.1));
}

TEST_CASE("attochirp and group delays equal the burst GDD / hbar, both signs", "[rabbitt]") {
  // Truth: attochirp (as/eV) = GDD (as^2) / hbar (CODATA 2018), the group delay of the
  // builder's quadratic spectral phase; the SFA sideband phase carries no atomic delay.
  for (double gdd : {9900.0, -6000.0}) {
    Scenario s;
    s.gdd_as2 = gdd;
    const Trace clean = clean_trace(s);
    const RabbittAnalysis r = analyze_rabbitt(noisy(clean, 300.0, 11), no_atomic());
    const double truth = gdd / kHbar_eV_as;
    REQUIRE(r.section.attochirp_as_per_eV);
    const double a = *r.section.attochirp_as_per_eV, sa = *r.section.attochirp_as_per_eV_sigma;
    INFO("GDD " << gdd << " as^2: attochirp " << a << " +- " << sa << " as/eV, truth " << truth);
    CHECK(std::abs(a - truth) < 1.0);  // the brief's accuracy at moderate counts
    CHECK(std::abs(a - truth) < 3.0 * sa);
    CHECK(sa < 1.0);
    CHECK(r.sidebands.size() >= 8);
    // Absolute emission times: the cosine IR pulse (cep 0, ir_field.h) adds no phase offset,
    // so each sideband's t_e is the group delay at q hbar omega (3 sigma + 5 as for the
    // strong-field corrections of the model, ~1 as at 1e10 W/cm^2).
    for (const auto& sb : r.sidebands) {
      INFO("SB " << sb.order);
      CHECK(std::abs(sb.group_delay_as - true_group_delay_as(s, sb.photon_energy_eV)) <
            3.0 * sb.group_delay_as_sigma + 5.0);
      CHECK(sb.fit.modulation_depth > 0.3);
    }
    CHECK(r.alignment.within_resolution);
    CHECK_FALSE(has_warning(r, "delay axis"));
  }
}

TEST_CASE("attochirp within 3 sigma over seeds; phase sigmas match the seed scatter", "[rabbitt]") {
  Scenario s;
  const Trace clean = clean_trace(s);
  const double truth = s.gdd_as2 / kHbar_eV_as;
  const int seeds = 12;
  int within = 0;
  double pull2 = 0;
  // Three central sidebands: scatter of the phase over seeds vs the mean reported sigma.
  const int orders[3] = {20, 22, 24};
  double ps[3] = {0, 0, 0}, ps2[3] = {0, 0, 0}, sig[3] = {0, 0, 0};
  for (int k = 0; k < seeds; ++k) {
    const RabbittAnalysis r = analyze_rabbitt(noisy(clean, 300.0, 100 + k), no_atomic());
    const double a = *r.section.attochirp_as_per_eV, sa = *r.section.attochirp_as_per_eV_sigma;
    const double pull = (a - truth) / sa;
    pull2 += pull * pull;
    if (std::abs(pull) < 3.0) ++within;
    for (int m = 0; m < 3; ++m)
      for (const auto& sb : r.sidebands)
        if (sb.order == orders[m]) {
          ps[m] += sb.phase_unwrapped_rad;
          ps2[m] += sb.phase_unwrapped_rad * sb.phase_unwrapped_rad;
          sig[m] += sb.fit.phase_rad_sigma;
        }
  }
  // 3 sigma covers 99.7 %: allow one outlier in 12.
  CHECK(within >= seeds - 1);
  const double rms_pull = std::sqrt(pull2 / seeds);
  INFO("rms pull of the attochirp " << rms_pull);
  CHECK(rms_pull > 0.4);
  CHECK(rms_pull < 2.0);
  for (int m = 0; m < 3; ++m) {
    const double mean = ps[m] / seeds;
    const double scatter =
        std::sqrt(std::max(ps2[m] / seeds - mean * mean, 0.0) * seeds / (seeds - 1.0));
    const double ratio = scatter / (sig[m] / seeds);
    INFO("SB " << orders[m] << ": scatter " << scatter << " rad, mean sigma " << sig[m] / seeds
               << " rad");
    // The brief's consistency range (12 seeds resolve the scatter to ~20 %).
    CHECK(ratio > 0.5);
    CHECK(ratio < 2.0);
  }
}

TEST_CASE("a 3 % stretched delay axis is detected and corrected", "[rabbitt]") {
  Scenario s;
  const Trace clean = clean_trace(s);
  Trace t = noisy(clean, 300.0, 5);
  const RabbittAnalysis nominal = analyze_rabbitt(t, no_atomic());
  REQUIRE(nominal.delay_check.performed);
  CHECK(std::abs(nominal.delay_check.calibration_factor - 1.0) < 0.003);
  CHECK_FALSE(has_warning(nominal, "delay axis"));

  for (double& d : t.delay_au) d *= 1.03;  // stage calibration 3 % too large
  const RabbittAnalysis stretched = analyze_rabbitt(t, no_atomic());
  // kappa = the factor the axis must be multiplied by: 1/1.03.
  CHECK(stretched.delay_check.calibration_factor == Approx(1.0 / 1.03).margin(0.003));
  CHECK(std::abs(stretched.delay_check.calibration_factor - 1.0 / 1.03) <
        4.0 * stretched.delay_check.calibration_factor_sigma + 1e-3);
  CHECK(has_warning(stretched, "delay axis"));

  RabbittOptions o = no_atomic();
  o.apply_delay_calibration = true;
  const RabbittAnalysis fixed = analyze_rabbitt(t, o);
  CHECK(fixed.delay_check.applied);
  CHECK(std::abs(*fixed.section.attochirp_as_per_eV - s.gdd_as2 / kHbar_eV_as) < 1.0);
}

TEST_CASE("energy-axis offset is measured and windows follow it", "[rabbitt]") {
  Scenario s;
  Trace t = noisy(clean_trace(s), 300.0, 8);
  const RabbittAnalysis good = analyze_rabbitt(t, no_atomic());
  CHECK(std::abs(good.alignment.offset_eV) < 0.05);  // bin width 0.05 eV
  CHECK(std::abs(good.alignment.scale - 1.0) < 0.002);
  CHECK_FALSE(has_warning(good, "offset"));
  // Mislabel the axis by +0.4 eV (a wrong spectrometer offset).
  for (double& e : t.energy_au) e += units::eV_to_au(0.4);
  const RabbittAnalysis off = analyze_rabbitt(t, no_atomic());
  CHECK(off.alignment.offset_eV == Approx(0.4).margin(0.05));
  CHECK(has_warning(off, "offset"));
  CHECK(std::abs(*off.section.attochirp_as_per_eV - s.gdd_as2 / kHbar_eV_as) < 1.0);
}

TEST_CASE("rainbow RABBITT: the phase slope across a sideband is 2 omega GDD", "[rabbitt]") {
  // Within sideband q the two paths come from photon energies Omega -+ omega of the same
  // burst, so phi_SB(W) = phi(Omega + omega) - phi(Omega - omega) = 2 omega phi'(Omega) and
  // d phi_SB / dW = 2 omega GDD (V. Gruson et al., Science 354, 734 (2016), rainbow RABBITT).
  // Near-noise-free counts; 25 % tolerance for the IR bandwidth's mixing of neighbouring bins.
  for (double gdd : {9900.0, -6000.0}) {
    Scenario s;
    s.gdd_as2 = gdd;
    const RabbittAnalysis r = analyze_rabbitt(noisy(clean_trace(s), 1e7, 2), no_atomic());
    const double w = units::wavelength_nm_to_omega_au(800.0);
    const double expect = 2.0 * w * units::as2_to_au(gdd) / units::au_to_eV(1.0);  // rad/eV
    bool seen = false;
    for (const auto& sb : r.sidebands) {
      if (sb.order != 22) continue;
      seen = true;
      REQUIRE(sb.rainbow_phase_rad.size() == static_cast<std::size_t>(sb.window_bins));
      const double slope =
          weighted_slope(sb.rainbow_energy_eV, sb.rainbow_phase_rad, sb.rainbow_phase_rad_sigma);
      INFO("GDD " << gdd << ": slope " << slope << " rad/eV, expected " << expect);
      CHECK(slope == Approx(expect).epsilon(0.25));
    }
    CHECK(seen);
  }
}

TEST_CASE("atomic delays are subtracted per sideband when asked", "[rabbitt]") {
  Scenario s;
  const Trace t = noisy(clean_trace(s), 300.0, 21);
  const RabbittAnalysis none = analyze_rabbitt(t, no_atomic());
  RabbittOptions o;  // default: auto
  const RabbittAnalysis corr = analyze_rabbitt(t, o);
  REQUIRE(none.sidebands.size() == corr.sidebands.size());
  for (std::size_t k = 0; k < corr.sidebands.size(); ++k) {
    const auto& c = corr.section.sidebands[k];
    REQUIRE(c.atomic_delay_as);
    CHECK_FALSE(none.section.sidebands[k].atomic_delay_as);
    CHECK(c.group_delay_as ==
          Approx(none.section.sidebands[k].group_delay_as - *c.atomic_delay_as).margin(1e-9));
    CHECK(*c.atomic_delay_as == Approx(corr.sidebands[k].atomic.total_as));
  }
}

TEST_CASE("missing metadata and bad options give errors naming the field", "[rabbitt]") {
  CHECK(RabbittOptions().validate().empty());
  RabbittOptions o;
  o.window_half_width_fraction = 0.8;
  CHECK_THAT(o.validate(), Catch::Contains("window_half_width_fraction"));
  o = RabbittOptions();
  o.atomic.channel_l = 12;
  CHECK_THAT(o.validate(), Catch::Contains("atomic.channel_l"));

  Scenario s;
  s.energies = 300;
  s.energy_first_eV = 5.0;
  s.delays = 20;
  Trace t = noisy(clean_trace(s), 100.0, 1);
  t.meta.gas.clear();
  CHECK_THAT(
      test::error_message([&] { (void)analyze_rabbitt(t, RabbittOptions()); }, ErrorKind::kInput),
      Catch::Contains("gas"));
  t.meta.gas = "Ar";
  t.meta.ir_wavelength_nm = 0.0;
  CHECK_THROWS_WITH(analyze_rabbitt(t, RabbittOptions()), Catch::Contains("ir_wavelength_nm"));
}

TEST_CASE("average burst of the train: FWHM of the chirped and transform-limited bursts",
          "[rabbitt][train_burst]") {
  // Truth: the same harmonics with the builder's amplitudes exp(-(Omega-Omega0)^2/(2 s^2)) and
  // phases GDD/2 (Omega-Omega0)^2 (retrieval/physics/xuv_builders.h), summed as E(t) = sum_q
  // a_q e^{i phi_q} e^{-i q omega t}; the forward model's counts carry p |d|^2 (constant dipole:
  // p), which the kSfaDipole cross-section with a constant dipole divides out.
  Scenario s;
  const Trace t = noisy(clean_trace(s), 3000.0, 4);
  const RabbittAnalysis r = analyze_rabbitt(t, no_atomic());
  TrainBurstOptions bo;
  bo.cross_section = CrossSectionModel::kSfaDipole;
  bo.dipole = DipoleKind::kConstant;
  const TrainBurst b = reconstruct_train_burst(t, r, bo);
  REQUIRE(b.harmonic_orders.size() >= 8);

  const double w = units::wavelength_nm_to_omega_au(800.0);
  const double sw = 2.0 * std::sqrt(std::log(2.0)) / units::as_to_au(s.tl_fwhm_as);
  const double O0 = units::eV_to_au(s.center_eV), gdd = units::as2_to_au(s.gdd_as2);
  const double T = units::period_au(w);
  auto truth_fwhm = [&](bool chirped) {
    std::vector<double> x, y;
    for (int i = 0; i < 8192; ++i) {
      const double tt = -T / 4 + 0.5 * T * i / 8192.0;
      std::complex<double> e = 0;
      for (int q : b.harmonic_orders) {
        const double d = q * w - O0;
        e += std::polar(std::exp(-d * d / (2 * sw * sw)),
                        (chirped ? 0.5 * gdd * d * d : 0.0) - q * w * tt);
      }
      x.push_back(tt);
      y.push_back(std::norm(e));
    }
    return units::au_to_as(fwhm_of_main_peak(x, y));
  };
  const double tf = truth_fwhm(true), ttl = truth_fwhm(false);
  INFO("burst " << b.fwhm_as << " +- " << b.fwhm_as_sigma << " as (truth " << tf << "), TL "
                << b.transform_limited_fwhm_as << " as (truth " << ttl << ")");
  CHECK(b.fwhm_as == Approx(tf).epsilon(0.05));
  CHECK(b.transform_limited_fwhm_as == Approx(ttl).epsilon(0.03));
  CHECK(b.fwhm_as > 1.3 * b.transform_limited_fwhm_as);
  CHECK(b.fwhm_as_sigma > 0.0);
  CHECK(b.fwhm_as_sigma < 0.1 * b.fwhm_as);
  CHECK(std::abs(b.fwhm_as - tf) < 4.0 * b.fwhm_as_sigma + 0.03 * tf);
  // The burst peaks at the group delay of the strongest photon energies (t_c = 0 here) and
  // the samples span one IR period.
  CHECK(std::abs(b.peak_time_as) < 30.0);
  CHECK(b.time_as.back() - b.time_as.front() == Approx(units::au_to_as(T)).epsilon(1e-3));
  CHECK_THAT(b.assumptions, Catch::Contains("identical"));

  RabbittSection sec;
  fill_rabbitt_section(b, &sec);
  REQUIRE(sec.train_burst_fwhm_as);
  CHECK(*sec.train_burst_fwhm_as == b.fwhm_as);
  CHECK(*sec.transform_limited_burst_fwhm_as == b.transform_limited_fwhm_as);

  // The flat model keeps the p weighting: a measurably different (but sane) TL width.
  const TrainBurst flat = reconstruct_train_burst(t, r, TrainBurstOptions());
  CHECK(flat.transform_limited_fwhm_as > 0.8 * ttl);
  CHECK(flat.transform_limited_fwhm_as < 1.2 * ttl);
  CHECK(TrainBurstOptions().validate().empty());
  TrainBurstOptions bad;
  bad.periods = 3;
  CHECK_THAT(bad.validate(), Catch::Contains("periods"));
}

TEST_CASE("argon-rabbitt preset of the direct-quadrature generator", "[rabbitt][synthetic]") {
  // Independent data path: synthetic/ evaluates the SFA by direct quadrature (no FFT model).
  // Truth from the generator's truth record: attochirp = GDD / hbar. The preset's IR
  // (1e11 W/cm^2) adds strong-field corrections of ~0.1 as/eV, inside the brief's 1 as/eV.
  const synthetic::SyntheticScan sc =
      synthetic::generate_scan(synthetic::find_preset("argon-rabbitt").config, 1);
  REQUIRE(sc.truth.rabbitt);
  REQUIRE(sc.truth.rabbitt->attochirp_as_per_eV);
  const double truth = *sc.truth.rabbitt->attochirp_as_per_eV;
  CHECK(truth == Approx(9900.0 / kHbar_eV_as));  // the preset's GDD
  const RabbittAnalysis r = analyze_rabbitt(sc.trace, no_atomic());
  REQUIRE(r.section.attochirp_as_per_eV);
  INFO("attochirp " << *r.section.attochirp_as_per_eV << " +- "
                    << *r.section.attochirp_as_per_eV_sigma << ", truth " << truth);
  CHECK(std::abs(*r.section.attochirp_as_per_eV - truth) < 1.0);
  CHECK(r.sidebands.size() >= 8);
  CHECK(r.alignment.within_resolution);
  CHECK(std::abs(r.delay_check.calibration_factor - 1.0) < 0.005);
  // With the atomic-delay model the attochirp changes by minus the weighted least-squares
  // slope of the subtracted tau_A (the fit is linear in the delays, weights unchanged).
  const RabbittAnalysis a = analyze_rabbitt(sc.trace, RabbittOptions());
  REQUIRE(a.sidebands.size() == r.sidebands.size());
  std::vector<double> x, y, sigma;
  for (const auto& sb : a.sidebands) {
    x.push_back(sb.photon_energy_eV);
    y.push_back(sb.atomic.total_as);
    sigma.push_back(sb.group_delay_as_sigma);
  }
  const double slope_atomic = weighted_slope(x, y, sigma);
  CHECK(*a.section.attochirp_as_per_eV - *r.section.attochirp_as_per_eV ==
        Approx(-slope_atomic).margin(1e-6));
}

TEST_CASE("a streaking scan of an isolated pulse is refused as not a RABBITT scan",
          "[rabbitt][synthetic]") {
  const synthetic::SyntheticScan sc =
      synthetic::generate_scan(synthetic::find_preset("neon-150as").config, 2);
  CHECK_THAT(test::error_message([&] { (void)analyze_rabbitt(sc.trace, RabbittOptions()); },
                                 ErrorKind::kInput),
             Catch::Contains("not a RABBITT scan"));
  RabbittOptions o;
  o.require_comb = false;
  const RabbittAnalysis r = analyze_rabbitt(sc.trace, o);
  CHECK(has_warning(r, "no harmonic comb"));
}
