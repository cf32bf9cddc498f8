// Generator models of real-scan imperfections (synthetic/): several photoelectron lines and
// two-gas mixtures, photoemission delays, the IR-only low-energy tail with its onset, hot
// pixels, time-of-flight recording (and its round trip through io's reader), long-wavelength
// drivers at water-window energies, short trains. Each check against an expectation computed
// here independently of the generator's code path.
#include <catch2/catch.hpp>

#include <sys/wait.h>

#include <array>
#include <cstdio>

#include <algorithm>
#include <cmath>
#include <fstream>
#include <iterator>
#include <random>
#include <string>
#include <vector>

#include "io/result_io.h"
#include "io/trace_reader.h"
#include "io/trace_writer.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "synthetic/generator.h"
#include "synthetic/noise.h"
#include "synthetic/presets.h"
#include "synthetic/tof_recording.h"
#include "tests/test_support.h"

using namespace sw;
using namespace sw::synthetic;

namespace {

// Field-free (XUV-only, one row) scan of a narrow-band pulse: lines are well separated.
ScanConfig field_free(const std::string& gas, double photon_eV, double tl_as) {
  ScanConfig c = find_preset("neon-xuv-only").config;
  c.gas = gas;
  c.xuv.gaussian.center_eV = photon_eV;
  c.xuv.gaussian.transform_limited_fwhm_as = tl_as;
  c.geometry.energy_eV = {30.0, 0.05, 1200};  // 30..90 eV
  c.noise.poisson = false;
  return c;
}

LineSpec line(const std::string& gas, const std::string& name, double strength, double delay_as) {
  LineSpec l;
  l.gas = gas;
  l.name = name;
  l.relative_strength = strength;
  l.delay_as = delay_as;
  return l;
}

// Centroid (eV) of |a|^2 = density / p over [lo, hi] eV of row 0 of the noise-free density.
double centroid_eV(const SyntheticScan& s, double lo, double hi) {
  double m0 = 0, m1 = 0;
  for (std::size_t j = 0; j < s.trace.energy_au.size(); ++j) {
    const double W = units::au_to_eV(s.trace.energy_au[j]);
    if (W < lo || W > hi) continue;
    const double a2 =
        s.clean(0, static_cast<Eigen::Index>(j)) / std::sqrt(2.0 * s.trace.energy_au[j]);
    m0 += a2;
    m1 += a2 * W;
  }
  return m1 / m0;
}

}  // namespace

TEST_CASE("lines sit at photon energy minus their NIST thresholds", "[imperfections][lines]") {
  // Neon 2p and 2s at 95 eV photons, 600 as TL (spectral FWHM 3.0 eV): lines 27 eV apart.
  ScanConfig c = field_free("Ne", 95.0, 600.0);
  c.lines = {line("", "2p", 1.0, 0.0), line("", "2s", 0.3, 0.0)};
  const SyntheticScan s = generate_scan(c, 1);
  // NIST ASD: Ne I ionization energy 21.564540 eV; Ne II 2s2p6 2S1/2 at 26.9100 eV above the
  // Ne II ground level, so the 2s threshold is 48.4745 eV (from memory of the ASD tables).
  // |a|^2 of a Gaussian spectrum is symmetric about photon energy - Ip.
  CHECK(centroid_eV(s, 95.0 - 21.5645 - 6, 95.0 - 21.5645 + 6) ==
        Approx(95.0 - 21.5645).margin(0.01));
  CHECK(centroid_eV(s, 95.0 - 48.4745 - 6, 95.0 - 48.4745 + 6) ==
        Approx(95.0 - 48.4745).margin(0.01));
  // Truth record: both lines, the first the reference, 2s with its threshold.
  REQUIRE(s.truth.lines.size() == 2);
  CHECK(s.truth.lines[0].reference);
  CHECK(s.truth.lines[0].name == "2p");
  CHECK(s.truth.lines[1].name == "2s");
  CHECK(s.truth.lines[1].gas == "Ne");
  CHECK(s.truth.lines[1].ionization_energy_eV == Approx(48.4745).margin(0.005));
  CHECK(*s.truth.lines[1].kinetic_energy_eV == Approx(95.0 - 48.4745).margin(0.01));
  // Counts ratio = strength x the p factor of counts per unit energy (DESIGN.md "Jacobians":
  // dN/dW = p |a|^2 for a constant dipole): 0.3 sqrt(W_2s / W_2p) for narrow lines.
  const double expected = 0.3 * std::sqrt((95.0 - 48.4745) / (95.0 - 21.5645));
  CHECK(*s.truth.lines[1].relative_strength == Approx(expected).epsilon(0.005));
}

