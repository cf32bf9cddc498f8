// Relative photoemission delays of two photoelectron lines (retrieval/analysis/line_delays.h).
#include <catch2/catch.hpp>

#include <cstdio>

#include <cmath>
#include <random>

#include "retrieval/analysis/line_delays.h"
#include "retrieval/analysis/quality.h"
#include "retrieval/analysis/retrieve.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/atomic_delay.h"
#include "retrieval/physics/gas.h"
#include "retrieval/preprocess/preprocess.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "tests/check_support.h"
#include "tests/test_support.h"
#include "tests/validation/line_delay_bound.h"
#include "tests/validation/two_line_targets.h"

using namespace sw;

namespace {

LineEntry line(const std::string& name, double W_eV, bool reference) {
  LineEntry l;
  l.name = name;
  l.gas = "Ne";
  l.kinetic_energy_eV = W_eV;
  l.reference = reference;
  l.relative_strength = reference ? 1.0 : 0.5;
  l.relative_strength_sigma = 0.01;
  return l;
}

// A scan built by hand from the classical streaking picture alone (no generator, no SFA): each
// line is a Gaussian of rms width `rms_eV` centred at W_k - p_k A(tau + delta_k) + A^2 / 2,
// A(t) = A0 exp(-t^2 / T^2) cos(omega t) (DESIGN.md: p_f = p_i - A(t_i); an electron emitted
// delta_k later sees A(tau + delta_k)). Poisson counts.
Trace classical_scan(double W1_eV, double W2_eV, double strength2, double delay2_as, double peak,
                     unsigned seed) {
  const double omega = units::wavelength_nm_to_omega_au(800.0);
  const double A0 = 0.15, T = units::fs_to_au(4.0), rms = units::eV_to_au(3.0);
  Trace t;
  t.meta.gas = "Ne";
  t.meta.ir_wavelength_nm = 800.0;
  for (int j = 0; j < 320; ++j) t.energy_au.push_back(units::eV_to_au(40.0 + 0.3 * j));
  for (int i = 0; i < 101; ++i) t.delay_au.push_back(units::fs_to_au(-6.0 + 0.12 * i));
  t.counts.setZero(101, 320);
  std::mt19937_64 rng(seed);
  auto A = [&](double s) { return A0 * std::exp(-s * s / (T * T)) * std::cos(omega * s); };
  const double W1 = units::eV_to_au(W1_eV), W2 = units::eV_to_au(W2_eV);
  const double p1 = std::sqrt(2 * W1), p2 = std::sqrt(2 * W2), d2 = units::as_to_au(delay2_as);
  for (int i = 0; i < 101; ++i) {
    const double a1 = A(t.delay_au[static_cast<std::size_t>(i)]);
    const double a2 = A(t.delay_au[static_cast<std::size_t>(i)] + d2);
    const double c1 = W1 - p1 * a1 + 0.5 * a1 * a1, c2 = W2 - p2 * a2 + 0.5 * a2 * a2;
    for (int j = 0; j < 320; ++j) {
      const double w = t.energy_au[static_cast<std::size_t>(j)];
      const double mu = peak * (std::exp(-0.5 * std::pow((w - c1) / rms, 2)) +
                                strength2 * std::exp(-0.5 * std::pow((w - c2) / rms, 2)));
      t.counts(i, j) = static_cast<double>(std::poisson_distribution<long long>(mu)(rng));
    }
  }
  return t;
}

// The two lines of the hand-built scans (2p reference at 95 eV, 2s at 68 eV, 9 rms apart), a
// background of zero on their 320 bins, and the options of the centre-of-energy tests on them
// (8 replicas, no Coulomb-laser correction: the scan has no Coulomb field).
const std::vector<LineEntry> kHandBuiltLines = {line("2p", 95.0, true), line("2s", 68.0, false)};
const std::vector<double> kHandBuiltBackground(320, 0.0);
LineDelayOptions hand_built_options() {
  LineDelayOptions o;
  o.bootstrap = 8;
  o.coulomb_laser_correction = false;
  return o;
}

}  // namespace

