// RABBITT with two photoelectron lines (retrieval/analysis/rabbitt_lines.h): the pieces
// (weighted mean, relative delay and its continuum-continuum correction, candidates, window
// plan) and end to end on scans of the direct-quadrature generator (synthetic/, independent of
// the analysis) with relative photoemission delays inserted per line (LineSpec::delay_as).
#include <catch2/catch.hpp>

#include <cmath>
#include <map>

#include "io/result_io.h"
#include "retrieval/analysis/analyses.h"
#include "retrieval/analysis/rabbitt.h"
#include "retrieval/analysis/rabbitt_lines.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/atomic_delay.h"
#include "retrieval/physics/gas.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"

using namespace sw;

namespace {

// The argon-rabbitt preset (800 nm, 130 as bursts with 15 as/eV attochirp, 8 fs train,
// 1e11 W/cm^2 IR) with the argon 3p line and a second line, on a shorter axis: two IR periods
// of delay (the phase needs one period of 2 omega at least) and 3..25 eV.
synthetic::ScanConfig two_line_config(const std::string& gas, const std::string& second_gas,
                                      const std::string& second, double strength, double delay_as) {
  synthetic::ScanConfig c = synthetic::find_preset("argon-rabbitt").config;
  c.gas = gas;
  synthetic::LineSpec a, b;
  a.name = find_gas(gas).lines.front().name;
  b.gas = second_gas;
  b.name = second;
  b.relative_strength = strength;
  b.delay_as = delay_as;
  c.lines = {a, b};
  c.geometry.energy_eV = {3.0, 0.05, 441};
  c.geometry.delay_fs = {-2.6, 0.1, 53};
  return c;
}

// Scans are generated once per configuration (the generator dominates the test time).
const synthetic::SyntheticScan& cached(const std::string& key, const synthetic::ScanConfig& c) {
  static std::map<std::string, synthetic::SyntheticScan> cache;
  auto it = cache.find(key);
  if (it == cache.end()) it = cache.emplace(key, synthetic::generate_scan(c, 1)).first;
  return it->second;
}

// The sidecar of a two-gas jet declares both lines (the gas table knows only the scan gas).
void declare(Trace& t, const std::string& reference, const std::string& gas2,
             const std::string& name2) {
  DeclaredLine a, b;
  a.name = reference;
  b.name = name2;
  b.gas = gas2;
  t.meta.lines = {a, b};
}

// Argon 3p with xenon 5p (strength 0.3, -30 as), both declared, 1000 peak counts.
Trace two_gas_trace() {
  Trace t = synthetic::redraw_counts(cached("xe", two_line_config("Ar", "Xe", "5p", 0.3, -30.0)),
                                     1000.0, 11);
  declare(t, "3p", "Xe", "5p");
  return t;
}

RabbittOptions no_atomic() {
  RabbittOptions o;
  o.atomic.mode = AtomicDelayMode::kNone;  // the SFA has no atomic delays
  o.rainbow = false;
  return o;
}

const RabbittLine* second_line(const RabbittAnalysis& r) {
  for (const RabbittLine& l : r.lines)
    if (!l.candidate.reference && l.present) return &l;
  return nullptr;
}

}  // namespace

TEST_CASE("weighted mean of relative delays: value, sigma and the chi^2 scale factor",
          "[rabbitt_lines]") {
  // Two values 2 sigma apart: mean between, chi^2/dof = 2, sigma scaled by sqrt(2) (the
  // Particle Data Group's scale factor).
  WeightedMean m = weighted_mean_delay({10.0, 12.0}, {1.0, 1.0});
  CHECK(m.mean == Approx(11.0));
  CHECK(m.reduced_chi2 == Approx(2.0));
  CHECK(m.scaled);
  CHECK(m.sigma == Approx(1.0));
  // Consistent values: sigma = 1 / sqrt(sum w), not scaled; weights 1/sigma^2.
  m = weighted_mean_delay({10.0, 10.5}, {1.0, 2.0});
  CHECK(m.mean == Approx((10.0 + 10.5 / 4.0) / 1.25));
  CHECK(m.sigma == Approx(1.0 / std::sqrt(1.25)));
  CHECK_FALSE(m.scaled);
  CHECK_THROWS_AS(weighted_mean_delay({}, {}), Error);
  CHECK_THROWS_AS(weighted_mean_delay({1.0}, {0.0}), Error);
}