TEST_CASE("a second gas adds its own line (two-gas mixture)", "[imperfections][lines]") {
  // Helium with krypton: NIST ASD first ionization energies He 24.587387 eV, Kr 13.999605 eV
  // (from memory of the ASD table).
  ScanConfig c = field_free("He", 90.0, 700.0);
  c.lines = {line("", "1s", 1.0, 0.0), line("Kr", "4p", 0.4, 0.0)};
  const SyntheticScan s = generate_scan(c, 1);
  CHECK(centroid_eV(s, 90 - 24.5874 - 4, 90 - 24.5874 + 4) == Approx(90 - 24.5874).margin(0.01));
  CHECK(centroid_eV(s, 90 - 13.9996 - 4, 90 - 13.9996 + 4) == Approx(90 - 13.9996).margin(0.01));
  REQUIRE(s.truth.lines.size() == 2);
  CHECK(s.truth.lines[1].gas == "Kr");
  // Unknown lines are named in the error.
  c.lines[1].name = "9z";
  CHECK_THROWS_WITH(generate_scan(c, 1), Catch::Contains("lines[1].name"));
}

TEST_CASE("a photoemission delay shifts the line's streaking trace in delay",
          "[imperfections][lines]") {
  // Delay of photoemission as a shift of the streaking curve (M. Schultze et al., Science 328,
  // 1658 (2010)); DESIGN.md: positive = emitted later, i.e. the delayed line at delay tau is
  // the prompt line at tau + d.
  ScanConfig c = find_preset("neon-150as").config;
  c.noise.poisson = false;
  c.geometry.delay_fs = {-3.0, 0.1, 41};
  c.lines = {line("", "2p", 1.0, 0.0)};
  const SyntheticScan prompt = generate_scan(c, 1);
  c.lines[0].delay_as = 300.0;  // three delay steps
  const SyntheticScan late = generate_scan(c, 1);
  const double scale = prompt.clean.maxCoeff();
  for (Eigen::Index i = 0; i + 3 < prompt.clean.rows(); ++i)
    CHECK((late.clean.row(i) - prompt.clean.row(i + 3)).cwiseAbs().maxCoeff() / scale < 1e-9);
  CHECK((late.clean.row(10) - prompt.clean.row(10)).cwiseAbs().maxCoeff() / scale > 1e-3);
  // The delay axis is the nominal one in both.
  CHECK(late.trace.delay_au == prompt.trace.delay_au);
}

TEST_CASE("IR-only low-energy tail: onset, decay, the same in every row",
          "[imperfections][noise]") {
  // The documented model (synthetic/noise.h): 0 below the onset, the set level at the onset,
  // 1/e of it one decay energy above (definition of an exponential).
  const Background b(0.0, 300.0, 8.0, 3.0);
  CHECK(b.level(2.99) == 0.0);
  CHECK(b.level(3.0) == Approx(300.0));
  CHECK(b.level(11.0) == Approx(300.0 / std::exp(1.0)));
  ScanConfig c = find_preset("neon-150as").config;
  c.noise.poisson = false;
  c.geometry.energy_eV = {1.0, 0.25, 400};
  c.noise.background_exp_counts = 300.0;
  c.noise.background_exp_onset_eV = 3.0;
  c.noise.background_exp_decay_eV = 8.0;
  const SyntheticScan s = generate_scan(c, 1);
  // Below 25 eV the XUV signal (at 73 eV, streaked by < 16 eV, spectral rms 5 eV) is below
  // 1e-9 of its peak: every row holds the tail alone, identical, and equal to the formula.
  for (std::size_t j = 0; j < s.trace.energy_au.size(); ++j) {
    const double W = units::au_to_eV(s.trace.energy_au[j]);
    if (W > 25) break;
    const double expect = W < 3.0 ? 0.0 : 300.0 * std::exp(-(W - 3.0) / 8.0);
    const auto col = s.trace.counts.col(static_cast<Eigen::Index>(j));
    CHECK(col.maxCoeff() - col.minCoeff() < 1e-6);
    CHECK(col(0) == Approx(expect).margin(1e-6));
  }
}

