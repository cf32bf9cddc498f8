// The retrieval pipeline end to end on scans from the direct-quadrature generator (synthetic/),
// an independent code path from the engines' FFT model (DESIGN.md "no inverse crime").
// Tolerances are those of the streaking-retrieval issue: FWHM and A0 within 5 % at >= 100 peak
// counts; chirp sign right for both signs; the broadband case right only through the full model.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <utility>

#include "retrieval/analysis/retrieve.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/pulse_metrics.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "tests/retrieve_test_support.h"

using namespace sw;

namespace {

struct Case {
  synthetic::SyntheticScan scan;
  RetrieveOutput out;
};

// The 40-count neon scan (seed 1) of the satellite-start tests, made once.
const synthetic::SyntheticScan& few_counts_scan() {
  static const synthetic::SyntheticScan s = synthetic::generate_scan(test::neon_few_counts(), 1);
  return s;
}

Case run_preset(const std::string& name, const std::string& engine, unsigned long long seed = 11,
                int bootstrap = 0) {
  Case c;
  const synthetic::ScanConfig cfg = synthetic::find_preset(name).config;
  c.scan = synthetic::generate_scan(cfg, seed);
  RetrieveOptions o;
  o.engine = engine;
  o.bootstrap = bootstrap;
  o.threads = 2;
  c.out = retrieve(c.scan.trace, o);
  const auto& x = *c.out.result.xuv;
  std::printf(
      "%-18s %-14s FWHM %.1f as (truth %.1f), GDD %.0f as^2 (truth %.0f), A0 %.4f (truth %.4f), G "
      "%.4f (floor %.4f), %s\n",
      name.c_str(), c.out.result.engine.c_str(), *x.fwhm_as, *c.scan.truth.xuv->fwhm_as, *x.gdd_as2,
      c.scan.truth.xuv->gdd_as2.value_or(0), c.out.result.ir->peak_vector_potential_au.value_or(0),
      *c.scan.truth.ir->peak_vector_potential_au, c.out.reconstruction.trace_error,
      c.out.reconstruction.noise_floor_trace_error, c.out.reconstruction.message.c_str());
  return c;
}

double rel_err(double a, double b) { return std::abs(a - b) / std::abs(b); }

}  // namespace

TEST_CASE("transform-limited neon pulse: FWHM and A0 within 5 %", "[retrieve]") {
  for (const char* engine : {"ptychographic", "projections"}) {
    const Case c = run_preset("neon-150as", engine);
    CHECK(rel_err(*c.out.result.xuv->fwhm_as, *c.scan.truth.xuv->fwhm_as) < 0.05);
    CHECK(rel_err(*c.out.result.ir->peak_vector_potential_au,
                  *c.scan.truth.ir->peak_vector_potential_au) < 0.05);
    CHECK(c.out.result.verdict->pulse_class == PulseClass::kIsolated);
  }
}

TEST_CASE("chirp sign comes out right for both signs", "[retrieve]") {
  // DESIGN.md pitfall "sign conventions travel together": the retrieved GDD must have the sign
  // of the truth; duration within 5 %.
  for (const char* name : {"neon-chirped-pos", "neon-chirped-neg"}) {
    const Case c = run_preset(name, "ptychographic");
    const double g = *c.out.result.xuv->gdd_as2, gt = *c.scan.truth.xuv->gdd_as2;
    CHECK(g * gt > 0);
    // GDD within 15 %: common practice, looser than the FWHM's 5 % because the duration
    // depends on GDD weakly: for a Gaussian FWHM = FWHM_TL sqrt(1 + x^2) with
    // x = 4 ln2 GDD / FWHM_TL^2, so d ln FWHM / d ln GDD = x^2 / (1 + x^2) < 1.
    CHECK(rel_err(g, gt) < 0.15);
    CHECK(rel_err(*c.out.result.xuv->fwhm_as, *c.scan.truth.xuv->fwhm_as) < 0.05);
  }
}