TEST_CASE("relative sideband delay: sign, 2 pi wrap and the continuum-continuum correction",
          "[rabbitt_lines]") {
  const double w = units::wavelength_nm_to_omega_au(800.0);
  const double Wk = 10 * w, Wr = 20 * w;
  // A later line has the larger 2 omega phase (rabbitt.h sign convention): +0.1 rad = +0.1 /
  // (2 omega); a 2 pi branch difference between the two fits changes nothing.
  const RelativeSidebandDelay r =
      relative_sideband_delay(18, Wk, 1.0 + 0.1 + units::kTwoPi, 0.03, Wr, 1.0, 0.04, w, 1.0);
  CHECK(r.relative_phase_rad == Approx(0.1));
  CHECK(r.relative_phase_rad_sigma == Approx(0.05));
  CHECK(r.relative_delay_as == Approx(units::au_to_as(0.1 / (2 * w))));
  CHECK(r.relative_delay_as_sigma == Approx(units::au_to_as(0.05 / (2 * w))));
  REQUIRE(r.corrected);
  const double cc = units::au_to_as(continuum_continuum_delay_au(Wk, w, 1.0) -
                                    continuum_continuum_delay_au(Wr, w, 1.0));
  CHECK(r.cc_correction_as == Approx(cc));
  // tau_cc is negative and shrinks with energy (Dahlstrom et al. 2012): the slower line's is
  // more negative, so the correction is negative and the corrected delay larger.
  CHECK(r.cc_correction_as < 0.0);
  CHECK(r.relative_delay_as_corrected == Approx(r.relative_delay_as - cc));
  // Below hbar omega the continuum-continuum delay is not defined: no corrected value.
  CHECK_FALSE(relative_sideband_delay(18, 0.5 * w, 0.0, 0.1, Wr, 0.0, 0.1, w, 1.0).corrected);
}

TEST_CASE("line candidates: the gas table, declared lines and a line of another gas",
          "[rabbitt_lines]") {
  const Gas& ar = find_gas("Ar");
  std::vector<std::string> warn;
  auto c = rabbitt_line_candidates(ar, {}, &warn);
  REQUIRE(c.size() == ar.lines.size());
  CHECK(c[0].reference);
  CHECK(c[0].name == "3p");
  CHECK(c[1].name == "3s");
  CHECK(c[1].channel_l0 == 0);
  CHECK_FALSE(c[1].declared);
  DeclaredLine xe, p3, bad;
  xe.name = "5p";
  xe.gas = "Xe";
  p3.name = "3p";
  bad.name = "9z";
  c = rabbitt_line_candidates(ar, {xe, p3, bad}, &warn);
  REQUIRE(c.size() == 2);  // the reference once, Xe 5p; the unknown line left out
  CHECK(c[0].declared);
  CHECK(c[1].gas == "Xe");
  CHECK(c[1].ionization_energy_eV == Approx(find_gas("Xe").ionization_energy_eV));
  CHECK(c[1].declared);
  REQUIRE(warn.size() == 1);
  CHECK_THAT(warn[0], Catch::Contains("9z"));
}

TEST_CASE("window plan: a separated neighbour narrows the window, a close one overlaps it",
          "[rabbitt_lines]") {
  CombPeakModel m;
  m.peak_fwhm_eV = 0.2355;
  m.peak_sigma_eV = 0.1;
  m.peaks = {{0, 16, true, 10.0, 100.0, 10.0},
             {1, 16, true, 10.6, 100.0, 10.0},
             {1, 17, false, 11.5, 1000.0, 10.0},
             {2, 16, true, 10.05, 100.0, 10.0}};
  // Line 2 (0.05 eV away) is not present: the window is set by line 1, 0.6 eV away.
  SidebandWindowPlan p = plan_sideband_window(m, {1, 1, 0}, 0, 16, 10.0, 0.5, 3.0, 0.02);
  CHECK_FALSE(p.overlapped);
  CHECK(p.nearest_other_line == 1);
  CHECK(p.nearest_other_eV == Approx(0.6));
  CHECK(p.half_width_eV == Approx(0.3));  // 0.6 - 3 sigma
  CHECK(p.leakage < 0.01);                // 3 sigma beyond the window edge
  // With line 2 present, its peak 0.05 eV away leaves no room: overlapped.
  p = plan_sideband_window(m, {1, 1, 1}, 0, 16, 10.0, 0.5, 3.0, 0.02);
  CHECK(p.overlapped);
  CHECK(p.nearest_other_line == 2);
  CHECK_THAT(p.why, Catch::Contains("closer than"));
  // No guard: the window stays wide, and line 1's peak leaks into it beyond the limit.
  p = plan_sideband_window(m, {1, 1, 0}, 0, 16, 10.0, 0.5, 0.0, 0.02);
  CHECK(p.half_width_eV == Approx(0.5));
  CHECK(p.overlapped);
  CHECK_THAT(p.why, Catch::Contains("%"));
}