TEST_CASE("line-delay options: defaults validate, bad fields are named", "[line_delays]") {
  LineDelayOptions o;
  CHECK(o.validate().empty());
  o.bootstrap = 1;
  CHECK(o.validate().find("bootstrap = 1") != std::string::npos);
  o = {};
  o.ion_charge = 0;
  CHECK(o.validate().find("ion_charge") != std::string::npos);
}

TEST_CASE("Coulomb-laser coupling delay: value and agreement with the RABBITT cc delay",
          "[line_delays][clc]") {
  const double omega = units::wavelength_nm_to_omega_au(800.0);
  const double T = units::period_au(omega);
  // Hand evaluation of t_CLC = Z/(2W)^1.5 [2 - ln(W T)] (Nagele et al., J. Phys. B 44, 081001
  // (2011), formula from memory) at W = 100 eV, T = 2.6685 fs: (2 x 3.6749)^1.5 = 19.925,
  // W T = 405.4, 2 - ln 405.4 = -4.0048 -> -0.20099 a.u. = -4.862 as (hand/calculator).
  CHECK(units::au_to_as(coulomb_laser_delay_au(units::eV_to_au(100.0), T)) ==
        Approx(-4.862).margin(0.01));
  // Independent theory: the continuum-continuum delay of RABBITT (asymptotic formula, J. M.
  // Dahlstrom, A. L'Huillier and A. Maquet, J. Phys. B 45, 183001 (2012), re-derived in
  // retrieval/physics/atomic_delay.h without this formula). Its soft-photon limit, derived by
  // hand in docs/theory.md ("Coulomb-laser coupling"): for kappa = k + Delta, |Delta| << k,
  //   phi_cc(k, kappa) = (Z Delta / k^2) [1 + gamma - ln 2k + ln|Delta|] + O(Delta^2 ln Delta),
  // and Delta = +-omega/k give tau_cc -> (Z/k^3) [1 + gamma + ln(pi/2) - ln(W T)], W = k^2/2,
  // T = 2 pi/omega (gamma: Euler's constant, 0.5772156649, NIST DLMF 5.2(ii)). So both delays,
  // multiplied by k^3/Z and added to ln(W T), must give a constant: 2 for t_CLC at every W and T
  // (the 3/2 power and the argument W T of the logarithm), 1 + gamma + ln(pi/2) = 2.02880 for
  // tau_cc as omega -> 0. A wrong power would make the constant drift with W, a logarithm of
  // W^2 T or k T with W or T, a constant 1 instead of 2 would sit 1 away, an argument 2 W T 0.69.
  const double limit = 1.0 + 0.5772156649015329 + std::log(M_PI / 2.0);
  for (double W_eV : {40.0, 100.0, 300.0})
    for (double lambda_nm : {800.0, 1800.0, 12800.0}) {
      const double w = units::wavelength_nm_to_omega_au(lambda_nm);
      const double period = units::period_au(w);
      const double W = units::eV_to_au(W_eV);
      const double k3 = std::pow(2.0 * W, 1.5);
      const double c_clc = coulomb_laser_delay_au(W, period) * k3 + std::log(W * period);
      const double c_cc = continuum_continuum_delay_au(W, w) * k3 + std::log(W * period);
      INFO("W = " << W_eV << " eV, " << lambda_nm << " nm: constants " << c_clc << " (t_CLC), "
                  << c_cc << " (tau_cc)");
      CHECK(c_clc == Approx(2.0).margin(1e-9));
      // tau_cc at a finite photon energy: within 0.005 of its limit down to 40 eV at 800 nm
      // (2.0270 there, omega / W = 0.04), within 1e-4 at 12.8 um.
      CHECK(c_cc == Approx(limit).margin(lambda_nm > 10000 ? 1e-4 : 5e-3));
      // The two theories agree to 0.029 Z / k^3: 0.14 as at 40 eV, 0.007 as at 300 eV.
      CHECK(std::abs(c_clc - c_cc) < 0.035);
    }
  // And at the energies of the line analyses in as (40-120 eV, 800 nm): within 0.2 as.
  for (double W_eV : {40.0, 70.0, 100.0, 120.0}) {
    const double clc = units::au_to_as(coulomb_laser_delay_au(units::eV_to_au(W_eV), T));
    const double cc = units::au_to_as(continuum_continuum_delay_au(units::eV_to_au(W_eV), omega));
    INFO("W = " << W_eV << " eV: t_CLC " << clc << " as, t_cc " << cc << " as");
    CHECK(clc < 0);
    CHECK(std::abs(clc - cc) < 0.2);
  }
}

