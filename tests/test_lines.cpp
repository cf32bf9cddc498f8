// Photoelectron lines and the analysis window (retrieval/preprocess/lines.h, preprocess step 2b).
#include <catch2/catch.hpp>

#include <cmath>
#include <random>

#include "io/trace_reader.h"
#include "retrieval/analysis/retrieve.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/gas.h"
#include "retrieval/preprocess/lines.h"
#include "retrieval/preprocess/preprocess.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "tests/check_support.h"
#include "tests/test_support.h"

using namespace sw;

namespace {

// Thresholds (NIST ASD via retrieval/physics/gas.h; the test re-states them from memory of the NIST
// tables: Ne 2p 21.5645 eV, Ne 2s 21.5645 + 26.910 eV; Ar 3p 15.7596 eV, Ar 3s 15.7596 + 13.480).
constexpr double kNe2p = 21.5645, kNe2s = 21.5645 + 26.910;
constexpr double kAr3p = 15.7596, kAr3s = 15.7596 + 13.480;

struct TwoLineScan {
  Trace trace;            // Poisson counts of both lines
  Eigen::MatrixXd outer;  // expected counts of the outer-valence (reference) line
  Eigen::MatrixXd inner;  // expected counts of the inner-valence line
  double outer_fwhm_as = 0;
};

// Two lines of one gas from one pulse of photon energy `photon_eV`: the outer line is the
// generator's scan of the gas; the inner line (threshold ip_inner) is the same pulse and IR
// on a scan whose photon energy is lowered by ip_inner - ip_outer, which puts its electrons
// at the inner line's kinetic energies with the same streaking (same p, same A(t); constant
// dipole). The inner line's delay-integrated counts are `ratio` times the outer line's.
TwoLineScan two_lines(synthetic::ScanConfig c, double photon_eV, double ip_outer, double ip_inner,
                      double ratio, double peak_counts, unsigned long long seed) {
  c.noise.poisson = false;
  c.noise.peak_counts = peak_counts;
  c.noise.saturation_counts = 0;
  c.xuv.gaussian.center_eV = photon_eV;
  const synthetic::SyntheticScan a = synthetic::generate_scan(c, seed);
  c.xuv.gaussian.center_eV = photon_eV - (ip_inner - ip_outer);
  const synthetic::SyntheticScan b = synthetic::generate_scan(c, seed);
  TwoLineScan s;
  s.outer = a.trace.counts;
  s.inner = b.trace.counts * (ratio * a.trace.counts.sum() / b.trace.counts.sum());
  s.outer_fwhm_as = *a.truth.xuv->fwhm_as;
  s.trace = a.trace;
  s.trace.meta.background.reset();
  std::mt19937_64 rng(seed + 99);
  for (Eigen::Index i = 0; i < s.trace.counts.size(); ++i) {
    const double mu = s.outer.data()[i] + s.inner.data()[i];
    s.trace.counts.data()[i] =
        mu > 0 ? static_cast<double>(std::poisson_distribution<long long>(mu)(rng)) : 0.0;
  }
  return s;
}

synthetic::ScanConfig neon_wide() {
  synthetic::ScanConfig c = synthetic::find_preset("neon-150as").config;
  c.geometry.energy_eV = {20.0, 0.25, 480};  // 20-140 eV
  return c;
}

synthetic::ScanConfig argon_narrow() {
  // Our argon scenario: 300 as TL pulse at 40 eV, 1e12 W/cm^2 IR: the 3p and 3s lines
  // (13.5 eV apart) stay apart under the streaking.
  synthetic::ScanConfig c = synthetic::find_preset("neon-150as").config;
  c.gas = "Ar";
  c.xuv.gaussian.transform_limited_fwhm_as = 300.0;
  c.ir.pulse.peak_intensity_Wcm2 = 1e12;
  c.geometry.energy_eV = {2.0, 0.1, 450};  // 2-47 eV
  return c;
}

const LineEntry* find_line(const std::vector<LineEntry>& v, const std::string& name) {
  for (const auto& e : v)
    if (e.name == name) return &e;
  return nullptr;
}

}  // namespace

TEST_CASE("line options: defaults validate", "[lines]") {
  test::check_validation<LineOptions>(
      {{[](auto& o) { o.support_fraction = 1.5; }, "support_fraction = 1.5"}});
}

