// The full-model least-squares engine: settings, objective gradient against central
// differences, descent, and reconstruction of a broadband pulse where the central-momentum
// approximation fails.
#include <catch2/catch.hpp>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <random>
#include <utility>

#include "retrieval/core/units.h"
#include "retrieval/engines/engine.h"
#include "retrieval/engines/full_model_engine.h"
#include "retrieval/physics/forward_model.h"
#include "retrieval/physics/pulse_metrics.h"
#include "retrieval/physics/xuv_builders.h"
#include "tests/full_model_test_support.h"
#include "tests/test_support.h"

using namespace sw;
using sw::test::axis;
using sw::test::worst_relative_gradient_error;

namespace {

// A synthetic scan with known truth, built the way preprocess() hands it to the engines:
// counts per bin ~ Poisson(peak_counts x p |a|^2 / max), intensity = counts / p, Poisson
// variance max(counts, 1) / p^2, field-free spectrum from the same model without IR.
struct Scenario {
  double ip = units::eV_to_au(21.5645);  // neon 2p, NIST ASD
  TimeGrid grid;
  std::vector<double> W, D;
  XuvField xuv;
  IrField ir;
  RetrievalProblem problem;
};

Scenario make_scenario(double center_eV, double tl_fwhm_as, double gdd_as2, double W_first_eV,
                       double dW_eV, int nW, std::size_t n_grid, double tau_max_fs, int nD,
                       double peak_counts, unsigned seed) {
  Scenario S;
  S.grid = TimeGrid::for_energy_step(n_grid, units::eV_to_au(dW_eV));
  S.W = axis(units::eV_to_au(W_first_eV), units::eV_to_au(dW_eV), nW);
  S.D = axis(units::fs_to_au(-tau_max_fs), units::fs_to_au(2 * tau_max_fs / (nD - 1)), nD);
  GaussianXuvPulse xp;
  xp.center_eV = center_eV;
  xp.transform_limited_fwhm_as = tl_fwhm_as;
  xp.gdd_as2 = gdd_as2;
  S.xuv = make_gaussian_xuv(S.grid, xp);
  GaussianIrPulse P;  // 800 nm, 5 fs, 1e13 W/cm^2
  P.peak_intensity_Wcm2 = 1e13;
  P.cep_rad = 0.4;
  const double span = S.D.back() + S.grid.window();
  S.ir = make_gaussian_ir(P, -span, span, 0.5);
  ForwardModelOptions o;
  o.momentum = MomentumModel::kFull;
  const ForwardModel fm(S.ip, DipoleModel(), o);
  const Eigen::MatrixXd dens = fm.trace(S.xuv, S.ir, S.D, S.W);  // p |a|^2
  const IrField no_ir(-span, 1.0, std::vector<double>(8, 0.0));
  const Eigen::MatrixXd ff = fm.trace(S.xuv, no_ir, {0.0}, S.W);
  const double k = std::abs(peak_counts) / dens.maxCoeff();  // < 0: noise-free
  std::mt19937 rng(seed);
  RetrievalProblem& R = S.problem;
  test::fill_counts(R, dens, S.W, k, peak_counts > 0, rng);
  test::fill_field_free(R, ff, S.W, k);
  R.delay_au = S.D;
  R.grid = S.grid;
  R.ionization_energy_au = S.ip;
  R.ir_omega_au = units::wavelength_nm_to_omega_au(800.0);
  return S;
}

// Intensity FWHM on a 4x finer time grid (zero-padded spectrum): the engine grid samples a
// 70 as pulse only ~4 times per FWHM.
double fine_fwhm(const XuvField& f) {
  const std::size_t n = f.grid().size(), m = 4 * n;
  const CVec s = f.spectrum();
  CVec big(m, 0.0);
  for (std::size_t j = 0; j < n; ++j) big[j + (m - n) / 2] = s[j];
  const TimeGrid g = TimeGrid::centered(m, f.grid().dt() / 4);
  return intensity_fwhm(XuvField::from_spectrum(g, f.carrier_au(), big));
}

// The true FWHM (as, on the fine grid the fits are measured on) and peak vector potential (a.u.).
std::pair<double, double> truth_of(const Scenario& S) {
  return {units::au_to_as(fine_fwhm(S.xuv)), S.ir.peak_vector_potential()};
}

}  // namespace