TEST_CASE("centre of energy: a hand-built classical scan gives the inserted delay with its sign",
          "[line_delays]") {
  // The scan's model is the classical picture itself, so the method must find the inserted
  // delay within its sigma (3 sigma), positive when the second line is emitted later.
  const LineDelayOptions o = hand_built_options();
  for (double d : {-40.0, 25.0}) {
    const Trace t = classical_scan(95.0, 68.0, 0.4, d, 200.0, d > 0 ? 3u : 4u);
    const LineDelayResult r = measure_line_delays(t, kHandBuiltLines, kHandBuiltBackground, o);
    REQUIRE(r.done);
    REQUIRE(r.lines[1].relative_delay_as);
    const double got = *r.lines[1].relative_delay_as, sig = *r.lines[1].relative_delay_as_sigma;
    INFO("inserted " << d << " as, measured " << got << " +- " << sig << " as, chi2_red "
                     << r.reduced_chi2);
    CHECK(std::abs(got - d) < 3 * sig);
    CHECK(sig < 5.0);
    CHECK(sig > 0.05);
    // Strength: equal widths, so the band-count ratio is the amplitude ratio 0.4 (within 3 sigma
    // plus the share of a Gaussian outside +-3 rms, 0.27 %: textbook normal table).
    CHECK(std::abs(*r.lines[1].relative_strength - 0.4) <
          3 * *r.lines[1].relative_strength_sigma + 0.004);
  }
}

TEST_CASE("band consistency: on a clean hand-built scan the second band gives the same delay",
          "[line_delays]") {
  // Two lines 27 eV (9 rms) apart: no tail of either reaches the other's band at 1.5 or 2 rms,
  // so both bands measure the same streaking and their difference is noise. The difference is
  // judged by its paired bootstrap spread (common practice for paired estimates: the spread of
  // the per-replica differences, not the two sigmas added).
  LineDelayOptions o = hand_built_options();
  const Trace t = classical_scan(95.0, 68.0, 0.4, -40.0, 200.0, 4u);
  const std::vector<LineEntry>& lines = kHandBuiltLines;
  const std::vector<double>& bg = kHandBuiltBackground;
  CHECK(measure_line_delays(t, lines, bg, o).band_difference_as.empty());  // off by default
  o.consistency_band_half_width_factor = 2.0;
  const LineDelayResult r = measure_line_delays(t, lines, bg, o);
  REQUIRE(r.done);
  REQUIRE(r.band_difference_as.size() == 2);
  const double d = r.band_difference_as[1], sd = r.band_difference_sigma_as[1];
  INFO("d = " << d << " +- " << sd << " as; delay sigma " << *r.lines[1].relative_delay_as_sigma);
  CHECK(sd > 0.0);
  CHECK(std::abs(d) < 3 * sd);
  // The paired spread is below the delay's own sigma (most noise is common to both bands).
  CHECK(sd < *r.lines[1].relative_delay_as_sigma);
}

TEST_CASE("line delays: names select lines, none switches off, unknown names are refused",
          "[line_delays]") {
  const Trace t = classical_scan(95.0, 68.0, 0.4, 0.0, 100.0, 5u);
  const std::vector<LineEntry>& lines = kHandBuiltLines;
  const std::vector<double>& bg = kHandBuiltBackground;
  LineDelayOptions o;
  o.bootstrap = 2;
  o.names = {"none"};
  CHECK_FALSE(measure_line_delays(t, lines, bg, o).done);
  o.names = {"3s"};
  try {
    (void)measure_line_delays(t, lines, bg, o);
    FAIL("expected sw::Error");
  } catch (const Error& e) {
    CHECK(std::string(e.what()).find("2p, 2s") != std::string::npos);
  }
  o.names = {"2s"};
  CHECK(measure_line_delays(t, lines, bg, o).done);
}