TEST_CASE("neon: the 2s line is found beside 2p at 95-110 eV photon energy", "[lines]") {
  for (double photon : {95.0, 108.0}) {
    const TwoLineScan s = two_lines(neon_wide(), photon, kNe2p, kNe2s, 0.3, 500.0, 7);
    PreprocessSummary ps;
    (void)preprocess(s.trace, PreprocessOptions{}, &ps);
    INFO("photon " << photon << " eV; estimated " << ps.photon_energy_eV << " eV");
    const LineEntry* p2 = find_line(ps.lines, "2p");
    const LineEntry* s2 = find_line(ps.lines, "2s");
    REQUIRE(p2);
    REQUIRE(s2);
    CHECK(p2->reference);
    CHECK(p2->analysed);
    CHECK_FALSE(s2->analysed);
    // Kinetic energies photon - Ip within a quarter of the 12 eV bandwidth (the photon energy
    // comes from the streaked, delay-integrated peak's centroid).
    CHECK(std::abs(*p2->kinetic_energy_eV - (photon - kNe2p)) < 1.0);
    CHECK(std::abs(*s2->kinetic_energy_eV - (photon - kNe2s)) < 1.0);
    // Relative strength: the counts ratio 0.3 put in, within 3 sigma plus 10 % for the
    // tails the cells share (our tolerance).
    REQUIRE(s2->relative_strength);
    INFO("2s/2p = " << *s2->relative_strength << " +- " << *s2->relative_strength_sigma);
    CHECK(std::abs(*s2->relative_strength - 0.3) < 0.03 + 3.0 * *s2->relative_strength_sigma);
    CHECK(*s2->relative_strength_sigma > 0);
  }
}

TEST_CASE("argon: the 3s line is found beside 3p", "[lines]") {
  const TwoLineScan s = two_lines(argon_narrow(), 40.0, kAr3p, kAr3s, 0.2, 500.0, 8);
  PreprocessSummary ps;
  (void)preprocess(s.trace, PreprocessOptions{}, &ps);
  const LineEntry* p3 = find_line(ps.lines, "3p");
  const LineEntry* s3 = find_line(ps.lines, "3s");
  REQUIRE(p3);
  REQUIRE(s3);
  CHECK(p3->reference);
  CHECK(std::abs(*s3->kinetic_energy_eV - (40.0 - kAr3s)) < 1.0);
  INFO("3s/3p = " << *s3->relative_strength << " +- " << *s3->relative_strength_sigma);
  CHECK(std::abs(*s3->relative_strength - 0.2) < 0.02 + 3.0 * *s3->relative_strength_sigma);
  // Ar 2p (Ip ~249 eV) is out of reach of 40 eV photons: not listed.
  CHECK(ps.lines.size() == 2);
}

TEST_CASE("one line alone: 2s not detected, assumed present; without the assumption reported",
          "[lines]") {
  // A false detection of 2s on the streaked 2p line's own tail would call it "detected".
  synthetic::ScanConfig c = neon_wide();
  const synthetic::SyntheticScan sc = synthetic::generate_scan(c, 12);
  PreprocessSummary ps;
  (void)preprocess(sc.trace, PreprocessOptions{}, &ps);
  REQUIRE(ps.lines.size() == 2);
  CHECK(ps.lines[0].name == "2p");
  CHECK(ps.lines[0].source == "detected");
  // The 2s line the photon energy puts on the axis: listed from the gas table (not detected),
  // its strength consistent with 0 (the mirror estimate: within 3 sigma plus 0.03, the
  // few-percent residue of LineOptions::min_relative_strength), and the window cut at it.
  CHECK(ps.lines[1].name == "2s");
  CHECK(ps.lines[1].source == "gas table");
  REQUIRE(ps.lines[1].relative_strength);
  CHECK(std::abs(*ps.lines[1].relative_strength) <
        0.03 + 3.0 * ps.lines[1].relative_strength_sigma.value_or(0.0));
  CHECK(ps.window_source == "reference line");
  CHECK(ps.window_lo_eV >= *ps.lines[1].kinetic_energy_eV - 1e-9);
  CHECK(ps.unseen_lines.empty());
  // Without the assumption: the whole axis, and the 2s line reported as not seen inside the
  // signal's support with an upper limit of its strength.
  PreprocessOptions off;
  off.lines.assume_expected_lines = false;
  (void)preprocess(sc.trace, off, &ps);
  REQUIRE(ps.lines.size() == 1);
  CHECK(ps.window_source.empty());
  REQUIRE(ps.unseen_lines.size() == 1);
  CHECK(ps.unseen_lines[0].name == "2s");
  CHECK(ps.unseen_lines[0].separable);
  CHECK(ps.unseen_lines[0].upper_limit > 0);
  CHECK(ps.unseen_lines[0].upper_limit < 0.1);
}