TEST_CASE("broadband pulse: auto refines with the full model, which fits better",
          "[retrieve][slow]") {
  // Bandwidth/energy ~0.25: one central momentum neglects (p - p_f)(I1 - I1_mid), ~0.9 rad
  // here. (With the delay-adapted gate and the momentum nodes the ptychographic FWHM is within
  // 1 % too; its trace stays ~1.1 x the noise floor where the full model reaches it, and its
  // error is printed, not hidden.)
  const Case cma = run_preset("helium-70as", "ptychographic");
  const Case au = run_preset("helium-70as", "auto");
  const double truth = *au.scan.truth.xuv->fwhm_as;
  const double e_cma = rel_err(*cma.out.result.xuv->fwhm_as, truth);
  const double e_full = rel_err(*au.out.result.xuv->fwhm_as, truth);
  std::printf("broadband: CMA FWHM error %.1f %%, auto (%s) %.1f %%, CMA phase error %.2f rad\n",
              100 * e_cma, au.out.result.engine.c_str(), 100 * e_full, au.out.cma_phase_error_rad);
  CHECK(au.out.result.engine == "full-model");
  CHECK(e_full < 0.05);
  CHECK(rel_err(*au.out.result.ir->peak_vector_potential_au,
                *au.scan.truth.ir->peak_vector_potential_au) < 0.05);
  CHECK(au.out.reconstruction.trace_error < cma.out.reconstruction.trace_error);
}

TEST_CASE("satellites are seen and classified", "[retrieve][slow]") {
  // Satellites at -T/2 (15 %) and +T/2 (8 %) of the main burst. The CMA engines stall at
  // 4-5 x the noise floor with the satellites too small; auto notices the
  // unexplained trace (G > 2 G_noise) and refines with the full model.
  const Case c = run_preset("neon-satellites", "auto");
  CHECK(c.out.result.engine == "full-model");
  // Within 20 % of the noise floor G_noise (engine.h): a model that explains the trace reaches
  // G ~ G_noise; the 20 % headroom for the floor estimate's own scatter is common practice.
  CHECK(c.out.reconstruction.trace_error < 1.2 * c.out.reconstruction.noise_floor_trace_error);
  const double r = *c.out.result.verdict->satellite_intensity_ratio;
  const double rt = *c.scan.truth.verdict->satellite_intensity_ratio;
  // 0.04 absolute on a 0.15 ratio: a quarter of the largest satellite, so the class cannot flip
  // (the isolated / satellites threshold sits further away); common practice, no paper.
  CHECK(std::abs(r - rt) < 0.04);
  CHECK(c.out.result.verdict->pulse_class == PulseClass::kIsolatedWithSatellites);
}

TEST_CASE("bootstrap sigmas cover the truth", "[retrieve][slow]") {
  // Wang, Zeek, Trebino and Kvam, JOSA B 20, 2400 (2003): bootstrap error bars; a calibrated
  // 1-sigma interval holds the truth in ~68 % of cases, 3 sigma in ~99.7 % (normal statistics).
  // The neon reference scan at 100 peak counts and a 0.2 fs delay step; its edge rows are
  // weakly streaked (shape reference, retrieval/preprocess/preprocess.h).
  const synthetic::ScanConfig cfg = test::neon_reference_61_delays(100.0);
  int in1 = 0, in3 = 0, n = 0;
  for (unsigned long long seed = 1; seed <= 10; ++seed) {
    const auto scan = synthetic::generate_scan(cfg, seed);
    RetrieveOptions o = test::ptychographic_options(8);
    o.seed = seed;
    o.threads = 2;
    const RetrieveOutput out = retrieve(scan.trace, o);
    const double f = *out.result.xuv->fwhm_as, s = *out.result.xuv->fwhm_as_sigma;
    const double a = *out.result.ir->peak_vector_potential_au,
                 sa = *out.result.ir->peak_vector_potential_au_sigma;
    const double ft = *scan.truth.xuv->fwhm_as, at = *scan.truth.ir->peak_vector_potential_au;
    std::printf("seed %llu: FWHM %.1f +- %.1f (truth %.1f), A0 %.4f +- %.4f (truth %.4f)\n", seed,
                f, s, ft, a, sa, at);
    for (auto [v, sg, t] : {std::tuple{f, s, ft}, std::tuple{a, sa, at}}) {
      ++n;
      in1 += std::abs(v - t) <= sg;
      in3 += std::abs(v - t) <= 3 * sg;
    }
  }
  std::printf("coverage: %d/%d within 1 sigma, %d/%d within 3 sigma\n", in1, n, in3, n);
  // Derivation: with calibrated sigmas, in1 ~ Binomial(n = 20, p = 0.683): mean 13.7, sd 2.1,
  // so in1 >= 8 (= n/2 - 2) fails with probability < 1 % (2.7 sd below the mean); in3 ~
  // Binomial(20, 0.997): P(in3 <= 18) ~ 0.2 %; in1 = 20 has probability 0.683^20 ~ 5e-4.
  CHECK(in3 >= n - 1);      // "nearly every case"
  CHECK(in1 >= n / 2 - 2);  // ~68 % expected; binomial spread over 20 cases
  CHECK(in1 <= n - 1);      // sigmas not absurdly inflated
}