namespace {

// The generator's SFA amplitude by direct quadrature, the 2s line delayed by 30 as
// (E_X(t - delay), synthetic/scan_config.h), 0.3 of the 2p cross-section.
synthetic::SyntheticScan neon_2s_30as() {
  synthetic::ScanConfig c = synthetic::find_preset("neon-two-lines").config;
  c.lines[1].delay_as = 30.0;
  c.geometry.delay_fs = {-6.0, 0.15, 81};
  return synthetic::generate_scan(c, 11);
}
// retrieve() on it: `bootstrap` replicas, 60 iterations, 12 centre-of-energy replicas.
RetrieveOptions neon_2s_options(int bootstrap) {
  RetrieveOptions ro;
  ro.bootstrap = bootstrap;
  ro.iterations = 60;
  ro.line_delays.bootstrap = 12;
  return ro;
}

}  // namespace

TEST_CASE("retrieve on a generated neon 2s/2p scan names both lines and gives their delay",
          "[line_delays][retrieve]") {
  const synthetic::SyntheticScan s = neon_2s_30as();
  const RetrieveOutput out = retrieve(s.trace, neon_2s_options(2));
  const auto& L = out.result.lines;
  REQUIRE(L.size() >= 2);
  const LineEntry* s2 = nullptr;
  for (const LineEntry& l : L)
    if (l.name == "2s") s2 = &l;
  REQUIRE(s2);
  CHECK(s2->analysed);
  REQUIRE(s2->relative_delay_as);
  REQUIRE(s2->relative_delay_as_sigma);
  INFO("2s delay " << *s2->relative_delay_as << " +- " << *s2->relative_delay_as_sigma << " as ("
                   << s2->delay_method << "); centre of energy "
                   << s2->relative_delay_as_centre_of_energy.value_or(-999) << " +- "
                   << s2->relative_delay_as_centre_of_energy_sigma.value_or(-999) << " as; FWHM "
                   << out.result.xuv->fwhm_as.value_or(0) << " as (truth " << *s.truth.xuv->fwhm_as
                   << " as)");
  std::printf(
      "2s delay %g +- %g as (%s); centre of energy %g +- %g; FWHM %g (truth %g); strength %g\n",
      *s2->relative_delay_as, *s2->relative_delay_as_sigma, s2->delay_method.c_str(),
      s2->relative_delay_as_centre_of_energy.value_or(-999),
      s2->relative_delay_as_centre_of_energy_sigma.value_or(-999),
      out.result.xuv->fwhm_as.value_or(0), *s.truth.xuv->fwhm_as,
      s2->relative_strength.value_or(0));
  // Default options: the joint fit of both lines (retrieval/analysis/multi_line_fit.h), the centre
  // of energy beside it.
  CHECK(s2->delay_method == "joint full-model fit");
  REQUIRE(s2->relative_delay_as_centre_of_energy);
  CHECK(std::abs(*s2->relative_delay_as_centre_of_energy - 30.0) <
        3 * *s2->relative_delay_as_centre_of_energy_sigma);
  // The XUV target: within 5 % of the generator's pulse.
  CHECK(std::abs(*out.result.xuv->fwhm_as / *s.truth.xuv->fwhm_as - 1.0) < 0.05);
  CHECK(std::abs(*s2->relative_delay_as - 30.0) < 3 * *s2->relative_delay_as_sigma);
  CHECK(*s2->relative_delay_as_sigma < 5.0);
  // The Coulomb-laser correction of 2s (71.5 eV) against 2p (98.4 eV): t_CLC(71.5) - t_CLC(98.4)
  // = -7.4 - (-5.0) = about -2.4 as (formula of the CLC test case, evaluated by hand).
  REQUIRE(s2->clc_correction_as);
  CHECK(*s2->clc_correction_as == Approx(-2.4).margin(0.4));
  CHECK(*s2->relative_delay_as_corrected ==
        Approx(*s2->relative_delay_as - *s2->clc_correction_as));
  // Strength against the truth record's ratio of delay-integrated counts.
  double truth_ratio = 0;
  for (const LineEntry& l : s.truth.lines)
    if (l.name == "2s") truth_ratio = l.relative_strength.value_or(0);
  REQUIRE(truth_ratio > 0);
  CHECK(std::abs(*s2->relative_strength / truth_ratio - 1.0) < 0.05);
  REQUIRE(out.line_curves.size() == 2);
}