TEST_CASE("a weak 2s line below detection is assumed present: the 2p pulse stays right",
          "[lines][retrieve]") {
  // 2s at 1 % of the 2p counts (two_lines builds it independently of the detection: the
  // generator's pulse at a photon energy lowered by the threshold difference, NIST ASD).
  // Fitted as XUV spectrum, such a line beats with the 2p spectrum: measured -26 % on the
  // FWHM (docs/validation.md, "Lines that are not seen"). Assumed present (the default), the
  // pulse is within 5 % of the generator's truth (the accuracy target of docs/validation.md);
  // without the assumption the quality check unseen_line_strength fails.
  const TwoLineScan s = two_lines(neon_wide(), 105.0, kNe2p, kNe2s, 0.01, 300.0, 21);
  RetrieveOptions o;
  o.bootstrap = 0;
  const RetrieveOutput out = retrieve(s.trace, o);
  const double fwhm = *out.result.xuv->fwhm_as;
  INFO("FWHM " << fwhm << " as, truth " << s.outer_fwhm_as << " as");
  CHECK(std::abs(fwhm / s.outer_fwhm_as - 1.0) < 0.05);
  const LineEntry* s2 = find_line(out.result.lines, "2s");
  REQUIRE(s2);
  CHECK((s2->source == "gas table" || s2->source == "detected"));

  RetrieveOptions off = o;
  off.preprocess.lines.assume_expected_lines = false;
  const RetrieveOutput bad = retrieve(s.trace, off);
  const QualityCheck* c = nullptr;
  for (const QualityCheck& q : bad.result.quality->checks)
    if (q.name == "unseen_line_strength") c = &q;
  REQUIRE(c);
  CHECK_FALSE(c->pass);
  CHECK_FALSE(bad.result.quality->trusted);
}

TEST_CASE("two equal lines merged by streaking are caught by the unstreaked edge rows", "[lines]") {
  // Argon 3p and 3s of equal counts, 13.5 eV apart (NIST ASD via the gas table), 190 as at 70 eV
  // under 3e12 W/cm^2: streaking (+-8 eV) merges them in the delay-integrated spectrum, whose
  // single peak lies between the lines; the edge rows resolve them. The scan is built by
  // two_lines (independent of the detection). The disagreement must be reported, and it must
  // not be on the same scan with a 3s line of 0.1 (a line the edge rows see but that is
  // assumed present anyway).
  synthetic::ScanConfig c = neon_wide();
  c.gas = "Ar";
  c.xuv.gaussian.transform_limited_fwhm_as = 190.0;
  c.ir.pulse.peak_intensity_Wcm2 = 3e12;
  c.geometry.energy_eV = {20.0, 0.25, 280};
  c.geometry.delay_fs = {-6.0, 0.15, 81};
  const TwoLineScan merged = two_lines(c, 70.0, kAr3p, kAr3s, 1.0, 300.0, 31);
  PreprocessSummary ps;
  (void)preprocess(merged.trace, PreprocessOptions{}, &ps);
  REQUIRE(ps.line_pattern_checked);
  INFO(ps.line_pattern_disagreement);
  CHECK_THAT(ps.line_pattern_disagreement, Catch::Contains("does not resolve"));
  const TwoLineScan weak = two_lines(c, 70.0, kAr3p, kAr3s, 0.1, 300.0, 32);
  (void)preprocess(weak.trace, PreprocessOptions{}, &ps);
  REQUIRE(ps.line_pattern_checked);
  CHECK(ps.line_pattern_disagreement.empty());
}

