// Linearised replicas of a full-model fit (retrieval/engines/full_model_laplace.h): the Newton step
// that conjugate gradients take with adjoint-gradient Hessian products, against the same step
// solved densely as a weighted linear least-squares problem with the Jacobian from finite
// differences of the forward model (no adjoint, no CG); and the cases it must refuse.
#include <catch2/catch.hpp>

#include <Eigen/Dense>
#include <cmath>
#include <random>
#include <vector>

#include "retrieval/core/units.h"
#include "retrieval/engines/full_model_engine.h"
#include "retrieval/engines/full_model_internal.h"
#include "retrieval/engines/full_model_laplace.h"
#include "retrieval/physics/forward_model.h"
#include "retrieval/physics/pulse_metrics.h"
#include "retrieval/physics/xuv_builders.h"
#include "tests/full_model_test_support.h"
#include "tests/test_support.h"

using namespace sw;
using sw::test::axis;

namespace {

// A neon scan (21 delays x 100 energies, 110 eV, 120 as TL with 1500 as^2, 800 nm 5 fs
// 1e13 W/cm^2) counted like preprocess() hands it to the engines, and its truth as an estimate.
struct Small {
  RetrievalProblem problem;
  Reconstruction truth;
};

Small small_scan() {
  Small s;
  const double ip = units::eV_to_au(21.5645);  // neon 2p, NIST ASD
  const TimeGrid grid = TimeGrid::for_energy_step(256, units::eV_to_au(0.6));
  const std::vector<double> W = axis(units::eV_to_au(60.0), units::eV_to_au(0.6), 100);
  const std::vector<double> D = axis(units::fs_to_au(-1.5), units::fs_to_au(0.15), 21);
  GaussianXuvPulse xp;
  xp.center_eV = 110.0;
  xp.transform_limited_fwhm_as = 120.0;
  xp.gdd_as2 = 1500.0;
  s.truth.xuv = make_gaussian_xuv(grid, xp);
  GaussianIrPulse ir;
  ir.peak_intensity_Wcm2 = 1e13;
  ir.cep_rad = 0.4;
  const double span = D.back() + grid.window();
  s.truth.ir = make_gaussian_ir(ir, -span, span, 0.5);
  s.truth.engine = "full-model";
  s.truth.model = "full";
  ForwardModelOptions o;
  o.momentum = MomentumModel::kFull;
  const ForwardModel fm(ip, DipoleModel(), o);
  const Eigen::MatrixXd dens = fm.trace(s.truth.xuv, s.truth.ir, D, W);
  const IrField no_ir(-span, 1.0, std::vector<double>(8, 0.0));
  const Eigen::MatrixXd ff = fm.trace(s.truth.xuv, no_ir, {0.0}, W);
  const double k = 400.0 / dens.maxCoeff();
  std::mt19937 rng(11);
  RetrievalProblem& R = s.problem;
  test::fill_counts(R, dens, W, k, true, rng);
  test::fill_field_free(R, ff, W, k);
  R.delay_au = D;
  R.grid = grid;
  R.ionization_energy_au = ip;
  R.ir_omega_au = units::wavelength_nm_to_omega_au(800.0);
  return s;
}

// Parametric IR (six parameters) and no IR penalty: the cost is then the plain weighted least
// squares of full_model_engine.h, which the dense solve below writes out.
EngineOptions laplace_engine_options(const Reconstruction& estimate) {
  EngineOptions eo;
  eo.settings.full_model.ir = "parametric";
  eo.settings.full_model.ir_lowpass_weight = 0.0;
  eo.initial_xuv = estimate.xuv;
  eo.initial_ir = estimate.ir;
  return eo;
}

// |a - b| / |b - c| over the samples (complex or real; std::norm is |.|^2 for both).
template <class V>
double relative_difference(const V& a, const V& b, const V& c) {
  double num = 0, den = 0;
  for (std::size_t i = 0; i < a.size(); ++i) {
    num += std::norm(a[i] - b[i]);
    den += std::norm(b[i] - c[i]);
  }
  return std::sqrt(num / den);
}

}  // namespace