TEST_CASE("a noise-filled wide window gives a sensible FWHM or an untrusted result", "[retrieve]") {
  // Issue 10: 25 peak counts and 1 background count in every bin of a 90 eV window gave a
  // 14.7 as "pulse" with a 179 eV bandwidth for a 150 as truth. With the energy support the
  // spectrum stays inside the signal's band; the FWHM is within 15 % of the truth (issue 10:
  // 10 % at 20-50 counts, here with the bootstrap off) unless the result says it is untrusted.
  synthetic::ScanConfig cfg = synthetic::find_preset("neon-150as").config;
  cfg.geometry.energy_eV = {25.0, 0.25, 360};
  cfg.noise.peak_counts = 25.0;
  cfg.noise.background_counts = 1.0;
  const auto scan = synthetic::generate_scan(cfg, 4);
  RetrieveOptions o = test::ptychographic_options(0);
  o.threads = 2;
  const RetrieveOutput out = retrieve(scan.trace, o);
  const double f = *out.result.xuv->fwhm_as, ft = *scan.truth.xuv->fwhm_as;
  REQUIRE(out.result.quality);
  std::printf(
      "wide noisy window: FWHM %.1f as (truth %.1f), bandwidth %.1f eV, support %.1f-%.1f eV, "
      "trusted %d\n",
      f, ft, *out.result.xuv->bandwidth_fwhm_eV, out.preprocess.support_lo_eV,
      out.preprocess.support_hi_eV, out.result.quality->trusted ? 1 : 0);
  // The support must exclude most of the 90 eV window: under 80 eV is a loose bound (the
  // line's own FWHM band is 12.2 eV; common practice, set well above it).
  CHECK(out.preprocess.support_hi_eV - out.preprocess.support_lo_eV < 80.0);
  // 1e-6 of the spectral energy: round-off level of the support projection, which zeroes the
  // bins outside (retrieval/preprocess/support.h); the check is that nothing leaks, not an
  // accuracy.
  CHECK(spectral_energy_outside(
            out.reconstruction.xuv,
            units::eV_to_au(out.preprocess.support_lo_eV) + out.problem.ionization_energy_au,
            units::eV_to_au(out.preprocess.support_hi_eV) + out.problem.ionization_energy_au) <
        1e-6);
  if (out.result.quality->trusted) CHECK(rel_err(f, ft) < 0.15);
  // The bandwidth is that of the line (12.2 eV for 150 as, Gaussian time-bandwidth product
  // 1.825 eV fs), not of the window: under 25 eV (about 2x the line's, common practice) where
  // the window's would be ~90 eV.
  CHECK(*out.result.xuv->bandwidth_fwhm_eV < 25.0);
  // The IR wavelength reported is the sidecar's.
  CHECK(*out.result.ir->wavelength_nm == 800.0);
}