TEST_CASE("the window keeps the reference line and excludes the second one", "[lines]") {
  // 250 as TL (7.3 eV FWHM) under a 1e12 W/cm^2 IR (streaking +-6 eV): the 2p and 2s lines,
  // 26.9 eV apart, do not overlap at any delay, so a window can hold one without the other.
  synthetic::ScanConfig c = neon_wide();
  c.xuv.gaussian.transform_limited_fwhm_as = 250.0;
  c.ir.pulse.peak_intensity_Wcm2 = 1e12;
  const TwoLineScan s = two_lines(c, 105.0, kNe2p, kNe2s, 0.3, 500.0, 9);
  PreprocessSummary ps;
  const RetrievalProblem pr = preprocess(s.trace, PreprocessOptions{}, &ps);
  REQUIRE(ps.window_source == "reference line");
  // Share of each line's expected counts inside the window (from the generator's truth,
  // not from the detection): 2p >= 99 %, 2s <= 2 % (our tolerance for a window that excludes).
  double in_outer = 0, in_inner = 0;
  for (std::size_t j = 0; j < s.trace.energy_au.size(); ++j) {
    const double w = units::au_to_eV(s.trace.energy_au[j]);
    if (w < ps.window_lo_eV || w > ps.window_hi_eV) continue;
    in_outer += s.outer.col(static_cast<Eigen::Index>(j)).sum();
    in_inner += s.inner.col(static_cast<Eigen::Index>(j)).sum();
  }
  INFO("window " << ps.window_lo_eV << " .. " << ps.window_hi_eV << " eV");
  CHECK(in_outer / s.outer.sum() > 0.99);
  CHECK(in_inner / s.inner.sum() < 0.02);
  CHECK(units::au_to_eV(pr.energy_au.front()) >= ps.window_lo_eV - 1e-9);
  CHECK(units::au_to_eV(pr.energy_au.back()) <= ps.window_hi_eV + 1e-9);
}

TEST_CASE("sidecar lines and energy_window_eV take precedence", "[lines]") {
  TwoLineScan s = two_lines(neon_wide(), 105.0, kNe2p, kNe2s, 0.3, 500.0, 10);
  s.trace.meta.lines = {{"2p", std::nullopt, std::nullopt, ""}, {"2s", 48.5, std::nullopt, ""}};
  s.trace.meta.energy_window_eV = {60.0, 110.0};
  PreprocessSummary ps;
  (void)preprocess(s.trace, PreprocessOptions{}, &ps);
  CHECK(ps.window_source == "sidecar");
  CHECK(ps.window_lo_eV == 60.0);
  const LineEntry* s2 = find_line(ps.lines, "2s");
  REQUIRE(s2);
  CHECK(s2->source == "sidecar");
  CHECK(s2->ionization_energy_eV == 48.5);
  // The option overrides the sidecar.
  PreprocessOptions o;
  o.energy_window_lo_eV = 65.0;
  o.energy_window_hi_eV = 105.0;
  (void)preprocess(s.trace, o, &ps);
  CHECK(ps.window_source == "option");
  CHECK(ps.window_hi_eV == 105.0);
}

TEST_CASE("neon with a 2s line: the 2p pulse is retrieved within 8 %", "[lines][retrieve]") {
  // End to end: 150 as TL at 105 eV with the 2s line at 0.3 of the 2p counts; the FWHM of the
  // retrieved pulse against the generator's truth (our tolerance 8 %, within the 5-10 % band
  // the clean preset reaches in docs/validation.md).
  const TwoLineScan s = two_lines(neon_wide(), 105.0, kNe2p, kNe2s, 0.3, 500.0, 11);
  RetrieveOptions o;
  o.bootstrap = 0;
  o.engine = "ptychographic";
  const RetrieveOutput out = retrieve(s.trace, o);
  REQUIRE(out.result.xuv->fwhm_as);
  INFO("retrieved " << *out.result.xuv->fwhm_as << " as, truth " << s.outer_fwhm_as << " as");
  CHECK(std::abs(*out.result.xuv->fwhm_as / s.outer_fwhm_as - 1.0) < 0.08);
  CHECK(out.result.lines.size() == 2);
}

