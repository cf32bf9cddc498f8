// The "projections" engine: PCGPA (Kane, IEEE JSTQE 4, 278 (1998); for streaking Mairesse and
// Quere, PRA 71, 011401 (2005)) on a matched delay grid and LSGPA (Gagnon, Goulielmakis and
// Yakovlev, Appl. Phys. B 92, 25 (2008)) on any delay axis, on synthetic traces with known
// truth (tests/cma_test_problem.h).
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>

#include "retrieval/core/error.h"
#include "tests/cma_test_problem.h"

using namespace sw;
using namespace sw::testing;

namespace {

std::string setting(const Reconstruction& r, const std::string& key) {
  for (const auto& [k, v] : r.settings)
    if (k == key) return v;
  return "";
}

}  // namespace

TEST_CASE("projections: LSGPA on the standard delay axis, both chirp signs", "[projections]") {
  // 0.1 fs delay steps are not a multiple of the 16 as grid step: auto picks LSGPA.
  for (const double gdd : {0.0, 3000.0, -3000.0}) {
    INFO("GDD " << gdd << " as^2");
    const Case c = make_case({.xuv = {.gdd_as2 = gdd}});
    const Reconstruction r = retrieve(c, "projections", noise_free_options());
    CHECK(setting(r, "mode") == "lsgpa");
    // Modulus replacement is least squares on sqrt(I): Gaussian amplitude errors, not Poisson
    // counts (Thibault and Guizar-Sicairos, New J. Phys. 14, 063004 (2012)).
    CHECK(r.noise_model == "gaussian");
    check_truth(c, r, 0.05);
    CHECK(r.converged());
    CHECK(r.trace_error < 0.1 * r.history.front().trace_error);
    CHECK(r.trace_error < 1e-3);
  }
}

TEST_CASE("projections: PCGPA on a matched delay grid", "[projections]") {
  // 121 delays spaced by 3 grid steps (48 as): every exit wave is an exact shift of the gate.
  const Case c = make_case({.xuv = {.gdd_as2 = 3000}, .matched_ratio = 3});
  const Reconstruction r = retrieve(c, "projections", noise_free_options());
  CHECK(setting(r, "mode") == "pcgpa");
  CHECK(setting(r, "gate_exact_shifts") == "yes");
  check_truth(c, r, 0.05);
  CHECK(r.converged());
  CHECK(r.trace_error < 1e-3);
  // LSGPA forced on the same data agrees.
  EngineOptions o = noise_free_options();
  o.settings.projections.mode = "lsgpa";
  const Reconstruction l = retrieve(c, "projections", o);
  CHECK(setting(l, "mode") == "lsgpa");
  check_truth(c, l, 0.05);
}

TEST_CASE("projections: PCGPA refuses an unmatched delay axis", "[projections]") {
  const Case c = make_case(CaseSpec{});
  EngineOptions o;
  o.settings.projections.mode = "pcgpa";
  try {
    retrieve(c, "projections", o);
    FAIL("pcgpa accepted an unmatched grid");
  } catch (const Error& e) {
    CHECK(e.kind() == ErrorKind::kUsage);
    CHECK(std::string(e.what()).find("mode = pcgpa") != std::string::npos);
  }
  o.settings.projections.mode = "fast";
  CHECK_THROWS_AS(retrieve(c, "projections", o), Error);
  // The text form of the same word is refused where the text is read.
  EngineSettings text;
  CHECK_THROWS_WITH(apply_engine_option_text("projections", {{"mode", "fast"}}, &text),
                    Catch::Contains("projections: engine option mode = 'fast'"));
}