TEST_CASE("few counts per bin: auto refines the CMA result with the full model and says why",
          "[retrieve]") {
  // At ~22 counts per delay row in the strongest bin the CMA engine's projections follow the
  // counting noise (docs/validation.md "Few counts per bin"); auto hands such scans to the
  // full model (RetrieveOptions::cma_min_signal_counts, default 60, our choice).
  const synthetic::ScanConfig cfg = test::neon_few_counts();
  const auto scan = synthetic::generate_scan(cfg, 21);
  RetrieveOptions o;
  o.bootstrap = 0;
  o.threads = 2;
  const RetrieveOutput out = retrieve(scan.trace, o);
  // signal_peak_counts is the largest delay-average of the analysed bins' counts: without
  // summed bins, that is the largest column mean of the raw counts inside the analysis window
  // less the fitted background (a plain reference computed here, as numpy's
  // counts[:, in_window].mean(axis=0).max() would).
  REQUIRE(out.preprocess.energy_bins_combined == 1);
  double reference = 0.0;
  for (Eigen::Index j = 0; j < scan.trace.counts.cols(); ++j) {
    const double w = units::au_to_eV(scan.trace.energy_au[static_cast<std::size_t>(j)]);
    const bool inside = out.preprocess.window_lo_eV == out.preprocess.window_hi_eV ||
                        (w >= out.preprocess.window_lo_eV && w <= out.preprocess.window_hi_eV);
    if (inside) reference = std::max(reference, scan.trace.counts.col(j).mean());
  }
  CHECK(out.preprocess.signal_peak_counts ==
        Approx(reference - out.preprocess.background_counts).epsilon(0.02));
  CHECK(out.preprocess.signal_peak_counts < o.cma_min_signal_counts);
  CHECK(out.result.engine == "full-model");
  CHECK(out.full_model_reason.find("few counts per bin") != std::string::npos);
  CHECK(param_string(out.result.extra, "fit.full_model_reason") == out.full_model_reason);
  // What the full model modelled: its momentum blocks and nodes (the fewest-nodes plan, at least
  // two nodes per block) and the evaluations of its final run.
  const auto blocks = param_number(out.result.extra, "fit.full_model.momentum_blocks");
  const auto nodes = param_number(out.result.extra, "fit.full_model.momentum_nodes");
  REQUIRE((blocks && nodes));
  CHECK(*blocks >= 1);
  CHECK(*nodes >= 2 * *blocks);
  CHECK(param_number(out.result.extra, "fit.full_model.cost_evaluations").value_or(0) > 0);
  CHECK(param_string(out.result.extra, "fit.full_model.node_plan").rfind("fewest", 0) == 0);
  // The rule alone decides here (no other rule of auto fires on this scan).
  CHECK(out.full_model_reason == "few counts per bin");
  // Issue 10's tolerance at 20-50 peak counts: FWHM within 10 %.
  const double ft = *scan.truth.xuv->fwhm_as;
  std::printf("few counts: signal_peak_counts %.1f, auto (%s: %s) FWHM %.1f as (truth %.1f)\n",
              out.preprocess.signal_peak_counts, out.result.engine.c_str(),
              out.full_model_reason.c_str(), *out.result.xuv->fwhm_as, ft);
  CHECK(rel_err(*out.result.xuv->fwhm_as, ft) < 0.10);
  // The rule can be turned off: the CMA result is then kept.
  o.cma_min_signal_counts = 0.0;
  const RetrieveOutput off = retrieve(scan.trace, o);
  CHECK(off.full_model_reason.empty());
  CHECK(off.result.engine == "ptychographic");
  // A CMA engine chosen by hand on such a scan keeps its number but not the trust: the check
  // cma_signal_counts guards the headline (bootstrap 2 so that the sigma checks exist too).
  o.cma_min_signal_counts = RetrieveOptions().cma_min_signal_counts;
  o.engine = "ptychographic";
  o.bootstrap = 2;
  const RetrieveOutput forced = retrieve(scan.trace, o);
  REQUIRE(forced.result.quality);
  const auto& failed = forced.result.quality->failed;
  CHECK(std::find(failed.begin(), failed.end(), "cma_signal_counts") != failed.end());
  CHECK_FALSE(forced.result.quality->trusted);
}