TEST_CASE("full-model defaults validate and agree with the option descriptions", "[fullmodel]") {
  // Common practice (STYLE.md): defaults validate; one description drives validation.
  const FullModelSettings d;
  CHECK(d.validate().empty());
  // Every default in its text form (option_text) passes the text boundary and reads back.
  const auto texts = described_texts(d);
  CHECK(texts.size() == 17);
  EngineSettings from_text;
  apply_engine_option_text("full-model", texts, &from_text);
  const FullModelSettings& r = from_text.full_model;
  CHECK(r.ir == d.ir);
  CHECK(r.lbfgs_per_iteration == d.lbfgs_per_iteration);
  CHECK(r.lbfgs_memory == d.lbfgs_memory);
  CHECK(r.knots_per_period == Approx(d.knots_per_period));
  CHECK(r.ir_samples_per_period == Approx(d.ir_samples_per_period));
  CHECK(r.chebyshev_nodes == d.chebyshev_nodes);
  CHECK(r.block_phase_rad == Approx(d.block_phase_rad));
  CHECK(r.node_plan == d.node_plan);
  CHECK(r.variance_floor == Approx(d.variance_floor));
  CHECK(r.support_threshold == Approx(d.support_threshold));
  CHECK(r.support_margin_eV == Approx(d.support_margin_eV));
  CHECK(r.spectrum_weight == Approx(d.spectrum_weight));
  CHECK(r.spectrum_constraint == d.spectrum_constraint);
  CHECK(r.ir_lowpass_weight == Approx(d.ir_lowpass_weight));
  CHECK(r.variance_smoothing_bins == d.variance_smoothing_bins);
  EngineSettings bad;
  CHECK_THROWS_WITH(apply_engine_option_text("full-model", {{"ir", "wavelet"}}, &bad),
                    Catch::Contains("ir = 'wavelet'"));
  FullModelSettings typed;  // the typed value is checked by validate()
  typed.ir = "wavelet";
  CHECK_THAT(typed.validate(), Catch::Contains("ir = 'wavelet'"));
  CHECK(make_engine("full-model")->name() == "full-model");
}

namespace {

// Small problem for derivative checks: hydrogenic dipole (so d' enters), spectrum term on.
RetrievalProblem small_problem() {
  Scenario S = make_scenario(130.0, 90.0, 800.0, 80.0, 0.5, 120, 256, 1.5, 7, 500, 3);
  RetrievalProblem P = S.problem;
  P.dipole = DipoleModel(DipoleKind::kHydrogenic, P.ionization_energy_au, 2.8);
  return P;
}

}  // namespace

TEST_CASE("full-model gradient matches central differences", "[fullmodel]") {
  // Hand-written adjoints checked against central differences (common practice; Nocedal and
  // Wright, Numerical Optimization, 2nd ed. (2006), Sec. 8.1): XUV real/imaginary parts, the
  // spline and the parametric IR, full model and CMA, scale mu eliminated (variable projection).
  const RetrievalProblem P = small_problem();
  FullModelSettings st;
  st.spectrum_weight = 0.3;
  const double T = units::period_au(P.ir_omega_au);
  const IrSampling smp = test::gradient_check_sampling(P);
  // A perturbed guess: chirped spectrum, IR 10 % off, so no gradient component vanishes.
  const std::vector<cdouble> spec = test::perturbed_spectrum(P.energy_au);
  GaussianIrPulse ip = test::perturbed_ir_pulse();
  ip.chirp_rad_per_fs2 = 0.03;
  const std::vector<double> theta = GaussianIrParametrization::from_pulse(ip);

  SECTION("parametric IR, full model") {
    FullModelObjective f(P, st, MomentumModel::kFull,
                         std::make_unique<GaussianIrParametrization>(smp), 2);
    const std::vector<double> x = f.encode(spec, theta);
    const std::size_t nx = f.num_xuv_parameters();
    std::vector<std::size_t> c = {0, 1, nx / 2 - 1, nx / 2, nx / 2 + 7, nx - 1};
    for (std::size_t k = 0; k < 6; ++k) c.push_back(nx + k);  // all six pulse parameters
    CHECK(worst_relative_gradient_error(f, x, c) < 1e-6);
  }
  SECTION("spline IR, full model") {
    test::FittedSplineIr sp = test::fitted_spline_ir(smp, T / 6, theta);
    FullModelObjective f(P, st, MomentumModel::kFull, std::move(sp.ir), 2);
    const std::vector<double> x = f.encode(spec, sp.coef);
    const std::size_t nx = f.num_xuv_parameters(), ni = sp.coef.size();
    std::vector<std::size_t> c = {3, nx / 2 + 1, nx - 2};
    for (std::size_t k : {ni / 2 - 3, ni / 2 - 1, ni / 2, ni / 2 + 2, ni / 2 + 4})
      c.push_back(nx + k);
    CHECK(worst_relative_gradient_error(f, x, c) < 1e-6);
  }
  SECTION("parametric IR, CMA") {
    FullModelObjective f(P, st, MomentumModel::kCentral,
                         std::make_unique<GaussianIrParametrization>(smp), 1);
    const std::vector<double> x = f.encode(spec, theta);
    const std::size_t nx = f.num_xuv_parameters();
    std::vector<std::size_t> c = {2, nx / 2 + 3};
    for (std::size_t k = 0; k < 6; ++k) c.push_back(nx + k);
    CHECK(worst_relative_gradient_error(f, x, c) < 1e-6);
  }
}