TEST_CASE("projections: LSGPA on a jittered delay axis", "[projections]") {
  const Case c = make_case({.xuv = {.gdd_as2 = -3000}, .jitter = 0.4});
  const Reconstruction r = retrieve(c, "projections", noise_free_options());
  CHECK(setting(r, "mode") == "lsgpa");
  check_truth(c, r, 0.05);
  CHECK(r.converged());
  // The fields reproduce the trace through sw::ForwardModel (independent evaluation path).
  CHECK(forward_model_error(c, r, units::fs_to_au(5.0)) < 3e-3);
}

TEST_CASE("projections: Poisson noise at 100 counts at the peak", "[projections][slow]") {
  for (const double gdd : {0.0, -3000.0}) {
    INFO("GDD " << gdd << " as^2");
    const Case c = make_case(poisson_100_spec(gdd));
    const Reconstruction r = retrieve_checked(c, "projections");
    CHECK(r.trace_error < 1.05 * r.noise_floor_trace_error);
    // The two CMA engines agree on the same noisy data to 3 %.
    const Reconstruction p = retrieve(c, "ptychographic");
    CHECK(std::abs(metrics(p.xuv, p.ir).fwhm_as / metrics(r.xuv, r.ir).fwhm_as - 1) < 0.03);
  }
}

TEST_CASE("projections: two threads give the single-thread answer", "[projections]") {
  const Case c = make_case({.xuv = {.gdd_as2 = 3000}, .jitter = 0.2});
  EngineOptions o;
  o.max_iterations = 30;
  const Reconstruction one = retrieve(c, "projections", o);
  o.threads = 2;
  const Reconstruction two = retrieve(c, "projections", o);
  // Only the order of the floating-point sums over delays differs.
  CHECK(two.trace_error == Approx(one.trace_error).epsilon(1e-6));
  CHECK(metrics(two.xuv, two.ir).fwhm_as == Approx(metrics(one.xuv, one.ir).fwhm_as).epsilon(1e-6));
}

TEST_CASE("both CMA engines on the standard cases (the engines' report table)",
          "[projections][slow]") {
  // Prints the numbers quoted in the engines' report and holds every row to check_truth's
  // tolerances (cma_test_problem.h: 5 % on FWHM and A0, chirp sign and 10 % on GDD).
  std::printf("%-14s %-22s %9s %9s %9s %9s %8s %8s %6s %7s %s\n", "engine", "case", "FWHM", "truth",
              "GDD", "truth", "A0", "truth", "iter", "sec", "termination");
  struct Row {
    const char* name;
    CaseSpec spec;
  };
  std::vector<Row> rows;
  for (double g : {0.0, 3000.0, -3000.0})
    rows.push_back({g == 0 ? "TL" : (g > 0 ? "GDD +3000" : "GDD -3000"), {.xuv = {.gdd_as2 = g}}});
  rows.push_back({"GDD +3000 jitter", {.xuv = {.gdd_as2 = 3000}, .jitter = 0.4}});
  for (double g : {0.0, 3000.0}) {
    rows.push_back({g == 0 ? "TL Poisson 100" : "GDD +3000 Poisson 100", poisson_100_spec(g)});
  }
  for (const Row& row : rows) {
    const Case c = make_case(row.spec);
    const Metrics t = metrics(c.xuv, c.ir);
    for (const char* engine : {"ptychographic", "projections"}) {
      EngineOptions o = row.spec.peak_counts > 0 ? EngineOptions() : noise_free_options();
      const Reconstruction r = retrieve(c, engine, o);
      const Metrics m = metrics(r.xuv, r.ir);
      std::printf(
          "%-14s %-22s %9.1f %9.1f %9.0f %9.0f %8.4f %8.4f %6d %7.3f %s (G %.2e, G_noise %.2e)\n",
          engine, row.name, m.fwhm_as, t.fwhm_as, m.gdd_as2, t.gdd_as2, m.peak_A, t.peak_A,
          r.iterations, r.seconds, to_string(r.termination), r.trace_error,
          r.noise_floor_trace_error);
      INFO(engine << ", " << row.name);
      check_truth(c, r, 0.05);
    }
  }
}
