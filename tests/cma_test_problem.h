#pragma once
// Synthetic streaking problems with known truth for the CMA engine tests: the trace is made
// with sw::ForwardModel (kCentral, the same p0 the engines use), from a Gaussian XUV
// (retrieval/physics/xuv_builders.h) and a Gaussian IR (sw::make_gaussian_ir). Neon target
// (Ip = 21.5645 eV, NIST ASD), 95 eV photons, 800 nm IR. Independent validation against the
// direct-quadrature generator is done elsewhere (synthetic/).

#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <random>
#include <utility>
#include <vector>

#include "retrieval/core/units.h"
#include "retrieval/engines/engine.h"
#include "retrieval/physics/forward_model.h"
#include "retrieval/physics/ir_field.h"
#include "retrieval/physics/pulse_metrics.h"
#include "retrieval/physics/xuv_builders.h"

namespace sw::testing {

struct CaseSpec {
  /// The XUV pulse: 95 eV photons, 150 as transform-limited, GDD 0 unless set (the
  /// GaussianXuvPulse defaults).
  GaussianXuvPulse xuv{};
  /// The IR pulse: 800 nm, 5 fs, 5e12 W/cm^2.
  GaussianIrPulse ir{.fwhm_fs = 5.0, .peak_intensity_Wcm2 = 5e12};
  int delays = 121;
  double delay_first_fs = -6.0;
  double delay_last_fs = 6.0;
  /// Uniform random offsets of +-jitter x (delay step) on each delay (0 = uniform axis).
  double jitter = 0.0;
  /// > 0: delay step forced to this multiple of the grid step (a matched grid for PCGPA),
  /// centred on 0, `delays` of them.
  int matched_ratio = 0;
  std::size_t grid_size = 1024;
  int energies = 400;
  double energy_first_eV = 30.0;
  double energy_step_eV = 0.25;
  /// Poisson noise with this many counts at the trace's peak (0 = noise-free).
  double peak_counts = 0.0;
  /// The field-free spectrum is recorded (IR blocked) with this many times the acquisition
  /// time of one delay row, then normalised to one row (common practice: a reference
  /// spectrum with good statistics).
  double field_free_exposure = 10.0;
  unsigned long long seed = 7;
};

/// The noisy case of the engine tests: Poisson noise at 100 counts at the trace's peak (seed
/// 2024) on a pulse with the given GDD.
inline CaseSpec poisson_100_spec(double gdd_as2) {
  return {.xuv = {.gdd_as2 = gdd_as2}, .peak_counts = 100, .seed = 2024};
}

struct Case {
  RetrievalProblem problem;
  XuvField xuv;
  IrField ir;
};

inline Case make_case(const CaseSpec& c) {
  Case out;
  RetrievalProblem& p = out.problem;
  const double ip = units::eV_to_au(21.5645);  // Ne, NIST ASD
  p.ionization_energy_au = ip;
  p.grid = TimeGrid::for_energy_step(c.grid_size, units::eV_to_au(c.energy_step_eV));
  const double dw = p.grid.dw();
  for (int j = 0; j < c.energies; ++j)
    p.energy_au.push_back(units::eV_to_au(c.energy_first_eV) + dw * j);
  std::mt19937_64 rng(c.seed);
  if (c.matched_ratio > 0) {
    const double step = c.matched_ratio * p.grid.dt();
    for (int i = 0; i < c.delays; ++i) p.delay_au.push_back((i - c.delays / 2) * step);
  } else {
    const double a = units::fs_to_au(c.delay_first_fs), b = units::fs_to_au(c.delay_last_fs);
    const double step = (b - a) / (c.delays - 1);
    std::uniform_real_distribution<double> u(-c.jitter, c.jitter);
    for (int i = 0; i < c.delays; ++i) p.delay_au.push_back(a + step * i + step * u(rng));
    std::sort(p.delay_au.begin(), p.delay_au.end());
  }
  out.xuv = make_gaussian_xuv(p.grid, c.xuv);
  out.ir = make_gaussian_ir(c.ir, units::fs_to_au(-30), units::fs_to_au(30), units::as_to_au(20));
  const double W0 = units::eV_to_au(c.xuv.center_eV) - ip;
  p.central_momentum_au = std::sqrt(2 * W0);
  p.ir_omega_au = units::wavelength_nm_to_omega_au(c.ir.wavelength_nm);
  ForwardModelOptions fo;
  fo.central_momentum_au = p.central_momentum_au;
  fo.energy_jacobian = false;  // the problem holds |a|^2 (engine.h)
  fo.threads = 1;
  const ForwardModel fm(ip, DipoleModel(), fo);
  Eigen::MatrixXd I = fm.trace(out.xuv, out.ir, p.delay_au, p.energy_au);
  const IrField no_field(units::fs_to_au(-30), units::as_to_au(20),
                         std::vector<double>(static_cast<std::size_t>(3001), 0.0));
  Eigen::MatrixXd S = fm.trace(out.xuv, no_field, {0.0}, p.energy_au);
  p.variance = Eigen::MatrixXd::Zero(I.rows(), I.cols());
  if (c.peak_counts > 0) {
    const double scale = c.peak_counts / I.maxCoeff();  // counts per |a|^2 unit
    auto draw = [&](double mean) {
      return static_cast<double>(std::poisson_distribution<long>(mean)(rng));
    };
    for (Eigen::Index i = 0; i < I.rows(); ++i)
      for (Eigen::Index j = 0; j < I.cols(); ++j) {
        const double n = draw(I(i, j) * scale);
        I(i, j) = n / scale;
        p.variance(i, j) = std::max(n, 1.0) / (scale * scale);
      }
    const double fs = scale * c.field_free_exposure;
    for (Eigen::Index j = 0; j < S.cols(); ++j) S(0, j) = draw(S(0, j) * fs) / fs;
  }
  p.intensity = I;
  p.field_free_spectrum.assign(S.data(), S.data() + S.cols());
  return out;
}

/// Headline numbers used by the checks.
struct Metrics {
  double fwhm_as = 0, gdd_as2 = 0, peak_A = 0;
};
inline Metrics metrics(const XuvField& x, const IrField& ir) {
  Metrics m;
  m.fwhm_as = units::au_to_as(intensity_fwhm(x));
  m.gdd_as2 = units::au_to_as2(fit_spectral_phase(x).gdd);
  m.peak_A = ir.peak_vector_potential();
  return m;
}

/// Runs a registered engine on a case with the given options.
inline Reconstruction retrieve(const Case& c, const std::string& engine, EngineOptions o = {}) {
  auto e = make_engine(engine);
  return run_engine(*e, c.problem, o);
}

/// Trace error of the retrieved fields pushed through sw::ForwardModel (an independent
/// evaluation path: cubic-Hermite IR integrals instead of the engine's gate table), over the
/// delays with |tau| <= max_delay_au (the retrieved A(t) covers the scanned range only).
inline double forward_model_error(const Case& c, const Reconstruction& r, double max_delay_au) {
  const RetrievalProblem& p = c.problem;
  std::vector<double> D;
  std::vector<Eigen::Index> rows;
  for (std::size_t i = 0; i < p.delay_au.size(); ++i)
    if (std::abs(p.delay_au[i]) <= max_delay_au) {
      D.push_back(p.delay_au[i]);
      rows.push_back(static_cast<Eigen::Index>(i));
    }
  ForwardModelOptions fo;
  fo.central_momentum_au = p.central_momentum_au;
  fo.energy_jacobian = false;
  fo.threads = 1;
  const Eigen::MatrixXd M =
      ForwardModel(p.ionization_energy_au, DipoleModel(), fo).trace(r.xuv, r.ir, D, p.energy_au);
  Eigen::MatrixXd I(static_cast<Eigen::Index>(rows.size()), p.intensity.cols());
  for (std::size_t i = 0; i < rows.size(); ++i)
    I.row(static_cast<Eigen::Index>(i)) = p.intensity.row(rows[i]);
  return trace_error(I, M);
}

}  // namespace sw::testing

