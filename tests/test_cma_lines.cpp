// Two photoelectron lines fitted jointly in the ptychographic (CMA) engine: one incoherent
// exit-wave mode per line (LineMode, retrieval/engines/cma_problem.h; the engine's
// "joint_lines" setting). The scans come from the direct-quadrature generator of synthetic/
// with the two-line targets of the line-delay validation (tests/validation/two_line_targets.h):
// the generator evaluates each line with the full momentum dependence and inserts the second
// line's delay itself, so its inserted delay and its XUV are an independent reference for the
// engine's FFT-based CMA model. Also: the single-line path bit for bit, one mode's projection
// against the single-line projection, and the hook in retrieve's joint-lines step
// (retrieval/analysis/multi_line_fit.h) with a recording runner.
#include <catch2/catch.hpp>

#include <cmath>

#include "retrieval/analysis/line_delays.h"
#include "retrieval/analysis/multi_line_fit.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/cma_problem.h"
#include "retrieval/engines/engine.h"
#include "retrieval/physics/pulse_metrics.h"
#include "retrieval/preprocess/preprocess.h"
#include "synthetic/generator.h"
#include "tests/validation/two_line_targets.h"

using namespace sw;

namespace {

struct JointCma {
  double delay_as = NAN, strength = NAN, counts_ratio = NAN;
  double fwhm_as = 0, truth_fwhm_as = 0, truth_strength = 0;
  double G = 0, floor = 0, seconds = 0;
  int iterations = 0;
};

// CMA options as retrieve() sets them (retrieval/analysis/retrieve.cpp): one thread, the
// spectrum's centroid only when no field-free spectrum was measured.
EngineOptions cma_options(const PreprocessSummary& ps, unsigned long long seed) {
  EngineOptions eo;
  eo.seed = seed;
  eo.threads = 1;
  if (!ps.field_free_measured) eo.settings.set_spectrum_constraint(CmaSpectrum::kCentroid);
  return eo;
}

// The joint problem of retrieval/analysis/multi_line_fit.h (the window of the joint fit) with
// every non-reference line found, started at delay 0 and strength s0.
JointLineProblem joint_problem(const Trace& trace, const RetrievalProblem& single,
                               const PreprocessSummary& ps, double s0) {
  std::vector<char> joint(ps.lines.size(), 0);
  std::vector<double> delay(ps.lines.size(), 0.0), strength(ps.lines.size(), s0);
  for (std::size_t k = 0; k < ps.lines.size(); ++k) joint[k] = ps.lines[k].reference ? 0 : 1;
  return joint_line_problem(trace, PreprocessOptions{}, single, ps, ps.lines, joint, delay,
                            strength);
}

// A neon two-line scan (2p reference, 2s at `strength` and `delay_as`) through the single-line
// CMA, then the joint problem of retrieval/analysis/multi_line_fit.h (the window of the joint
// fit) and the ptychographic engine on it from the single-line result. The lines' start: delay 0
// and strength 0.5 (not the centre-of-energy values, so the fit has to move them).
JointCma run_joint(double delay_as, double strength, bool poisson, double peak, unsigned seed,
                   const std::string& target = "Ne") {
  synthetic::ScanConfig c = validation::two_line_target(target);
  c.lines[1].delay_as = delay_as;
  c.lines[1].relative_strength = strength;
  c.noise.peak_counts = peak;
  c.noise.poisson = poisson;
  const synthetic::SyntheticScan s = synthetic::generate_scan(c, seed);
  JointCma out;
  out.truth_fwhm_as = *s.truth.xuv->fwhm_as;
  for (const LineEntry& l : s.truth.lines)
    if (!l.reference && l.relative_strength) out.truth_strength = *l.relative_strength;
  PreprocessSummary ps;
  const RetrievalProblem single = preprocess(s.trace, PreprocessOptions{}, &ps);
  EngineOptions eo = cma_options(ps, seed);
  const Reconstruction sr = run_engine(*make_engine("ptychographic"), single, eo);
  const JointLineProblem jp = joint_problem(s.trace, single, ps, 0.5);
  REQUIRE(jp.ok);
  eo.initial_xuv = sr.xuv;
  eo.initial_ir = sr.ir;
  const Reconstruction r = run_engine(*make_engine("ptychographic"), jp.problem, eo);
  const JointLineValues v = joint_line_values(r, 1);
  out.delay_as = v.delay_as[0];
  out.strength = v.dipole_strength[0];
  out.counts_ratio = v.strength[0];
  out.fwhm_as = units::au_to_as(intensity_fwhm(r.xuv));
  out.G = r.trace_error;
  out.floor = r.noise_floor_trace_error;
  out.seconds = r.seconds;
  out.iterations = r.iterations;
  return out;
}

}  // namespace