TEST_CASE("line delays: representative rows of the validation sweep", "[line_delays][validation]") {
  // tests/validation/line_delay_sweep.cpp (docs/validation.md "Two photoelectron lines"): the
  // issue's targets -- inserted delay within 3 sigma, sigma <= 5 as at >= 300 peak counts.
  // Inserted delay and strength are the generator's (synthetic/scan_config.h LineSpec); the
  // truth record gives the ratio of delay-integrated counts.
  struct Case {
    const char* gas;
    double strength, peak, delay_as;
    unsigned long long seed;
  };
  // Argon 3s/3p (13.5 eV apart) comes out 10 % strong on the sweep (overlapping tails): its
  // strength is held to 15 %; neon (27 eV apart) to 2 % beyond 3 sigma.
  for (const Case& k : {Case{"Ne", 0.1, 300, 50, 31}, Case{"Ne", 0.3, 1000, -20, 32},
                        Case{"Ar", 0.3, 300, 0, 33}, Case{"Ar", 0.3, 1000, -50, 34}}) {
    synthetic::ScanConfig c = validation::two_line_target(k.gas);  // the sweep's scans
    c.lines[1].relative_strength = k.strength;
    c.lines[1].delay_as = k.delay_as;
    c.noise.peak_counts = k.peak;
    const synthetic::SyntheticScan s = synthetic::generate_scan(c, k.seed);
    PreprocessSummary ps;
    (void)preprocess(s.trace, PreprocessOptions{}, &ps);
    std::vector<double> bg(s.trace.energy_au.size());
    for (std::size_t j = 0; j < bg.size(); ++j)
      bg[j] = ps.background.at(units::au_to_eV(s.trace.energy_au[j]));
    LineDelayOptions o;
    o.bootstrap = 12;
    const LineDelayResult r = measure_line_delays(s.trace, ps.lines, bg, o);
    REQUIRE(r.done);
    const LineEntry* l = nullptr;
    for (const LineEntry& e : r.lines)
      if (!e.reference && e.relative_delay_as) l = &e;
    REQUIRE(l);
    double truth_ratio = 0;
    for (const LineEntry& e : s.truth.lines)
      if (!e.reference) truth_ratio = e.relative_strength.value_or(0);
    INFO(k.gas << " strength " << k.strength << " peak " << k.peak << ": inserted " << k.delay_as
               << " as, measured " << *l->relative_delay_as << " +- " << *l->relative_delay_as_sigma
               << " as; strength " << *l->relative_strength << " +- " << *l->relative_strength_sigma
               << " (truth " << truth_ratio << ")");
    CHECK(std::abs(*l->relative_delay_as - k.delay_as) < 3 * *l->relative_delay_as_sigma);
    CHECK(*l->relative_delay_as_sigma <= 5.0);
    // No sigma below the Cramer-Rao bound (H. Cramer 1946; C. R. Rao 1945), computed from the
    // generator's expected counts alone (tests/validation/line_delay_bound.h): a sigma under it
    // would be an understated error bar. 0.85: the bootstrap sigma's own scatter with 12
    // replicas (relative sd 1/sqrt(2 x 11) = 0.21; common practice for a one-sided check).
    const validation::DelayBound bound = validation::line_delay_cramer_rao(c);
    INFO("Cramer-Rao bound " << bound.delay_only_as << " as (delay alone), "
                             << bound.with_nuisances_as << " as (with nuisances)");
    CHECK(bound.with_nuisances_as >= bound.delay_only_as);
    CHECK(*l->relative_delay_as_sigma >= 0.85 * bound.with_nuisances_as);
    // The lines' separation in rms widths (the quality check line_separation_widths): a
    // transform-limited Gaussian pulse of intensity FWHM tau has a spectral intensity FWHM of
    // 4 ln 2 hbar / tau (time-bandwidth product 0.441; hbar = 658.21 meV fs, CODATA 2018), rms
    // = FWHM / 2.3548; the thresholds set the distance (NIST ASD: Ne 2s-2p 26.91 eV, Ar 3s-3p
    // 13.48 eV; from memory). Rows are a little wider than the field-free line (streaking,
    // spectrometer resolution): within 8 % (common practice). Neon passes the check, argon,
    // whose tails overlap, does not.
    const bool argon = std::string(k.gas) == "Ar";
    const double tau_as = argon ? 190.0 : 160.0, gap_eV = argon ? 13.48 : 26.91;
    const double rms_eV = 4.0 * std::log(2.0) * 658.21 / tau_as / 2.3548;
    CHECK(r.separation_widths == Approx(gap_eV / rms_eV).epsilon(0.08));
    CHECK((r.separation_widths >= QualityOptions().min_line_separation_widths) == !argon);
    const double tol = argon ? 0.15 : 0.02;
    CHECK(std::abs(*l->relative_strength - truth_ratio) <
          3 * *l->relative_strength_sigma + tol * truth_ratio);
  }
}