TEST_CASE("Gaussian IR form is the one of sw::gaussian_ir_vector_potential", "[fullmodel]") {
  // Same formula (retrieval/physics/ir_field.h): the parametric engine reports pulses in its units.
  GaussianIrPulse p;
  p.wavelength_nm = 780;
  p.fwhm_fs = 6.5;
  p.peak_intensity_Wcm2 = 3e12;
  p.cep_rad = -1.1;
  p.chirp_rad_per_fs2 = 0.05;
  p.center_fs = 0.8;
  const std::vector<double> th = GaussianIrParametrization::from_pulse(p);
  double worst = 0;
  for (double t = -400; t <= 400; t += 3.7)
    worst = std::max(worst, std::abs(GaussianIrParametrization::value(th.data(), t) -
                                     gaussian_ir_vector_potential(p, t)));
  CHECK(worst < 1e-14);
  const GaussianIrPulse q = GaussianIrParametrization::to_pulse(th.data());
  CHECK(q.wavelength_nm == Approx(p.wavelength_nm).epsilon(1e-12));
  CHECK(q.peak_intensity_Wcm2 == Approx(p.peak_intensity_Wcm2).epsilon(1e-12));
  CHECK(q.fwhm_fs == Approx(p.fwhm_fs).epsilon(1e-12));
  CHECK(q.cep_rad == Approx(p.cep_rad).epsilon(1e-12));
  // Fitting the sampled pulse back recovers it (noise-free least squares; the residual 1e-6
  // is IrField's cubic-Hermite interpolation between its 1.5 a.u. samples).
  const IrSampling smp = IrSampling::covering(-500, 500, 1.5);
  const IrField f = make_gaussian_ir(p, -500, 500, 1.5);
  GaussianIrParametrization g(smp);
  const GaussianIrPulse r = GaussianIrParametrization::to_pulse(g.fit(f).data());
  CHECK(r.peak_intensity_Wcm2 == Approx(p.peak_intensity_Wcm2).epsilon(1e-4));
  CHECK(r.fwhm_fs == Approx(p.fwhm_fs).epsilon(1e-4));
  CHECK(r.cep_rad == Approx(p.cep_rad).margin(1e-4));
  CHECK(r.chirp_rad_per_fs2 == Approx(p.chirp_rad_per_fs2).epsilon(1e-3));
  // The spline with T/6 knots represents the same pulse to a few 1e-3 of its peak: the cubic
  // spline interpolant's error bound (5/384) h^4 max|A''''| = (5/384) (2 pi / 6)^4 A0 = 1.6e-2 A0
  // (C. de Boor, A Practical Guide to Splines (1978)); least squares does better.
  SplineIrParametrization sp(smp, units::period_au(units::wavelength_nm_to_omega_au(780)) / 6);
  const IrField back = sp.field(sp.fit(f).data());
  double err = 0;
  for (double t = -450; t <= 450; t += 1.1)
    err = std::max(err, std::abs(back.vector_potential_at(t) - f.vector_potential_at(t)));
  CHECK(err < 5e-3 * f.peak_vector_potential());
}

TEST_CASE("full-model iterations lower the cost and the trace error", "[fullmodel]") {
  // L-BFGS with a Wolfe line search decreases the objective monotonically (Liu and Nocedal,
  // Math. Program. 45, 503 (1989)); the trace error of the returned estimate falls with it.
  const RetrievalProblem P = small_problem();
  auto e = make_full_model_engine();
  EngineOptions o;
  o.max_iterations = 4;
  o.threads = 2;
  o.noise_floor_factor = 0;
  std::vector<double> G;
  const Reconstruction r = run_engine(*e, P, o, {[&](const IterationRecord& rec) {
    G.push_back(rec.trace_error);
    return CallbackResult::kContinue;
  }});
  double G0 = 0, C0 = 0, C1 = 0;
  for (const auto& [k, v] : r.settings) {
    if (k == "initial_trace_error") G0 = std::stod(v);
    if (k == "initial_weighted_cost_per_element") C0 = std::stod(v);
    if (k == "weighted_cost_per_element") C1 = std::stod(v);
  }
  REQUIRE(G.size() == 4);
  CHECK(C1 < 0.5 * C0);
  CHECK(r.trace_error < 0.7 * G0);
  CHECK(r.model == "full");
  CHECK(r.retrieved.rows() == P.intensity.rows());
  CHECK(r.xuv.grid().size() == P.grid.size());
}