// Tolerances. Noise-free: 1 as, twice the largest error of the joint CMA on these two scans
// (0.44 as; our choice for a regression bound: what remains is the CMA's model error against the
// generator's full-momentum quadrature). Poisson at 300 peak counts: 4.5 as, 3 sigma with sigma
// = 1.5 as, the largest delay sigma of neon strength-0.3 rows at 300 counts in
// docs/validation.md (joint fit and centre of energy, 0.9-1.5 as). XUV FWHM: 5 % of the
// generator's truth, the pulse target of issue 14 (docs/validation.md).
TEST_CASE("joint CMA: noise-free neon 2s/2p gives the inserted delays and the pulse",
          "[cma][lines]") {
  for (const double inserted : {-50.0, 20.0}) {
    const JointCma j = run_joint(inserted, 0.3, false, 1000, 3);
    INFO("inserted " << inserted << " as: " << j.delay_as << " as, strength " << j.strength
                     << " (counts ratio " << j.counts_ratio << ", truth " << j.truth_strength
                     << "), FWHM " << j.fwhm_as << " / " << j.truth_fwhm_as << " as, G " << j.G
                     << ", " << j.iterations << " iterations");
    CHECK(std::abs(j.delay_as - inserted) < 1.0);
    CHECK(std::abs(j.fwhm_as / j.truth_fwhm_as - 1.0) < 0.05);
    // The ratio of modelled counts estimates the generator's counts ratio (2 %: our choice,
    // the CMA's dipole is constant over each line).
    CHECK(j.counts_ratio == Approx(j.truth_strength).epsilon(0.02));
  }
}

TEST_CASE("joint CMA: Poisson neon 2s/2p at 300 peak counts", "[cma][lines]") {
  for (const double inserted : {-50.0, 20.0}) {
    const JointCma j = run_joint(inserted, 0.3, true, 300, 5);
    INFO("inserted " << inserted << " as: " << j.delay_as << " as, FWHM " << j.fwhm_as << " / "
                     << j.truth_fwhm_as << " as, G " << j.G << " (floor " << j.floor << ")");
    CHECK(std::abs(j.delay_as - inserted) < 4.5);
    CHECK(std::abs(j.fwhm_as / j.truth_fwhm_as - 1.0) < 0.05);
  }
}

TEST_CASE("joint CMA: a single-line problem runs the single-line path unchanged", "[cma][lines]") {
  synthetic::ScanConfig c = validation::two_line_target("Ne");
  c.lines[1].delay_as = 20.0;
  c.noise.peak_counts = 300;
  const synthetic::SyntheticScan s = synthetic::generate_scan(c, 9);
  PreprocessSummary ps;
  const RetrievalProblem single = preprocess(s.trace, PreprocessOptions{}, &ps);
  REQUIRE(single.extra_lines.empty());
  EngineOptions on = cma_options(ps, 9), off = on;
  off.settings.ptychographic.joint_lines = false;
  REQUIRE(on.settings.ptychographic.joint_lines);
  on.max_iterations = off.max_iterations = 60;
  const Reconstruction a = run_engine(*make_engine("ptychographic"), single, on);
  const Reconstruction b = run_engine(*make_engine("ptychographic"), single, off);
  // Bit for bit: the same envelope, trace error and iterations.
  CHECK(a.iterations == b.iterations);
  CHECK(a.trace_error == b.trace_error);
  CHECK(a.xuv.envelope() == b.xuv.envelope());
  // A joint problem with the setting off is the same problem without its extra lines.
  const JointLineProblem jp = joint_problem(s.trace, single, ps, 0.3);
  REQUIRE(jp.ok);
  RetrievalProblem bare = jp.problem;
  bare.extra_lines.clear();
  const Reconstruction c1 = run_engine(*make_engine("ptychographic"), jp.problem, off);
  const Reconstruction c2 = run_engine(*make_engine("ptychographic"), bare, off);
  CHECK(c1.trace_error == c2.trace_error);
  CHECK(c1.xuv.envelope() == c2.xuv.envelope());
}