TEST_CASE("centre of energy: noiseless generated scans give the inserted delay (no neighbour pull)",
          "[line_delays][validation]") {
  // Issue 14 defect (a): neon 2s at +-50 as came out 2-3 % short. Two independent routes on the
  // generator's noise-free counts (synthetic/generator.h SyntheticScan::clean, the SFA by
  // direct quadrature; the line's amplitude uses E_X(t - tau - delta), synthetic/scan_config.h):
  //  1. each line generated alone, its first moment over the whole axis per row, fitted by
  //     fit_line_moments: the generator's inserted delay and the first-moment model agree to
  //     0.05 as (measured: -50.004 and +49.996 as), so the bias was not in the physics;
  //  2. both lines in one scan through the whole method: with bands of 3 rms (the old default)
  //     the neighbour's tail inside the bands streaks with the neighbour's curve and compressed
  //     the delay (measured -48.75 as for -50 at strength 0.3); with 1.5 rms it is -49.94.
  // Required (our choice, a tenth of the old bias's size): within 0.5 as of the inserted delay.
  for (double d : {-50.0, 50.0}) {
    synthetic::ScanConfig c = validation::two_line_target("Ne");  // the sweep's scans
    c.lines[1].relative_strength = 0.3;
    c.lines[1].delay_as = d;
    c.noise.poisson = false;
    const synthetic::SyntheticScan s = synthetic::generate_scan(c, 1);
    const double scale = 1000.0 / s.clean.maxCoeff();  // 1000 peak counts: the variances
    const std::vector<double> bg(s.trace.energy_au.size(), 0.0);
    const double omega = units::wavelength_nm_to_omega_au(800.0);
    // Route 1: the lines alone.
    std::vector<LineMoments> lm;
    for (std::size_t k = 0; k < 2; ++k) {
      synthetic::ScanConfig ck = c;
      ck.lines = {c.lines[k]};
      const Eigen::MatrixXd Ck = synthetic::generate_scan(ck, 1).clean * scale;
      const double Wk = units::eV_to_au(*s.truth.lines[k].kinetic_energy_eV);
      LineMoments m;
      m.name = s.truth.lines[k].name;
      m.momentum_au = std::sqrt(2.0 * Wk);
      for (Eigen::Index i = 0; i < Ck.rows(); ++i) {
        double n = 0, nw = 0, v = 0;
        for (Eigen::Index j = 0; j < Ck.cols(); ++j) {
          n += Ck(i, j);
          nw += Ck(i, j) * s.trace.energy_au[static_cast<std::size_t>(j)];
        }
        for (Eigen::Index j = 0; j < Ck.cols(); ++j)
          v += Ck(i, j) * std::pow(s.trace.energy_au[static_cast<std::size_t>(j)] - nw / n, 2);
        m.delay_au.push_back(s.trace.delay_au[static_cast<std::size_t>(i)]);
        m.moment_au.push_back(nw / n);
        m.variance_au2.push_back(v / (n * n));
        m.counts += n;
      }
      lm.push_back(m);
    }
    const LineDelayEstimate alone =
        fit_line_moments(lm, s.trace.delay_au.front(), s.trace.delay_au.back(), omega);
    REQUIRE(alone.ok);
    // Route 2: both lines, the method as retrieve runs it.
    const LineDelayEstimate both = centre_of_energy_estimate(
        s.clean * scale, s.trace.energy_au, s.trace.delay_au, bg, s.truth.lines, omega, {});
    REQUIRE(both.ok);
    INFO("inserted " << d << " as: lines alone " << alone.delay_as[1] << " as, both lines "
                     << both.delay_as[1] << " as");
    CHECK(std::abs(alone.delay_as[1] - d) < 0.05);
    CHECK(std::abs(both.delay_as[1] - d) < 0.5);
  }
}