TEST_CASE("full-model without variances (noise-free data) uses uniform weights", "[fullmodel]") {
  // engine.h: RetrievalProblem::variance may be empty for noise-free synthetic data.
  Scenario S = make_scenario(130.0, 90.0, 800.0, 80.0, 0.5, 120, 256, 1.5, 7, -500, 3);
  S.problem.variance.resize(0, 0);
  auto e = make_full_model_engine();
  EngineOptions o;
  o.max_iterations = 4;
  o.threads = 2;
  const Reconstruction r = run_engine(*e, S.problem, o);
  double G0 = 0;
  for (const auto& [k, v] : r.settings)
    if (k == "initial_trace_error") G0 = std::stod(v);
  CHECK(std::isfinite(r.trace_error));
  CHECK(r.trace_error < 0.7 * G0);
  // Unweighted least squares on I: a Gaussian noise model (common practice).
  CHECK(r.noise_model == "gaussian");
}

namespace {

struct Fit {
  double fwhm_as, peak_A, G, G_noise, seconds;
  std::string ir_form;
  Reconstruction r;
};

void report(const char* what, const Fit& f, double fwhm_true, double A_true) {
  std::printf(
      "  %-34s FWHM %6.1f as (%+5.1f %%)  A0 %.4f (%+5.1f %%)  G %.4f = %.2f G_noise  "
      "%s IR, %d it, %.1f s\n",
      what, f.fwhm_as, 100 * (f.fwhm_as / fwhm_true - 1), f.peak_A, 100 * (f.peak_A / A_true - 1),
      f.G, f.G / f.G_noise, f.ir_form.c_str(), f.r.iterations, f.seconds);
}

// Runs `e` on the scenario's problem (warm-started from `warm` when given) and prints the fit
// against the truth under `what`.
Fit retrieve(Engine& e, const Scenario& S, const Reconstruction* warm, const char* what,
             double noise_floor_factor = 1.0) {
  const RetrievalProblem& P = S.problem;
  EngineOptions o;  // the shared loop's defaults: stops at the Poisson noise floor
  o.threads = 2;
  o.noise_floor_factor = noise_floor_factor;
  if (warm) {
    o.initial_xuv = warm->xuv;
    o.initial_ir = warm->ir;
  }
  const auto t0 = std::chrono::steady_clock::now();
  Fit f;
  f.r = run_engine(e, P, o);
  f.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  f.fwhm_as = units::au_to_as(fine_fwhm(f.r.xuv));
  f.peak_A = f.r.ir.peak_vector_potential();
  f.G = f.r.trace_error;
  f.G_noise = f.r.noise_floor_trace_error;
  for (const auto& [k, v] : f.r.settings)
    if (k == "ir_form") f.ir_form = v;
  const auto [fwhm_true, A_true] = truth_of(S);
  report(what, f, fwhm_true, A_true);
  return f;
}

}  // namespace