TEST_CASE("hot pixels: N isolated pixels at 20-200 x their neighbours", "[imperfections][noise]") {
  ScanConfig c = find_preset("neon-150as").config;
  c.noise.hot_pixels = 15;
  const SyntheticScan s = generate_scan(c, 7);
  REQUIRE(s.hot_pixels.size() == 15);
  // Count, independently of the drawn list, the pixels that stand >= 19.5 x above the mean of
  // their 8 neighbours (and above 19.5 counts): a Poisson count does that with probability
  // < 1e-15 at any mean (common practice: outlier test against the local mean).
  const Eigen::MatrixXd& m = s.trace.counts;
  int found = 0;
  for (Eigen::Index i = 1; i + 1 < m.rows(); ++i)
    for (Eigen::Index j = 1; j + 1 < m.cols(); ++j) {
      const double mean = (m.block(i - 1, j - 1, 3, 3).sum() - m(i, j)) / 8.0;
      if (m(i, j) >= 19.5 * std::max(1.0, mean)) ++found;
    }
  int interior = 0;
  for (const HotPixel& h : s.hot_pixels) {
    if (h.row > 0 && h.col > 0 && h.row + 1 < m.rows() && h.col + 1 < m.cols()) ++interior;
    CHECK(h.factor >= 20.0);
    CHECK(h.factor <= 200.0);
  }
  CHECK(found == interior);
  for (std::size_t a = 0; a < s.hot_pixels.size(); ++a)
    for (std::size_t b = a + 1; b < s.hot_pixels.size(); ++b)
      CHECK(std::max(std::abs(s.hot_pixels[a].row - s.hot_pixels[b].row),
                     std::abs(s.hot_pixels[a].col - s.hot_pixels[b].col)) > 1);
  // Switching hot pixels on changes no other pixel (own random sub-stream).
  c.noise.hot_pixels = 0;
  const SyntheticScan plain = generate_scan(c, 7);
  Eigen::MatrixXd d = (s.trace.counts - plain.trace.counts).cwiseAbs();
  for (const HotPixel& h : s.hot_pixels) d(h.row, h.col) = 0;
  CHECK(d.maxCoeff() == 0.0);
}

TEST_CASE("time-of-flight: flight times from CODATA, counts conserved", "[imperfections][tof]") {
  TofConfig t;
  t.length_m = 1.0;
  // 100 eV electron: v = sqrt(2 E / m_e) = 5.930970e6 m/s with CODATA 2018 m_e and e, so 1 m
  // takes 168.6065 ns (hand calculation).
  CHECK(tof_time_ns(100.0, t) == Approx(168.6065).margin(1e-3));
  CHECK(tof_energy_eV(168.6065, t) == Approx(100.0).epsilon(1e-5));
  t.t0_ns = 5.0;
  t.energy_offset_eV = 2.0;
  CHECK(tof_time_ns(102.0, t) == Approx(173.6065).margin(1e-3));

  // Count conservation of the rebinning on random counts (DESIGN.md "Jacobians").
  std::mt19937_64 g(3);
  std::uniform_real_distribution<double> u(0.0, 100.0);
  std::vector<double> E(500);
  for (std::size_t j = 0; j < E.size(); ++j) E[j] = 20.0 + 0.2 * static_cast<double>(j);
  Eigen::MatrixXd m(4, 500);
  for (Eigen::Index i = 0; i < m.rows(); ++i)
    for (Eigen::Index j = 0; j < m.cols(); ++j) m(i, j) = u(g);
  for (int bins : {50, 500, 2000}) {
    t.bins = bins;
    const TofRecorder r(t, E);
    const Eigen::MatrixXd out = r.rebin(m);
    REQUIRE(out.cols() == bins);
    for (Eigen::Index i = 0; i < m.rows(); ++i)
      CHECK(std::abs(out.row(i).sum() - m.row(i).sum()) / m.row(i).sum() < 1e-9);
    // Uniform time bins, descending with ascending column energy.
    for (std::size_t k = 1; k < r.tof_ns().size(); ++k) {
      CHECK(r.tof_ns()[k] < r.tof_ns()[k - 1]);
      CHECK(r.energy_eV()[k] > r.energy_eV()[k - 1]);
    }
  }
}