TEST_CASE("a satellite start that ends in the first result's minimum is not adopted",
          "[retrieve]") {
  // RetrieveOptions::satellite_start_margin: counting noise scatters G by about 1/sqrt(2N) of
  // itself (G is the root of a sum of N weighted squares of Poisson residuals: a chi-square
  // variable with N degrees of freedom has mean N and variance 2N, relative spread sqrt(2/N),
  // halved by the square root; from memory, any statistics text), so a start whose G is
  // lower by less than 1/sqrt(N) fits no better than the first result. On this 40-count scan
  // both satellite starts decay back to the burst (satellite ratio ~1e-5): with margin 0 (the
  // default) one of them is adopted for a G lower by ~1e-4; with margin 1 it is not, and both
  // results are the same pulse.
  const synthetic::SyntheticScan& scan = few_counts_scan();
  RetrieveOptions o;
  o.bootstrap = 0;
  o.satellite_start_margin = 0.0;
  const RetrieveOutput any = retrieve(scan.trace, o);
  CHECK(RetrieveOptions{}.satellite_start_margin == 0.0);  // the default
  o.satellite_start_margin = 1.0;
  const RetrieveOutput kept = retrieve(scan.trace, o);
  REQUIRE(any.result.engine == "full-model");
  INFO("margin 0: " << any.full_model_start << ", G " << any.reconstruction.trace_error
                    << "; margin 1: " << kept.full_model_start << ", G "
                    << kept.reconstruction.trace_error);
  REQUIRE(any.full_model_start.find("satellite hypothesis") != std::string::npos);
  CHECK(kept.full_model_start == "the CMA result");
  const double n = static_cast<double>(kept.problem.intensity.size());
  const double gain = 1.0 - any.reconstruction.trace_error / kept.reconstruction.trace_error;
  CHECK(gain > 0.0);
  CHECK(gain < 1.0 / std::sqrt(n));
  // The same pulse: FWHM within 0.5 % and a satellite ratio below 1e-3 both times (far under
  // the 10 % isolated threshold of DESIGN.md).
  CHECK(*kept.result.xuv->fwhm_as == Approx(*any.result.xuv->fwhm_as).epsilon(0.005));
  CHECK(*any.result.verdict->satellite_intensity_ratio < 1e-3);
  CHECK(*kept.result.verdict->satellite_intensity_ratio < 1e-3);
  // Both starts stay in the chain (the systematic spread of equally good runs).
  CHECK(kept.reconstruction.trace_error == kept.chain.back().trace_error);
  CHECK(kept.chain.size() == any.chain.size());
}

TEST_CASE("the replicas repeat an adopted satellite start only when it fits better than noise",
          "[retrieve]") {
  // RetrieveOptions::replica_satellite_margin. On the 40-count scan above the adopted start
  // lowers G by less than 1/sqrt(N) (the noise scatter of G, test above): with the default
  // margin 1 each replica runs its CMA engine and the full model (two runs), with margin 0 also
  // the satellite start from its own result (three). The headline is the estimate's either way
  // (with 2 replicas the bias rule never moves it: 2 s/sqrt(2) > s), and the two equally good
  // runs' spread is in the sigma's systematic part, which is what makes the replicas' restart
  // redundant.
  const synthetic::SyntheticScan& scan = few_counts_scan();
  RetrieveOptions o;
  o.bootstrap = 2;
  o.threads = 1;
  auto runs_per_replica = [&](double margin, RetrieveOutput* out) {
    o.replica_satellite_margin = margin;
    std::map<std::string, int> starts;  // stage -> engine runs (each begins at iteration 1)
    *out = retrieve(scan.trace, o, [&](const std::string& stage, const IterationRecord& r) {
      if (r.iteration == 1) ++starts[stage];
    });
    return std::pair{starts["bootstrap 1/2"], starts["bootstrap 2/2"]};
  };
  CHECK(RetrieveOptions{}.replica_satellite_margin == 1.0);  // the default
  RetrieveOutput skip, repeat;
  CHECK(runs_per_replica(1.0, &skip) == std::pair{2, 2});
  CHECK(runs_per_replica(0.0, &repeat) == std::pair{3, 3});
  INFO(skip.full_model_start);
  CHECK(skip.full_model_start.find("the replicas do not repeat it") != std::string::npos);
  CHECK(repeat.full_model_start.find("the replicas repeat it") != std::string::npos);
  CHECK(skip.reconstruction.trace_error == repeat.reconstruction.trace_error);
  CHECK(*skip.result.xuv->fwhm_as == *repeat.result.xuv->fwhm_as);
  // The systematic part (the spread of the chain's equally good runs, floored by the method's
  // 1 %) is the same both ways, and the reported sigma holds it.
  const auto sys = param_number(skip.result.extra, "bootstrap.fwhm_as_sigma_systematic");
  REQUIRE(sys);
  CHECK(sys == param_number(repeat.result.extra, "bootstrap.fwhm_as_sigma_systematic"));
  CHECK(*sys >= 0.01 * *skip.result.xuv->fwhm_as * (1 - 1e-9));
  CHECK(*skip.result.xuv->fwhm_as_sigma >= *sys);
}