TEST_CASE("sidecar keys energy_window_eV, saturation_counts and lines are read and validated",
          "[lines][reader]") {
  // The trace contract of DESIGN.md: energy_window_eV = [lo, hi] (finite, lo < hi), lines
  // with "auto" or a number, saturation_counts > 0; bad values name the field.
  sw::test::TempDir dir;
  std::string csv;
  for (int r = 0; r < 4; ++r) {
    for (int c = 0; c < 10; ++c) {
      if (c) csv += ',';
      csv += std::to_string(10 + r + c);
    }
    csv += "\n";
  }
  sw::test::write_text(dir / "s.csv", csv);
  auto sidecar = [&](const std::string& more) {
    sw::test::write_text(dir / "s.json",
                         R"({"streakwright": 1, "image": "s.csv", "layout": "delay_rows",
      "energy_eV": {"first": 40, "step": 1, "count": 10}, "delay_fs": {"first": 0, "step": 0.1, "count": 4},
      "gas": "Ne", "ir_wavelength_nm": 800)" +
                             more + "}");
    return dir / "s.json";
  };
  const Trace t = read_trace(sidecar(R"(, "energy_window_eV": [42.5, 47], "saturation_counts": 4000,
      "lines": [{"name": "2p", "ionization_energy_eV": "auto"}, {"name": "2s", "ionization_energy_eV": 48.47,
                 "relative_strength": 0.3}, {"name": "3p", "gas": "Ar", "ionization_energy_eV": "auto"}])"));
  REQUIRE(t.meta.energy_window_eV.size() == 2);
  CHECK(t.meta.energy_window_eV[0] == 42.5);
  CHECK(t.meta.energy_window_eV[1] == 47.0);
  CHECK(t.meta.saturation_counts == 4000.0);
  REQUIRE(t.meta.lines.size() == 3);
  CHECK_FALSE(t.meta.lines[0].ionization_energy_eV);
  CHECK(t.meta.lines[1].ionization_energy_eV == 48.47);
  CHECK(t.meta.lines[1].relative_strength == 0.3);
  CHECK(t.meta.lines[2].gas == "Ar");
  CHECK(t.meta.extra_json.count("lines") == 0);  // contract keys are not echoed as unknown
  auto fails = [&](const std::string& more, const std::string& field) {
    try {
      (void)read_trace(sidecar(more));
      FAIL("no error for " << more);
    } catch (const Error& e) {
      CHECK_THAT(std::string(e.what()), Catch::Contains(field));
    }
  };
  fails(R"(, "energy_window_eV": [50, 40])", "energy_window_eV");
  fails(R"(, "energy_window_eV": [40])", "energy_window_eV");
  fails(R"(, "energy_window_eV": [40, "x"])", "energy_window_eV[1]");
  fails(R"(, "saturation_counts": -1)", "saturation_counts");
  fails(R"(, "lines": [{"name": "2s"}])", "lines[0].ionization_energy_eV");
  fails(R"(, "lines": [{"name": "2s", "ionization_energy_eV": "guess"}])",
        "lines[0].ionization_energy_eV");
  fails(R"(, "lines": {"name": "2s"})", "lines");
}

TEST_CASE("--energy-window LO:HI is parsed and checked", "[lines]") {
  double lo = 0, hi = 0;
  parse_energy_window("60:110.5", "--energy-window", &lo, &hi);
  CHECK(lo == 60.0);
  CHECK(hi == 110.5);
  for (const char* bad : {"60", "110:60", "a:b", "60:110x", ":", "nan:5"})
    CHECK_THROWS_WITH(parse_energy_window(bad, "--energy-window", &lo, &hi),
                      Catch::Contains("--energy-window"));
}