TEST_CASE("time-of-flight scan: written, read back by io, counts and line conserved",
          "[imperfections][tof]") {
  test::TempDir dir("tofgen");
  ScanConfig c = find_preset("neon-150as").config;
  c.noise.poisson = false;
  c.geometry.energy_eV = {40.0, 0.05, 1500};  // 40..115 eV
  c.geometry.delay_fs = {-1.0, 0.5, 5};
  ScanConfig energy = c;
  c.tof.length_m = 1.0;
  c.tof.bins = 600;
  const SyntheticScan e = generate_scan(energy, 1);
  const SyntheticScan s = generate_scan(c, 1);
  REQUIRE(s.tof);
  REQUIRE(s.trace.counts.cols() == 600);
  TraceWriteOptions wo;
  wo.tof = TraceTofAxis{s.tof->tof_ns, s.tof->length_m, s.tof->t0_ns, s.tof->energy_offset_eV};
  Trace t = s.trace;
  const TraceFiles f = write_trace(t, dir / "tof.json", TraceFormat::kCsv, wo);
  const Trace back = read_trace(f.sidecar);
  // io's reader (io/tof_calibration.cpp, written separately) returns the energy range of the
  // generator's energy axis (bin edges 39.975 and 114.975 eV) and every count.
  REQUIRE(back.num_energies() == 600);
  const double step = units::au_to_eV(back.energy_au[1] - back.energy_au[0]);
  CHECK(units::au_to_eV(back.energy_au.front()) - step / 2 == Approx(39.975).margin(1e-6));
  CHECK(units::au_to_eV(back.energy_au.back()) + step / 2 == Approx(114.975).margin(1e-6));
  for (Eigen::Index i = 0; i < back.counts.rows(); ++i)
    CHECK(std::abs(back.counts.row(i).sum() - s.trace.counts.row(i).sum()) /
              s.trace.counts.row(i).sum() <
          1e-9);
  // The streaked line keeps its energy centroid through energy -> time -> energy (within one
  // output bin, 0.125 eV): scale-free comparison with the energy-recorded scan.
  auto centroid = [](const Trace& tr, Eigen::Index row) {
    double m0 = 0, m1 = 0;
    for (std::size_t j = 0; j < tr.energy_au.size(); ++j) {
      m0 += tr.counts(row, static_cast<Eigen::Index>(j));
      m1 += tr.counts(row, static_cast<Eigen::Index>(j)) * units::au_to_eV(tr.energy_au[j]);
    }
    return m1 / m0;
  };
  for (Eigen::Index i = 0; i < 5; ++i)
    CHECK(centroid(back, i) == Approx(centroid(e.trace, i)).margin(0.02));
  // Sidecar: flight-time axis and calibration block, no energy axis.
  const std::string text = [&] {
    std::ifstream in(f.sidecar);
    return std::string(std::istreambuf_iterator<char>(in), {});
  }();
  CHECK(text.find("\"tof_ns\"") != std::string::npos);
  CHECK(text.find("\"calibration\"") != std::string::npos);
  CHECK(text.find("\"energy_eV\"") == std::string::npos);
}

TEST_CASE("time-of-flight background is constant per time bin", "[imperfections][tof]") {
  ScanConfig c = find_preset("neon-150as").config;
  c.noise.poisson = false;
  c.geometry.energy_eV = {20.0, 0.1, 1000};  // 20..120 eV; no signal below 40 eV
  c.geometry.delay_fs = {-1.0, 1.0, 3};
  c.tof.length_m = 0.6;
  c.tof.bins = 400;
  c.noise.background_counts = 2.0;
  const SyntheticScan s = generate_scan(c, 1);
  for (std::size_t k = 0; k < s.trace.energy_au.size(); ++k) {
    if (units::au_to_eV(s.trace.energy_au[k]) > 35) break;
    for (Eigen::Index i = 0; i < 3; ++i)
      CHECK(s.trace.counts(i, static_cast<Eigen::Index>(k)) == Approx(2.0).margin(1e-9));
  }
}