TEST_CASE("laplace replica: the CG Newton step is the dense weighted least-squares step",
          "[fullmodel][laplace]") {
  Small s = small_scan();
  const EngineOptions eo = laplace_engine_options(s.truth);
  const FullModelSettings& st = eo.settings.full_model;
  // Counts the model at the encoded truth fits exactly (the linearisation point of a converged
  // fit): the Gauss-Newton step is then the first-order response of the minimum to the noise.
  {
    auto start = full_model_detail::make_full_model_start(s.problem, eo, st, MomentumModel::kFull);
    double mu = 0;
    const Eigen::MatrixXd m = start.objective->model(start.x.data(), &mu);
    s.problem.intensity = mu * m;
  }
  LaplaceOptions lo;
  lo.seed = 5;
  lo.cg_tolerance = 1e-4;
  lo.max_cg_iterations = 2000;
  const LaplaceReplicas lap(s.problem, eo, s.truth, lo);
  REQUIRE(lap.ok());
  // Replica 0 is the plain CG solve whose pairs precondition the others (LaplaceOptions::
  // precondition); replica 1 is solved preconditioned. Both are checked against the dense step.
  const LaplaceReplica reps[2] = {lap.replica(0), lap.replica(1)};
  for (const LaplaceReplica& rep : reps) {
    INFO(rep.failure);
    REQUIRE(rep.ok);
    CHECK(rep.cg_iterations > 1);
    CHECK(rep.relative_residual <= 1e-4);
  }
  INFO("CG products: plain " << reps[0].cg_iterations << ", preconditioned "
                             << reps[1].cg_iterations);
  // The quasi-Newton preconditioner from one solve's pairs cuts the next solve's products
  // (Morales and Nocedal, SIAM J. Optim. 10, 1079 (2000), report factors of about 2-3 on
  // sequences of systems with one matrix; from memory): at least a third fewer here.
  CHECK(3 * reps[1].cg_iterations < 2 * reps[0].cg_iterations);

  // The same step solved densely: min over (z, dmu) of sum_ij w_ij (mu J z + dmu m - dM)_ij^2,
  // J = dm/dx by central differences of the forward model (variable projection: the projected
  // cost's Gauss-Newton step is the joint step in (x, mu); G. H. Golub and V. Pereyra, SIAM J.
  // Numer. Anal. 10, 413 (1973)), minimum-norm solution by a complete orthogonal decomposition
  // (numpy.linalg.lstsq's definition; the global phase of the XUV is the null direction).
  auto start = full_model_detail::make_full_model_start(s.problem, eo, st, MomentumModel::kFull);
  const FullModelObjective& f = *start.objective;
  const std::vector<double>& x = start.x;
  double mu = 0;
  const Eigen::MatrixXd m0 = f.model(x.data(), &mu);
  const Eigen::Index rows = m0.size(), n = static_cast<Eigen::Index>(x.size());
  const Eigen::VectorXd sw = f.weights().reshaped().cwiseSqrt();
  Eigen::MatrixXd A(rows, n + 1);
  const double h = 1e-6;
  for (Eigen::Index k = 0; k < n; ++k) {
    std::vector<double> xp = x, xm = x;
    xp[static_cast<std::size_t>(k)] += h;
    xm[static_cast<std::size_t>(k)] -= h;
    const Eigen::MatrixXd d = (f.model(xp.data(), nullptr) - f.model(xm.data(), nullptr)) / (2 * h);
    A.col(k) = mu * sw.cwiseProduct(d.reshaped());
  }
  A.col(n) = sw.cwiseProduct(m0.reshaped());
  // The singular values of the weighted Jacobian fall from 1 to ~0.05 of the largest and then
  // jump below 2e-5: those last directions change the model only where a = 0 (spectral bins
  // without signal), where |a|^2 has no first-order term and the cost is quartic, not quadratic.
  // CG, stopped at its tolerance, leaves them alone; the dense step is therefore the truncated
  // pseudo-inverse that drops singular values below 1e-3 of the largest (G. H. Golub and C. F. Van
  // Loan, Matrix Computations, 4th ed., Johns Hopkins 2013, sec. 5.5, from memory).
  const Eigen::JacobiSVD<Eigen::MatrixXd> svd(A, Eigen::ComputeThinU | Eigen::ComputeThinV);
  const Eigen::VectorXd sv = svd.singularValues();
  int kept = 0;
  for (Eigen::Index i = 0; i < sv.size(); ++i) kept += sv(i) > 1e-3 * sv(0);
  CHECK(kept >= n - 4);  // only a handful of directions without curvature
  for (int r = 0; r < 2; ++r) {
    const LaplaceReplica& rep = reps[r];
    const Eigen::MatrixXd dM = lap.replica_counts(r) - s.problem.intensity;
    const Eigen::VectorXd b = sw.cwiseProduct(dM.reshaped());
    Eigen::VectorXd c = svd.matrixU().transpose() * b;
    for (Eigen::Index i = 0; i < sv.size(); ++i) c(i) = sv(i) > 1e-3 * sv(0) ? c(i) / sv(i) : 0.0;
    const Eigen::VectorXd sol = svd.matrixV() * c;
    std::vector<double> xb(x.size());
    for (std::size_t i = 0; i < x.size(); ++i) xb[i] = x[i] + sol(static_cast<Eigen::Index>(i));

    // The envelope and A(t) of the two steps (the envelope's global phase is the null
    // direction: both are minimum-norm, so both leave it alone).
    const CVec e_cg = rep.fields.xuv.envelope(), e_dense = f.envelope(xb.data()),
               e_0 = f.envelope(x.data());
    const double de = relative_difference(e_cg, e_dense, e_0);
    const std::vector<double> a_cg = rep.fields.ir.vector_potential(),
                              a_dense = f.ir_field(xb.data()).vector_potential(),
                              a_0 = f.ir_field(x.data()).vector_potential();
    const double da = relative_difference(a_cg, a_dense, a_0);
    auto fwhm_as = [&](const CVec& e) {
      return units::au_to_as(intensity_fwhm(XuvField(s.problem.grid, f.carrier_au(), e)));
    };
    const double move_cg = fwhm_as(e_cg) - fwhm_as(e_0),
                 move_dense = fwhm_as(e_dense) - fwhm_as(e_0);
    INFO("replica " << r << ": envelope step difference " << de << ", A(t) step difference " << da
                    << ", FWHM move " << move_cg << " as (CG) and " << move_dense << " as (dense)");
    // The steps agree within a few per cent of their size (the rest: CG's small components
    // along the dropped directions, and forward-difference Hessian products, relative error
    // ~1e-7; Nocedal and Wright 2006, ch. 7); the FWHM moves within 5 %.
    CHECK(de < 0.1);
    CHECK(da < 0.1);
    CHECK(std::abs(move_dense) > 0.05);  // the noise does move the pulse
    CHECK(std::abs(move_cg - move_dense) < 0.05 * std::abs(move_dense));
    // The centre is the estimate re-encoded: the same envelope as the dense start.
    CHECK(relative_difference(lap.centre().xuv.envelope(), e_0, e_dense) < 1e-9);
  }
}