TEST_CASE("line delays: lines merged by streaking are anchored on the unstreaked edge rows",
          "[line_delays][validation]") {
  // Issue 14 defect (b): argon 3s and 3p of equal strength (13.5 eV apart) merge into one peak
  // of the delay-integrated spectrum; the detection places the pattern between them (photon
  // energy 64 eV for 70 eV, preprocess's line_pattern_agreement check) and no delay was written.
  // The edge rows resolve both lines, and their photon energy puts the bands on the lines.
  // Truth: the generator's inserted delay (synthetic/scan_config.h LineSpec::delay_as).
  synthetic::ScanConfig c = validation::two_line_target("Ar");  // the sweep's scans
  c.lines[1].relative_strength = 1.0;
  c.lines[1].delay_as = 20.0;
  c.noise.peak_counts = 300;
  const synthetic::SyntheticScan s = synthetic::generate_scan(c, 7);
  PreprocessSummary ps;
  (void)preprocess(s.trace, PreprocessOptions{}, &ps);
  REQUIRE_FALSE(ps.line_pattern_disagreement.empty());  // the merged-peak case
  std::vector<double> bg(s.trace.energy_au.size());
  for (std::size_t j = 0; j < bg.size(); ++j)
    bg[j] = ps.background.at(units::au_to_eV(s.trace.energy_au[j]));
  LineDelayOptions o;
  o.bootstrap = 12;
  o.reanchor_on_unstreaked_rows = false;  // as before: no delay
  const LineDelayResult before = measure_line_delays(s.trace, ps.lines, bg, o);
  for (const LineEntry& e : before.lines) CHECK_FALSE(e.relative_delay_as);
  o.reanchor_on_unstreaked_rows = true;
  const LineDelayResult r = measure_line_delays(s.trace, ps.lines, bg, o);
  REQUIRE(r.done);
  const LineEntry* l = nullptr;
  for (const LineEntry& e : r.lines)
    if (e.name == "3s") l = &e;
  REQUIRE(l);
  REQUIRE(l->relative_delay_as);
  INFO("3s: " << *l->relative_delay_as << " +- " << *l->relative_delay_as_sigma << " as at "
              << l->kinetic_energy_eV.value_or(0) << " eV, chi2 " << r.reduced_chi2);
  CHECK(std::abs(*l->relative_delay_as - 20.0) < 3 * *l->relative_delay_as_sigma);
  CHECK(*l->relative_delay_as_sigma <= 5.0);
  // 70 eV photons - 29.24 eV (Ar 3s threshold, NIST ASD): 40.76 eV; the edge rows' centroids
  // are good to about a tenth of the line's 9.6 eV FWHM (common practice for the tolerance).
  CHECK(std::abs(*l->kinetic_energy_eV - 40.76) < 2.5);
  bool warned = false;
  for (const std::string& w : r.warnings)
    warned = warned || w.find("edge rows") != std::string::npos;
  CHECK(warned);
}