TEST_CASE("deblending: an overlapping neighbour line is subtracted per delay row", "[lines]") {
  // Neon at 120 eV, 150 as TL, 5e12 W/cm^2: 2p (98.4 eV) is streaked by ~+-15 eV and its band
  // reaches the 2s line (71.5 eV, 0.3 of the 2p counts). The neighbour's estimate is checked
  // against the generator's own 2s counts (an SFA integral, not the momentum-shift template).
  synthetic::ScanConfig c = neon_wide();
  c.ir.pulse.peak_intensity_Wcm2 = 5e12;
  const TwoLineScan s = two_lines(c, 120.0, kNe2p, kNe2s, 0.3, 500.0, 21);
  std::vector<double> W(s.trace.energy_au.size());
  for (std::size_t j = 0; j < W.size(); ++j) W[j] = units::au_to_eV(s.trace.energy_au[j]);
  LineSearch ls;
  LineEntry p2, s2;
  p2.name = "2p";
  p2.kinetic_energy_eV = 120.0 - kNe2p;
  p2.reference = true;
  s2.name = "2s";
  s2.kinetic_energy_eV = 120.0 - kNe2s;
  ls.lines = {p2, s2};
  ls.found = {1, 1};
  ls.reference = 0;
  ls.line_below_eV = ls.line_above_eV = 25.0;
  std::vector<double> str;
  const Eigen::MatrixXd est = deblend_neighbours(ls, W, s.trace.counts, DeblendOptions{}, &str);
  // Scale: the counts ratio 0.3 put in (the template carries the 2p counts), within 10 % (our
  // tolerance: the 2p tail on the 2s far side and the Poisson noise bias it).
  INFO("scale " << str[1]);
  CHECK(str[0] == 0.0);
  CHECK(std::abs(str[1] - 0.3) < 0.03);
  // Over the overlap band (78-90 eV: both lines present), row by row (the streaking moves the
  // lines differently in every row), the subtracted counts match the 2s truth within 10 % of
  // the 2s counts there (our tolerance), and the remainder matches 2p within 5 %.
  double inner = 0, diff = 0, outer = 0, rest = 0;
  for (Eigen::Index i = 0; i < est.rows(); ++i) {
    double row_diff = 0;
    for (std::size_t j = 0; j < W.size(); ++j) {
      if (W[j] < 78.0 || W[j] > 90.0) continue;
      const auto k = static_cast<Eigen::Index>(j);
      inner += s.inner(i, k);
      row_diff += est(i, k) - s.inner(i, k);
      outer += s.outer(i, k);
      rest += s.trace.counts(i, k) - est(i, k);
    }
    diff += std::abs(row_diff);
  }
  INFO("2s in overlap " << inner << ", |estimate - truth| " << diff << "; 2p " << outer
                        << ", remainder " << rest);
  CHECK(diff < 0.1 * inner);
  CHECK(std::abs(rest - outer) < 0.05 * outer);
}

TEST_CASE("a window cut inside the streaked band reports the share of the line beyond it",
          "[lines]") {
  // Argon 3p alone (no 3s in the scan): the window is cut at the expected 3s. The share that
  // preprocess estimates from the line's mirror image is checked against the noise-free counts
  // of the generator (an independent route: the truth of where the line's electrons landed).
  // Our argon scenario: 190 as at 70 eV photons under 3e12 W/cm^2, so that 3p (54 eV) is
  // streaked across the expected 3s (41 eV).
  synthetic::ScanConfig c = argon_narrow();
  c.xuv.gaussian.transform_limited_fwhm_as = 190.0;
  c.ir.pulse.peak_intensity_Wcm2 = 3e12;
  c.geometry.energy_eV = {20.0, 0.2, 400};  // 20-100 eV
  const TwoLineScan s = two_lines(c, 70.0, kAr3p, kAr3s, 0.0, 500.0, 8);
  PreprocessSummary ps;
  (void)preprocess(s.trace, PreprocessOptions{}, &ps);
  REQUIRE(ps.window_source == "reference line");
  double beyond = 0, inside = 0;
  for (Eigen::Index j = 0; j < s.outer.cols(); ++j) {
    const double W = units::au_to_eV(s.trace.energy_au[static_cast<std::size_t>(j)]);
    if (W < ps.window_lo_eV || W > ps.window_hi_eV)
      beyond += s.outer.col(j).sum();
    else
      inside += s.outer.col(j).sum();
  }
  const double truth = beyond / (beyond + inside);
  INFO("window " << ps.window_lo_eV << " .. " << ps.window_hi_eV << " eV: share "
                 << ps.window_cut_share << ", generator " << truth);
  REQUIRE(truth > 0.002);  // the cut is inside the streaked band here
  CHECK(ps.window_cut_share > 0.0);
  CHECK(ps.window_cut_share < 0.2);
  // The mirror image is symmetric about the line centre, the streaked line only nearly so:
  // within a factor 2 of the truth (tolerance our choice; measured 0.0123 for 0.0064, the
  // mirror over-estimates: the sigma term it sets errs on the wide side).
  CHECK(std::abs(ps.window_cut_share - truth) <= std::max(0.005, truth));
}