// Inserted relative delays retrieved within 3 sigma. Counts: 1000 at the largest bin (Poisson
// draws of the generator's noise-free density). Sigma bound 4 as: about twice the sigma measured
// at 1000 counts (1.3-2.3 as; 1.5-8.4 as at 300 and 0.7-2.8 as at 3000 counts, docs/validation.md
// "RABBITT with two lines"): it fails if the windows lose counts or the sigma propagation changes.
// 3 sigma: common practice.
TEST_CASE("argon 3s beside 3p: inserted -30, 0 and +50 as are retrieved within 3 sigma",
          "[rabbitt_lines][synthetic]") {
  // Thresholds: Ar 3p 15.7596 eV, Ar 3s 29.2394 eV (NIST ASD, retrieval/physics/gas.cpp);
  // Delta Ip = 13.48 eV = 8.70 hbar omega at 800 nm: the 3s sidebands sit 0.47 eV above the 3p
  // harmonics, two peak FWHM away.
  for (const double inserted : {-30.0, 0.0, 50.0}) {
    const auto& scan =
        cached("ar3s" + std::to_string(inserted), two_line_config("Ar", "", "3s", 1.0, inserted));
    const RabbittAnalysis r =
        analyze_rabbitt(synthetic::redraw_counts(scan, 1000.0, 7), no_atomic());
    const RabbittLine* L = second_line(r);
    REQUIRE(L);
    CHECK(L->candidate.name == "3s");
    CHECK(L->source == "detected");  // from the gas table, seen in the comb
    REQUIRE(L->delay);
    INFO("inserted " << inserted << " as, retrieved " << L->delay->mean << " +- " << L->delay->sigma
                     << " as from " << L->delay->count << " sidebands");
    CHECK(std::abs(L->delay->mean - inserted) <= 3.0 * L->delay->sigma);
    CHECK(L->delay->sigma < 4.0);
    CHECK(L->delay->count >= 2);
    // The continuum-continuum correction is defined at these energies and raises the delay of
    // the slower 3s electrons (see the unit case above).
    REQUIRE(L->delay_corrected);
    CHECK(L->delay_corrected->mean > L->delay->mean);
    // The reference's attochirp survives the narrower windows: GDD / hbar = 15.04 as/eV
    // (the preset's 9900 as^2; hbar = 658.2119569 eV as, CODATA 2018), within the 1 as/eV of
    // the single-line preset test (tests/test_rabbitt.cpp).
    REQUIRE(r.section.attochirp_as_per_eV);
    CHECK(std::abs(*r.section.attochirp_as_per_eV - 9900.0 / 658.2119569) < 1.0);
  }
}

TEST_CASE("two gases: xenon 5p declared beside argon 3p, -30 as at strength 0.3",
          "[rabbitt_lines][synthetic]") {
  // Xe 12.1298 eV, Ar 15.7596 eV (NIST ASD): Delta Ip = -3.63 eV = -2.34 hbar omega, the
  // xenon sidebands 0.53 eV from the argon ones.
  const RabbittAnalysis r = analyze_rabbitt(two_gas_trace(), no_atomic());
  const RabbittLine* L = second_line(r);
  REQUIRE(L);
  CHECK(L->candidate.gas == "Xe");
  CHECK(L->source == "sidecar");
  REQUIRE(L->delay);
  INFO("retrieved " << L->delay->mean << " +- " << L->delay->sigma << " as from " << L->delay->count
                    << " sidebands");
  CHECK(std::abs(L->delay->mean + 30.0) <= 3.0 * L->delay->sigma);
  CHECK(L->delay->sigma < 4.0);
  CHECK(L->overlapped_orders.empty());
  // Each order's delay agrees with the mean (chi^2/dof below 3: common practice for "no
  // disagreement" with a handful of orders).
  CHECK(L->delay->reduced_chi2 < 3.0);
}