TEST_CASE("retrieve command: the lines summary, the figure and --lines", "[line_delays][cli]") {
  // The preset's 2s line is emitted 10 as after 2p (synthetic/presets.cpp).
  test::TempDir d("line_delays_cli");
  const std::string scan = d / "scan" + "/neon-two-lines.json";
  REQUIRE(test::run_cli("simulate --preset neon-two-lines -q -o " + d / "scan").code == 0);
  const test::CliRun bad =
      test::run_cli("retrieve " + scan + " -q -o " + d / "bad" + " --lines 3s");
  CHECK(bad.code == 2);
  CHECK(bad.out.find("its lines are 2p, 2s") != std::string::npos);
  CHECK_FALSE(std::filesystem::exists(d / "bad"));
  const test::CliRun ok =
      test::run_cli("retrieve " + scan + " -q -o " + d / "ok" + " --bootstrap 0 --iterations 30");
  INFO(ok.out);
  CHECK((ok.code == 0 || ok.code == 4));
  CHECK(ok.out.find("lines: Ne 2p (reference); Ne 2s delay ") != std::string::npos);
  CHECK(std::filesystem::exists(d / "ok" + "/line_streaking.png"));
}

TEST_CASE("line-delay options: defaults validate, a bad value is named", "[line_delays]") {
  // The bounds of LineDelayOptions' header comments (a bootstrap sigma needs >= 2 replicas,
  // common practice; a band half width of at most one rms leaves no band).
  test::check_validation<LineDelayOptions>(
      {{[](auto& o) { o.bootstrap = 1; }, "bootstrap = 1"},
       {[](auto& o) { o.band_half_width_factor = 1.0; }, "band_half_width_factor = 1"},
       {[](auto& o) { o.ion_charge = 0.0; }, "ion_charge = 0"},
       {[](auto& o) { o.consistency_band_half_width_factor = 0.5; },
        "consistency_band_half_width_factor = 0.5"},
       {[](auto& o) {
          o.names = {"2s", ""};
        },
        "an empty line name"}});
}

TEST_CASE("joint-lines replicas: the same line sigmas for any thread count",
          "[line_delays][retrieve][slow]") {
  // Each replica's joint-fit values go into its own slot and are read in replica order
  // (JointLineStep::replicas), so 1 and 3 threads give the same sigmas to the last bit (common
  // practice for parallel Monte Carlo; retrieve.h promises it for every number). With 3
  // replicas the order of the sums matters: values gathered in the order the replicas finish
  // would differ in the last digits between runs.
  const synthetic::SyntheticScan s = neon_2s_30as();
  RetrieveOptions ro = neon_2s_options(3);
  ro.threads = 1;
  const RetrieveOutput a = retrieve(s.trace, ro);
  ro.threads = 3;
  const RetrieveOutput b = retrieve(s.trace, ro);
  REQUIRE(a.result.lines.size() == b.result.lines.size());
  int joint = 0;
  for (std::size_t i = 0; i < a.result.lines.size(); ++i) {
    const LineEntry &la = a.result.lines[i], &lb = b.result.lines[i];
    if (la.delay_method != "joint full-model fit") continue;
    ++joint;
    REQUIRE(la.relative_delay_as_sigma);
    REQUIRE(lb.relative_delay_as_sigma);
    CHECK(*la.relative_delay_as_sigma == *lb.relative_delay_as_sigma);
    CHECK(*la.relative_strength_sigma == *lb.relative_strength_sigma);
    CHECK(*la.relative_delay_as == *lb.relative_delay_as);
  }
  CHECK(joint >= 1);
  CHECK(*a.result.xuv->fwhm_as_sigma == *b.result.xuv->fwhm_as_sigma);
}