TEST_CASE("1.8 um driver at 300 eV: classical streaking amplitude p0 A0", "[imperfections]") {
  // Classical streaking (DESIGN.md "Pitfalls"): W = (p0 - A)^2 / 2, so the centroid swings by
  // +- p0 A0 about W0 + A0^2/2; half the peak-to-peak swing is p0 A0.
  ScanConfig c = find_preset("neon-150as").config;
  c.gas = "He";
  c.xuv.gaussian.center_eV = 300.0;
  c.xuv.gaussian.transform_limited_fwhm_as = 100.0;
  c.ir.pulse = GaussianIrPulse{1800.0, 15.0, 1e12, 0.0, 0.0, 0.0};
  c.geometry.energy_eV = {205.0, 0.45, 310};
  c.geometry.delay_fs = {-3.0, 0.05, 121};
  c.noise.poisson = false;
  const SyntheticScan s = generate_scan(c, 1);
  CHECK(s.truth.warnings.empty());
  std::vector<double> cen;
  for (Eigen::Index i = 0; i < s.clean.rows(); ++i) {
    double m0 = 0, m1 = 0;
    for (std::size_t j = 0; j < s.trace.energy_au.size(); ++j) {
      m0 += s.clean(i, static_cast<Eigen::Index>(j));
      m1 += s.clean(i, static_cast<Eigen::Index>(j)) * s.trace.energy_au[j];
    }
    cen.push_back(m1 / m0);
  }
  const double swing =
      0.5 * (*std::max_element(cen.begin(), cen.end()) - *std::min_element(cen.begin(), cen.end()));
  const double p0 = std::sqrt(2.0 * units::eV_to_au(300.0 - 24.5874));
  const double A0 = *s.truth.ir->peak_vector_potential_au;
  // A0 = E0 / omega with E0 from 1e12 W/cm^2 (I = E0^2 x 3.51e16 W/cm^2 per a.u.^2) and
  // omega = 45.5634 / 1800 a.u.: 0.2110 (hand calculation, atomic-unit conversions from
  // CODATA 2018); the envelope at the quarter period lowers the peak by < 2 %.
  CHECK(A0 == Approx(0.2110).epsilon(0.02));
  // The 100 as XUV averages A over its duration (cos(omega t) at 50 as: 0.9997); the p
  // weighting of the spectrum shifts the centroid by < 0.5 %.
  CHECK(swing == Approx(p0 * A0).epsilon(0.01));
}

TEST_CASE("a train of three bursts has three comparable bursts", "[imperfections]") {
  ScanConfig c = find_preset("neon-150as").config;
  c.xuv.train.burst = c.xuv.gaussian;
  c.xuv.train.burst.transform_limited_fwhm_as = 200.0;
  c.xuv.train.driver_wavelength_nm = 800.0;
  c.xuv.train.train_fwhm_fs = 4.0;
  c.xuv.train.max_bursts = 3;
  c.xuv.kind = XuvKind::kTrain;
  c.geometry.delay_fs = {-1.0, 1.0, 3};
  const SyntheticScan s = generate_scan(c, 1);
  // Local maxima of |E(t)|^2 above half the peak: bursts at 0 and +-T/2 = +-1.334 fs with the
  // envelope exp(-4 ln2 (T/2)^2 / FWHM^2) = 0.73 of the centre (arithmetic).
  const auto I = s.xuv.intensity();
  const double peak = *std::max_element(I.begin(), I.end());
  int bursts = 0;
  for (std::size_t k = 1; k + 1 < I.size(); ++k)
    if (I[k] >= 0.5 * peak && I[k] >= I[k - 1] && I[k] > I[k + 1]) ++bursts;
  CHECK(bursts == 3);
  CHECK(s.truth.verdict->pulse_class == PulseClass::kTrain);
}

TEST_CASE("simulate --config reads lines and tof keys and writes a flight-time scan",
          "[imperfections][cli]") {
  test::TempDir dir("gencfg");
  test::write_text(
      dir / "scan.yaml",
      "preset: neon-150as\n"
      "energy_eV: {first: 40, step: 0.1, count: 750}\n"
      "delay_fs: {first: -1, step: 0.5, count: 5}\n"
      "lines: [{name: \"2p\"}, {name: \"2s\", relative_strength: 0.3, delay_as: 12}]\n"
      "tof: {length_m: 1.0, t0_ns: 2, bins: 300}\n"
      "noise: {hot_pixels: 2, background_exp_counts: 5, background_exp_onset_eV: 3}\n");
  const test::CliRun run = test::run_cli("simulate --quiet --config " + (dir / "scan.yaml") +
                                         " --name s --out " + dir.path.string());
  INFO(run.out);
  REQUIRE(run.code == 0);
  const Trace t = read_trace(dir / "s.json");
  CHECK(t.num_energies() == 300);
  CHECK(!t.meta.calibration.empty());
  const AnalysisResult truth = read_result_json(dir / "s.truth.json");
  REQUIRE(truth.lines.size() == 2);
  CHECK(truth.lines[1].name == "2s");
  CHECK(*truth.lines[1].relative_delay_as == Approx(12.0));
  // An unknown key of a line is named. (Line names that start with a digit are quoted in
  // YAML: OpenCV's parser reads 2p as a malformed number.)
  test::write_text(dir / "bad.yaml", "preset: neon-150as\nlines: [{name: \"2p\", strenght: 1}]\n");
  const test::CliRun bad = test::run_cli("simulate --quiet --config " + (dir / "bad.yaml") +
                                         " --out " + dir.path.string());
  CHECK(bad.code == 3);
  CHECK(bad.out.find("lines[0].strenght") != std::string::npos);
}