TEST_CASE("a single-line argon scan shows no second line", "[rabbitt_lines][synthetic]") {
  // The 3s line of the table is looked for and not found (false-positive guard).
  synthetic::ScanConfig c = two_line_config("Ar", "", "3s", 1.0, 0.0);
  c.lines.pop_back();
  const RabbittAnalysis r =
      analyze_rabbitt(synthetic::redraw_counts(cached("ar_only", c), 1000.0, 3), no_atomic());
  CHECK(second_line(r) == nullptr);
  REQUIRE(r.lines.size() == find_gas("Ar").lines.size());
  CHECK(r.lines[1].significance < 5.0);
  for (const auto& s : r.skipped_sidebands) CHECK_THAT(s, !Catch::Contains("overlaps"));
}

TEST_CASE("overlapping sets (helium beside neon): no delay, failed check, result.json keys",
          "[rabbitt_lines][synthetic]") {
  // He 24.5874 eV, Ne 21.5645 eV (NIST ASD): Delta Ip = 3.023 eV = 1.95 hbar omega at 800 nm,
  // so every helium peak lies 0.08 eV from a neon peak of the same parity, a third of a FWHM.
  const auto& scan = cached("hene", two_line_config("Ne", "He", "1s", 1.0, 20.0));
  Trace t = synthetic::redraw_counts(scan, 1000.0, 5);
  declare(t, "2p", "He", "1s");
  RabbittAnalysisOptions o;
  o.atomic_correction = "none";
  o.rabbitt.rainbow = false;
  const RabbittOutput out = analyse_rabbitt(t, nullptr, o);
  const AnalysisResult& res = out.result;
  REQUIRE(res.lines.size() == 2);
  const LineEntry& l = res.lines[1];
  CHECK(l.gas == "He");
  CHECK_FALSE(l.relative_delay_as);
  CHECK(l.sidebands.empty());
  CHECK_FALSE(l.overlapped_orders.empty());
  CHECK_FALSE(l.relative_strength);  // not separable
  REQUIRE(res.quality);
  CHECK_FALSE(res.quality->trusted);
  bool sep = false, count = false;
  for (const QualityCheck& c : res.quality->checks) {
    if (c.name == "line_sideband_separation_sigmas") sep = !c.pass;
    if (c.name == "line_sidebands_for_delay") count = !c.pass && c.value == 0.0;
  }
  CHECK(sep);
  CHECK(count);
  bool warned = false;
  for (const auto& w : res.warnings) warned = warned || w.find("overlap") != std::string::npos;
  CHECK(warned);
  // The separated case through the same path: the lines section carries the per-sideband list
  // and survives a result.json round trip (keys of DESIGN.md "lines" kept, new ones beside).
  const RabbittOutput ox = analyse_rabbitt(two_gas_trace(), nullptr, o);
  const AnalysisResult back = result_from_json(result_to_json(ox.result), "round trip");
  REQUIRE(back.lines.size() == 2);
  CHECK(back.lines[0].reference);
  const LineEntry& b = back.lines[1];
  REQUIRE(b.relative_delay_as);
  REQUIRE(b.relative_delay_as_sigma);
  CHECK(*b.relative_delay_as == Approx(*ox.result.lines[1].relative_delay_as));
  REQUIRE(b.sidebands.size() == ox.result.lines[1].sidebands.size());
  REQUIRE_FALSE(b.sidebands.empty());
  CHECK(b.sidebands.front().relative_delay_as_sigma > 0.0);
  CHECK(b.sidebands.front().relative_delay_as_corrected);
  CHECK(b.delay_method == "rabbitt sidebands");
  bool passed = false;
  for (const QualityCheck& c : ox.result.quality->checks)
    if (c.name == "line_sidebands_for_delay") passed = c.pass;
  CHECK(passed);
}