TEST_CASE("joint CMA: the projection of one mode is the single-line projection", "[cma][lines]") {
  // Fast path against the reference path (STYLE.md): project_modes() with one mode and
  // project() on the same exit-wave spectrum, Poisson and amplitude projections.
  synthetic::ScanConfig c = validation::two_line_target("Ne");
  c.noise.peak_counts = 300;
  const synthetic::SyntheticScan s = synthetic::generate_scan(c, 4);
  PreprocessSummary ps;
  const RetrievalProblem p = preprocess(s.trace, PreprocessOptions{}, &ps);
  for (const CmaProjection proj : {CmaProjection::kPoisson, CmaProjection::kAmplitude}) {
    CmaSettings cs;
    cs.projection = proj;
    const CmaProblem cma(p, cs, "test");
    const std::size_t n = cma.samples();
    std::vector<CVec> modes(1, CVec(n));
    for (std::size_t k = 0; k < n; ++k)
      modes[0][k] = std::polar(1.0 + 0.5 * std::sin(0.1 * static_cast<double>(k)),
                               0.3 * static_cast<double>(k));
    CVec one = modes[0];
    std::vector<double> scratch(cma.scratch_size());
    ErrorSums s1, s2;
    cma.project(7, one.data(), s1, scratch.data());
    cma.project_modes(7, modes, 1, s2, scratch.data());
    double worst = 0.0;
    for (std::size_t k = 0; k < n; ++k) worst = std::max(worst, std::abs(one[k] - modes[0][k]));
    CHECK(worst <= 1e-12);
    CHECK(s1.im == Approx(s2.im).epsilon(1e-12));
    CHECK(s1.mm == Approx(s2.mm).epsilon(1e-12));
  }
}

TEST_CASE("joint lines in retrieve's chain: the CMA stage starts the joint full model",
          "[cma][lines]") {
  // A recording runner in place of the engines: the joint CMA stage runs on the joint problem
  // from the single-line result, and the joint full model gets its XUV, IR, delay and strength.
  synthetic::ScanConfig c = validation::two_line_target("Ne");
  c.lines[1].delay_as = -50.0;
  c.noise.peak_counts = 300;
  const synthetic::SyntheticScan s = synthetic::generate_scan(c, 6);
  PreprocessSummary ps;
  const RetrievalProblem single = preprocess(s.trace, PreprocessOptions{}, &ps);
  Reconstruction single_rec;
  single_rec.xuv = XuvField(single.grid, 4.0, CVec(single.grid.size(), cdouble(1.0, 0.0)));
  const XuvField cma_xuv(single.grid, 4.0, CVec(single.grid.size(), cdouble(0.5, 0.0)));
  std::vector<std::string> engines;
  std::vector<double> start_delay_as, start_strength;
  bool full_from_cma = false;
  const EngineRunner runner = [&](const RetrievalProblem& p, const std::string& engine,
                                  const EngineOptions& o, const std::string&) {
    engines.push_back(engine);
    REQUIRE(p.extra_lines.size() == 1);
    start_delay_as.push_back(units::au_to_as(p.extra_lines[0].delay_au));
    start_strength.push_back(p.extra_lines[0].strength);
    Reconstruction r;
    r.engine = engine;
    r.settings = {{"joint_line.0.delay_as", engine == "ptychographic" ? "-47.5" : "-48.5"},
                  {"joint_line.0.strength", "0.29"},
                  {"joint_line.0.counts_ratio", "0.25"}};
    if (engine == "ptychographic") {
      CHECK(o.initial_xuv->envelope() == single_rec.xuv.envelope());
      r.xuv = cma_xuv;
    } else {
      full_from_cma = o.initial_xuv && o.initial_xuv->envelope() == cma_xuv.envelope();
    }
    return r;
  };
  LineDelayOptions lo;
  lo.bootstrap = 4;
  EngineOptions cma = cma_options(ps, 1), full = cma;
  const JointLineStep step = joint_line_estimate(s.trace, PreprocessOptions{}, lo, single, ps,
                                                 single_rec, full, runner, &cma);
  REQUIRE(step.used);
  REQUIRE(engines == std::vector<std::string>{"ptychographic", "full-model"});
  CHECK(full_from_cma);
  CHECK(start_delay_as[1] == Approx(-47.5).margin(1e-9));  // the CMA's delay and strength
  CHECK(start_strength[1] == Approx(0.29).margin(1e-12));
  REQUIRE(step.cma_reconstruction);
  CHECK(step.values.delay_as[0] == Approx(-48.5).margin(1e-9));
  // With joint_lines off the joint full model starts from the single-line result directly.
  engines.clear();
  cma.settings.ptychographic.joint_lines = false;
  (void)joint_line_estimate(s.trace, PreprocessOptions{}, lo, single, ps, single_rec, full, runner,
                            &cma);
  CHECK(engines == std::vector<std::string>{"full-model"});
}
