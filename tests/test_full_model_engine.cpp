// The full-model least-squares engine: settings, objective gradient against central
// differences, descent, and reconstruction of a broadband pulse where the central-momentum
// approximation fails.
#include <catch2/catch.hpp>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <optional>
#include <random>

#include "retrieval/engine.h"
#include "retrieval/forward_model.h"
#include "retrieval/full_model_engine.h"
#include "retrieval/pulse_metrics.h"
#include "retrieval/units.h"
#include "retrieval/xuv_builders.h"

using namespace sw;

namespace {

std::vector<double> axis(double first, double step, int n) {
  std::vector<double> v(static_cast<std::size_t>(n));
  for (int i = 0; i < n; ++i) v[static_cast<std::size_t>(i)] = first + step * i;
  return v;
}

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
  R.intensity.resize(nD, nW);
  R.variance.resize(nD, nW);
  for (int i = 0; i < nD; ++i)
    for (int j = 0; j < nW; ++j) {
      const double p = std::sqrt(2 * S.W[static_cast<std::size_t>(j)]);
      const double lam = k * dens(i, j);
      const double c = peak_counts > 0 ? std::poisson_distribution<long>(lam)(rng) : lam;
      R.intensity(i, j) = c / p;
      R.variance(i, j) = std::max(c, 1.0) / (p * p);
    }
  R.field_free_spectrum.resize(static_cast<std::size_t>(nW));
  double num = 0, den = 0;
  for (int j = 0; j < nW; ++j) {
    const double p = std::sqrt(2 * S.W[static_cast<std::size_t>(j)]);
    R.field_free_spectrum[static_cast<std::size_t>(j)] = k * ff(0, j) / p;
    num += ff(0, j) * S.W[static_cast<std::size_t>(j)];
    den += ff(0, j);
  }
  R.energy_au = S.W;
  R.delay_au = S.D;
  R.grid = S.grid;
  R.ionization_energy_au = S.ip;
  R.central_momentum_au = std::sqrt(2 * num / den);
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

double peak_A(const IrField& ir, double t_lo, double t_hi) {
  double m = 0;
  for (double t = t_lo; t <= t_hi; t += 0.25) m = std::max(m, std::abs(ir.vector_potential_at(t)));
  return m;
}

}  // namespace

TEST_CASE("full-model defaults validate and agree with the option descriptions", "[fullmodel]") {
  // Common practice (STYLE.md): defaults validate; one description drives validation.
  const FullModelSettings d;
  CHECK(d.validate().empty());
  EngineOptions o;
  for (const ExtraOption& x : full_model_extra_options()) {
    INFO(x.name);
    CHECK(x.validate(x.default_value).empty());
    o.extra.emplace_back(x.name, x.default_value);
  }
  const FullModelSettings r = read_full_model_settings(o);
  CHECK(r.ir == d.ir);
  CHECK(r.lbfgs_per_iteration == d.lbfgs_per_iteration);
  CHECK(r.lbfgs_memory == d.lbfgs_memory);
  CHECK(r.knots_per_period == Approx(d.knots_per_period));
  CHECK(r.ir_samples_per_period == Approx(d.ir_samples_per_period));
  CHECK(r.chebyshev_nodes == d.chebyshev_nodes);
  CHECK(r.block_phase_rad == Approx(d.block_phase_rad));
  CHECK(r.variance_floor == Approx(d.variance_floor));
  CHECK(r.support_threshold == Approx(d.support_threshold));
  CHECK(r.support_margin_eV == Approx(d.support_margin_eV));
  CHECK(r.spectrum_weight == Approx(d.spectrum_weight));
  EngineOptions bad;
  bad.extra.emplace_back("ir", "wavelet");
  CHECK_THROWS_WITH(read_full_model_settings(bad), Catch::Contains("ir = 'wavelet'"));
  CHECK(make_engine("full-model")->name() == "full-model");
}