namespace sw::testing {

// Noise-free data keep improving G by a few per cent per 20 iterations for hundreds of
// iterations (there is no noise floor to reach); "converged" here means a relative change of
// G below 2 % over `patience` iterations.
inline EngineOptions noise_free_options() {
  EngineOptions o;
  o.relative_tolerance = 0.02;
  o.max_iterations = 400;
  return o;
}

// Retrieved against true fields on convention-free quantities: 5 % on the duration and the
// field (common practice for attosecond pulse characterisation); the chirp sign right
// (DESIGN.md pitfall) and its size within 10 %.
inline void check_truth(const Case& c, const Reconstruction& r, double tolerance) {
  const Metrics truth = metrics(c.xuv, c.ir), got = metrics(r.xuv, r.ir);
  INFO(r.brief_report());
  INFO("FWHM truth " << truth.fwhm_as << " as, retrieved " << got.fwhm_as << " as");
  INFO("GDD truth " << truth.gdd_as2 << " as^2, retrieved " << got.gdd_as2 << " as^2");
  INFO("peak A truth " << truth.peak_A << ", retrieved " << got.peak_A);
  CHECK(std::abs(got.fwhm_as / truth.fwhm_as - 1) < tolerance);
  CHECK(std::abs(got.peak_A / truth.peak_A - 1) < tolerance);
  if (std::abs(truth.gdd_as2) > 1000) {
    CHECK(got.gdd_as2 * truth.gdd_as2 > 0);
    CHECK(std::abs(got.gdd_as2 / truth.gdd_as2 - 1) < 0.1);
  } else {
    CHECK(std::abs(got.gdd_as2) < 300);
  }
}

// Runs a registered engine on a case and checks it against the truth to 5 % (check_truth) and
// that it converged.
inline Reconstruction retrieve_checked(const Case& c, const std::string& engine,
                                       EngineOptions o = {}) {
  Reconstruction r = retrieve(c, engine, std::move(o));
  check_truth(c, r, 0.05);
  CHECK(r.converged());
  return r;
}

}  // namespace sw::testing