TEST_CASE("laplace replicas refuse what they cannot linearise", "[fullmodel][laplace]") {
  Small s = small_scan();
  const EngineOptions eo = laplace_engine_options(s.truth);
  SECTION("no variances") {
    s.problem.variance.resize(0, 0);
    const LaplaceReplicas lap(s.problem, eo, s.truth, LaplaceOptions());
    CHECK_FALSE(lap.ok());
    CHECK(lap.failure().find("no variances") != std::string::npos);
    CHECK_FALSE(lap.replica(0).ok);
    CHECK_THROWS(lap.replica_counts(0));
  }
  SECTION("joint lines") {
    ExtraLine l;
    l.name = "2s";
    l.ionization_energy_au = units::eV_to_au(48.5);
    l.energy_lo_au = s.problem.energy_au.front();
    l.energy_hi_au = s.problem.energy_au.back();
    s.problem.extra_lines.push_back(l);
    const LaplaceReplicas lap(s.problem, eo, s.truth, LaplaceOptions());
    CHECK_FALSE(lap.ok());
    CHECK(lap.failure().find("joint lines") != std::string::npos);
  }
  SECTION("invalid options") {
    LaplaceOptions bad;
    bad.cg_tolerance = 0.0;
    CHECK_FALSE(bad.validate().empty());
    CHECK_THROWS_AS(LaplaceReplicas(s.problem, eo, s.truth, bad), Error);
  }
}