TEST_CASE("broadband attosecond pulse: full model retrieves it, the CMA cannot", "[fullmodel]") {
  // A transform-limited 70 as pulse at 130 eV in neon (Ip 21.5645 eV, NIST ASD): photoelectrons
  // at W0 = 108 eV with a 26 eV FWHM bandwidth (time-bandwidth product 0.441 of Gaussian
  // pulses), bandwidth/energy = 0.24, where the CMA is known to fail (DESIGN.md pitfall; Keathley
  // et al., New J. Phys. 18, 073009 (2016)). IR: 800 nm, 5 fs, 1e13 W/cm^2 (A0 = 0.29 a.u.,
  // streaking +-23 eV). Trace from sw::ForwardModel kFull with Poisson counts (peak 2000).
  const Scenario S = make_scenario(130.0, 70.0, 0.0, 44.0, 0.5, 256, 512, 6.0, 41, 2000, 11);
  const auto [fwhm_true, A_true] = truth_of(S);
  // Gaussian time-bandwidth product (xuv_builders.h): the builder makes the pulse asked for.
  REQUIRE(fwhm_true == Approx(70.0).epsilon(0.01));
  std::printf("broadband case: truth FWHM %.1f as, A0 %.4f a.u.\n", fwhm_true, A_true);

  auto full = make_full_model_engine();
  const Fit scratch = retrieve(*full, S, nullptr, "full model, parametric start");
  auto cma_engine = make_cma_least_squares_engine();
  const Fit cma = retrieve(*cma_engine, S, nullptr, "CMA least squares, same data");
  const Fit warm = retrieve(*full, S, &cma.r, "full model, CMA warm start");

  // Accuracy required of the retrieval: 5 % on FWHM and peak A (the task's tolerance; well
  // above the ~1-2 % Poisson scatter of these numbers at 2000 peak counts).
  CHECK(scratch.ir_form == "parametric");
  CHECK(scratch.fwhm_as == Approx(fwhm_true).epsilon(0.05));
  CHECK(scratch.peak_A == Approx(A_true).epsilon(0.05));
  CHECK(scratch.G < 1.1 * scratch.G_noise);
  CHECK(warm.ir_form == "spline");
  CHECK(warm.fwhm_as == Approx(fwhm_true).epsilon(0.05));
  CHECK(warm.peak_A == Approx(A_true).epsilon(0.05));
  CHECK(warm.G < 1.1 * warm.G_noise);
  // The physics: the CMA cannot explain this trace. Its best fit stays far above the noise
  // floor (the p dependence of the Volkov phase across 26 eV is missing), and it
  // underestimates the streaking amplitude.
  CHECK(cma.r.model == "cma");
  CHECK(cma.G > 1.5 * scratch.G);
  CHECK(cma.G > 1.5 * cma.G_noise);
  CHECK(std::abs(cma.peak_A / A_true - 1) > std::abs(scratch.peak_A / A_true - 1));
}

TEST_CASE("chirped broadband pulse from a flat-phase start", "[fullmodel]") {
  // Same scenario with GDD = +2000 as^2: the flat-phase initial guess (70 as) is far from the
  // 106 as truth, so the XUV phase must be found. Sign check of the chirp: positive GDD means
  // higher photon energies later (retrieval/physics/xuv_builders.h; Mairesse et al., Science 302,
  // 1540 (2003)), and the retrieved GDD must have that sign and magnitude.
  const Scenario S = make_scenario(130.0, 70.0, 2000.0, 44.0, 0.5, 256, 512, 6.0, 41, 2000, 12);
  const auto [fwhm_true, A_true] = truth_of(S);
  auto full = make_full_model_engine();
  const Fit f = retrieve(*full, S, nullptr, "chirped: full model, parametric start");
  const double gdd = units::au_to_as2(fit_spectral_phase(f.r.xuv, 0.05, 3).gdd);
  const double gdd_true = units::au_to_as2(fit_spectral_phase(S.xuv, 0.05, 3).gdd);
  std::printf("  chirped: GDD %.0f as^2 (truth %.0f as^2)\n", gdd, gdd_true);
  CHECK(fwhm_true > 95.0);  // the chirp really stretches the pulse (~1.5x)
  CHECK(f.fwhm_as == Approx(fwhm_true).epsilon(0.05));
  CHECK(f.peak_A == Approx(A_true).epsilon(0.05));
  CHECK(gdd == Approx(gdd_true).epsilon(0.1));
}

TEST_CASE("full-model refinement of a 121 x 400 trace: timing", "[fullmodel][slow]") {
  // The production size: 121 delays (0.1 fs steps), 400 energies (0.3 eV bins), 1024-point
  // XUV grid, chirped broadband pulse; warm start from the CMA fit, as the pipeline chains
  // them. Timings are reported (the machine is shared; the target is < 30 s on 2 cores), the
  // physics is checked as above.
  const Scenario S = make_scenario(130.0, 70.0, 2000.0, 50.0, 0.3, 400, 1024, 6.0, 121, 2000, 13);
  const auto [fwhm_true, A_true] = truth_of(S);
  auto cma_engine = make_cma_least_squares_engine();
  const Fit cma = retrieve(*cma_engine, S, nullptr, "121x400 CMA least squares");
  auto full = make_full_model_engine();
  const Fit at_floor = retrieve(*full, S, &cma.r, "121x400 refine, stop at noise floor");
  const Fit stalled = retrieve(*full, S, &cma.r, "121x400 refine, stop at stall", 0.0);
  for (const Fit* f : {&at_floor, &stalled}) {
    CHECK(f->r.converged());
    CHECK(f->fwhm_as == Approx(fwhm_true).epsilon(0.05));
    CHECK(f->peak_A == Approx(A_true).epsilon(0.05));
    CHECK(f->G < 1.1 * f->G_noise);
  }
  CHECK(cma.G > 1.5 * stalled.G);
}