TEST_CASE("explore broadband", "[.explore]") {
  const char* env = std::getenv("FM_CASE");
  const int cs = env ? std::atoi(env) : 0;
  const double gdd = cs == 1 ? 2000.0 : (cs == 2 ? -2500.0 : 0.0);
  const double counts = std::getenv("FM_COUNTS") ? std::atof(std::getenv("FM_COUNTS")) : 2000;
  const bool big = std::getenv("FM_BIG") != nullptr;
  auto t0 = std::chrono::steady_clock::now();
  Scenario S = big ? make_scenario(130.0, 70.0, gdd, 50.0, 0.3, 400, 1024, 6.0, 121, counts, 1)
                   : make_scenario(130.0, 70.0, gdd, 44.0, 0.5, 256, 512, 6.0, 61, counts, 1);
  auto t1 = std::chrono::steady_clock::now();
  std::printf("scenario %.2f s, p0 %.3f\n", std::chrono::duration<double>(t1 - t0).count(),
              S.problem.central_momentum_au);
  const double fw_true = fine_fwhm(S.xuv);
  const double A_true = peak_A(S.ir, -200, 200);
  std::printf("truth fwhm %.1f as, A0 %.4f\n", units::au_to_as(fw_true), A_true);
  const int threads = std::getenv("FM_THREADS") ? std::atoi(std::getenv("FM_THREADS")) : 1;
  std::optional<Reconstruction> warm;
  for (int cma0 = 0; cma0 < 3; ++cma0) {
    const int cma = std::getenv("FM_WARM") ? (cma0 == 0 ? 1 : 0) : cma0;
    if (!std::getenv("FM_WARM") && cma0 == 2) break;
    auto e = cma ? make_cma_least_squares_engine() : make_full_model_engine();
    EngineOptions o;
    if (warm && !cma) {
      o.initial_xuv = warm->xuv;
      o.initial_ir = warm->ir;
    }
    o.max_iterations = 200;
    o.threads = threads;
    o.noise_floor_factor = 0;
    if (const char* sup = std::getenv("FM_SUPPORT")) o.extra.emplace_back("support_threshold", sup);
    if (const char* ir = std::getenv("FM_IR")) o.extra.emplace_back("ir", ir);
    if (const char* sw = std::getenv("FM_SPECW")) o.extra.emplace_back("spectrum_weight", sw);
    if (const char* mi = std::getenv("FM_MAXIT")) o.max_iterations = std::atoi(mi);
    if (std::getenv("FM_ONLYFULL") && cma && !std::getenv("FM_WARM")) continue;
    auto a = std::chrono::steady_clock::now();
    Reconstruction r = run_engine(*e, S.problem, o);
    if (cma) warm = r;
    auto b = std::chrono::steady_clock::now();
    std::printf("%s: %.2f s, G %.4g (noise %.4g), fwhm %.1f as, A0 %.4f, %s\n", r.engine.c_str(),
                std::chrono::duration<double>(b - a).count(), r.trace_error,
                r.noise_floor_trace_error, units::au_to_as(fine_fwhm(r.xuv)),
                peak_A(r.ir, -200, 200), r.message.c_str());
    for (auto& [k, v] : r.settings)
      if (k.rfind("lbfgs", 0) == 0 || k.rfind("cost", 0) == 0 || k.rfind("weighted", 0) == 0 ||
          k.rfind("ir_", 0) == 0 || k == "momentum_blocks" || k == "block_replans" || k == "initial_trace_error")
        std::printf("   %s = %s\n", k.c_str(), v.c_str());
    {
      double off = 0, rms = 0;
      int cnt = 0;
      for (double tf = -5; tf <= 5.01; tf += 0.05) {
        const double d = r.ir.vector_potential_at(units::fs_to_au(tf)) -
                         S.ir.vector_potential_at(units::fs_to_au(tf));
        off += d;
        rms += d * d;
        ++cnt;
      }
      std::printf("   A - truth over +-5 fs: mean %.4f rms %.4f\n", off / cnt, std::sqrt(rms / cnt));
    }
    if (std::getenv("FM_PRINTA"))
      for (double tf = -7; tf <= 7.01; tf += 0.25)
        std::printf("   A(%5.2f fs) = %8.4f truth %8.4f\n", tf, r.ir.vector_potential_at(units::fs_to_au(tf)),
                    S.ir.vector_potential_at(units::fs_to_au(tf)));
    for (auto& h : r.history)
      if (h.iteration % 10 == 1) std::printf("   it %d G %.5g t %.2f\n", h.iteration, h.trace_error, h.seconds);
  }
}

TEST_CASE("explore representation", "[.explore2]") {
  Scenario S = make_scenario(130.0, 70.0, 0.0, 44.0, 0.5, 256, 512, 6.0, 61, -2000, 1);
  GaussianIrPulse P;
  P.peak_intensity_Wcm2 = 1e13;
  P.cep_rad = 0.4;
  const std::vector<double> th = GaussianIrParametrization::from_pulse(P);
  for (double thr : {1e-3, 1e-5, 0.0}) {
    for (double win : {6.8, 9.0, 12.0}) {
      FullModelSettings st;
      st.support_threshold = thr;
      const double T = units::period_au(S.problem.ir_omega_au);
      const IrSampling smp = IrSampling::covering(-units::fs_to_au(win), units::fs_to_au(win), T / 64);
      FullModelObjective f(S.problem, st, MomentumModel::kFull,
                           std::make_unique<GaussianIrParametrization>(smp), 2);
      std::vector<cdouble> spec(S.W.size());
      for (std::size_t j = 0; j < S.W.size(); ++j) {
        cdouble acc = 0;
        for (std::size_t k = 0; k < S.grid.size(); ++k)
          acc += S.xuv.envelope()[k] *
                 std::polar(1.0, (S.W[j] + S.ip - S.xuv.carrier_au()) * S.grid.time(k));
        spec[j] = acc * S.grid.dt();
      }
      std::vector<double> x = f.encode(spec, th);
      double mu;
      const Eigen::MatrixXd m = f.model(x.data(), &mu);
      std::printf("thr %g win %g: G %.3g cost %.3g support %zu\n", thr, win,
                  trace_error(S.problem.intensity, m), f.evaluate(x.data(), nullptr),
                  f.support().size());
    }
  }
}
