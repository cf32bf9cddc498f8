// ForwardAdjoint: forward values against sw::ForwardModel, hand-written adjoint against
// central finite differences (the standard check of reverse-mode derivatives; e.g.
// J. Nocedal and S. J. Wright, Numerical Optimization, 2nd ed. (2006), Sec. 8.1).
#include <catch2/catch.hpp>

#include <cmath>
#include <initializer_list>
#include <random>

#include "retrieval/core/units.h"
#include "retrieval/physics/forward_adjoint.h"
#include "retrieval/physics/forward_model.h"
#include "tests/test_support.h"

using namespace sw;
using sw::test::axis;

namespace {

// A chirped ~100 as pulse at the given carrier with a small random ripple, so that no
// symmetry hides a sign error in the adjoint.
CVec test_envelope(const TimeGrid& g, unsigned seed) {
  std::mt19937 rng(seed);
  std::uniform_real_distribution<double> u(-1, 1);
  CVec e(g.size());
  const double tf = units::as_to_au(100);
  for (std::size_t i = 0; i < g.size(); ++i) {
    const double t = g.time(i) - units::as_to_au(20);
    const double env = std::exp(-2 * std::log(2.) * t * t / (tf * tf));
    e[i] = env * std::polar(1.0 + 0.1 * u(rng), 0.4 * t * t / (tf * tf) + 0.1 * u(rng));
  }
  return e;
}

struct Small {
  double ip = units::eV_to_au(21.5645);  // neon, NIST ASD
  TimeGrid grid = TimeGrid::for_energy_step(256, units::eV_to_au(0.5));
  double carrier = units::eV_to_au(21.5645 + 108.0);  // on the energy axis below
  std::vector<double> W = axis(units::eV_to_au(60.0), units::eV_to_au(0.5), 150);
  std::vector<double> D = axis(units::fs_to_au(-2.0), units::fs_to_au(0.4), 11);
  IrField ir;
  Small() {
    GaussianIrPulse P;
    P.peak_intensity_Wcm2 = 1e13;
    P.cep_rad = 0.3;
    P.chirp_rad_per_fs2 = 0.02;
    ir = make_gaussian_ir(P, units::fs_to_au(-9), units::fs_to_au(9), 4.0);
  }
};

// "Measured" data of the cost checks: the model M of another field pair (envelope seed 9, IR
// 10 % weaker) and positive weights w = 1 / (M + 0.05 max M).
void measured_data(ForwardAdjoint& fa, const Small& S, Eigen::MatrixXd* M, Eigen::MatrixXd* w) {
  std::vector<double> A2 = S.ir.vector_potential();
  for (double& a : A2) a *= 0.9;
  ScaledCostParts tmp;
  const Eigen::MatrixXd w0 = Eigen::MatrixXd::Ones(static_cast<Eigen::Index>(S.D.size()),
                                                   static_cast<Eigen::Index>(S.W.size()));
  fa.scaled_cost(test_envelope(S.grid, 9), IrField(S.ir.t0(), S.ir.dt(), A2), w0, w0, false, &tmp,
                 M);
  *w = (M->array() + 0.05 * M->maxCoeff()).inverse().matrix();
}

double max_rel_diff(const Eigen::MatrixXcd& a, const Eigen::MatrixXcd& b) {
  return (a - b).cwiseAbs().maxCoeff() / b.cwiseAbs().maxCoeff();
}

// C(theta) of the scale-projected weighted least squares, mu eliminated.
double projected_cost(const ScaledCostParts& p) { return p.c0 - p.c1 * p.c1 / (4 * p.c2); }

// Worst |central difference - hand-written gradient| and largest |central difference| over the
// checked coordinates.
struct FdCheck {
  double worst = 0, gscale = 0;
  void add(double fd, double an) {
    worst = std::max(worst, std::abs(fd - an));
    gscale = std::max(gscale, std::abs(fd));
  }
};

// Central differences of cost(eps, ir) along the real and imaginary parts of the XUV samples
// `samples` (step 1e-5 |eps[mid]|) against grad(s, part) (part 0: real, 1: imaginary).
template <class Cost, class Grad>
FdCheck check_xuv_samples(const Cost& cost, const CVec& eps, const IrField& ir,
                          std::initializer_list<std::size_t> samples, std::size_t mid,
                          const Grad& grad) {
  FdCheck c;
  for (std::size_t s : samples)
    for (int part = 0; part < 2; ++part) {
      const cdouble dir = part == 0 ? cdouble(1, 0) : cdouble(0, 1);
      const double h = 1e-5 * std::abs(eps[mid]);
      CVec ep = eps, em = eps;
      ep[s] += h * dir;
      em[s] -= h * dir;
      c.add((cost(ep, ir) - cost(em, ir)) / (2 * h), grad(s, part));
    }
  return c;
}

// Central differences of cost(eps, ir) along the IR samples `samples` of A(t) (step 1e-6)
// against grad(k).
template <class Cost, class Grad>
FdCheck check_ir_samples(const Cost& cost, const CVec& eps, const IrField& ir,
                         std::initializer_list<std::size_t> samples, const Grad& grad) {
  FdCheck c;
  const std::vector<double>& A = ir.vector_potential();
  for (std::size_t k : samples) {
    const double h = 1e-6;
    std::vector<double> Ap = A, Am = A;
    Ap[k] += h;
    Am[k] -= h;
    c.add((cost(eps, IrField(ir.t0(), ir.dt(), Ap)) - cost(eps, IrField(ir.t0(), ir.dt(), Am))) /
              (2 * h),
          grad(k));
  }
  return c;
}

}  // namespace

TEST_CASE("forward values equal sw::ForwardModel (full and CMA)", "[adjoint]") {
  // The engine must fit exactly the model the rest of the project uses (forward_model.h).
  Small S;
  const DipoleModel d(DipoleKind::kHydrogenic, S.ip,
                      2.9);  // Lewenstein et al., PRA 49, 2117 (1994)
  const CVec eps = test_envelope(S.grid, 3);
  ForwardModelOptions o;
  o.momentum = MomentumModel::kFull;
  // Both block layouts: the fixed one (several blocks on this broadband axis) and the
  // fewest-nodes plan (the default).
  for (bool fewest : {false, true}) {
    ForwardModelOptions of = o;
    of.fewest_nodes = fewest;
    const Eigen::MatrixXcd r =
        ForwardModel(S.ip, d, of).amplitude(XuvField(S.grid, S.carrier, eps), S.ir, S.D, S.W);
    ForwardAdjoint f(S.ip, d, S.grid, S.carrier, S.D, S.W, 2);
    f.plan_full(S.ir, of);
    if (!fewest) CHECK(f.plan().blocks.size() >= 2);
    CHECK(max_rel_diff(f.amplitude(eps, S.ir), r) < 1e-10);
  }
  const Eigen::MatrixXcd ref =
      ForwardModel(S.ip, d, o).amplitude(XuvField(S.grid, S.carrier, eps), S.ir, S.D, S.W);
  ForwardAdjoint fa(S.ip, d, S.grid, S.carrier, S.D, S.W, 2);
  fa.plan_full(S.ir, o);

  // A carrier off the energy bins: the carrier shift path of ForwardModel.
  const double off = S.carrier + 0.3 * S.grid.dw();
  const Eigen::MatrixXcd ref_off =
      ForwardModel(S.ip, d, o).amplitude(XuvField(S.grid, off, eps), S.ir, S.D, S.W);
  ForwardAdjoint fa_off(S.ip, d, S.grid, off, S.D, S.W, 1);
  fa_off.plan_full(S.ir, o);
  CHECK(max_rel_diff(fa_off.amplitude(eps, S.ir), ref_off) < 1e-10);

  ForwardModelOptions c;
  c.central_momentum_au = std::sqrt(2 * S.W[96]);
  const Eigen::MatrixXcd ref_c =
      ForwardModel(S.ip, d, c).amplitude(XuvField(S.grid, S.carrier, eps), S.ir, S.D, S.W);
  fa.plan_central(c.central_momentum_au);
  CHECK(max_rel_diff(fa.amplitude(eps, S.ir), ref_c) < 1e-10);

  // Constant dipole (the exit waves formed without gate arrays), full plan and CMA.
  const DipoleModel one;
  ForwardAdjoint fa1(S.ip, one, S.grid, S.carrier, S.D, S.W, 2);
  fa1.plan_full(S.ir, o);
  CHECK(
      max_rel_diff(
          fa1.amplitude(eps, S.ir),
          ForwardModel(S.ip, one, o).amplitude(XuvField(S.grid, S.carrier, eps), S.ir, S.D, S.W)) <
      1e-10);
  fa1.plan_central(c.central_momentum_au);
  CHECK(
      max_rel_diff(
          fa1.amplitude(eps, S.ir),
          ForwardModel(S.ip, one, c).amplitude(XuvField(S.grid, S.carrier, eps), S.ir, S.D, S.W)) <
      1e-10);
}

TEST_CASE("plan_covers detects an IR field the blocks were not sized for", "[adjoint]") {
  Small S;
  ForwardModelOptions o;
  o.momentum = MomentumModel::kFull;
  o.fewest_nodes = GENERATE(true, false);  // both block layouts
  ForwardAdjoint fa(S.ip, DipoleModel(), S.grid, S.carrier, S.D, S.W, 1);
  fa.plan_full(S.ir, o);
  CHECK(fa.plan_covers(S.ir, 0.0));
  auto scaled = [&](double f) {
    std::vector<double> A = S.ir.vector_potential();
    for (double& a : A) a *= f;  // the I1 excursion grows by f
    return IrField(S.ir.t0(), S.ir.dt(), A);
  };
  CHECK(fa.plan_covers(scaled(1.1), 0.25));
  CHECK_FALSE(fa.plan_covers(scaled(1.5), 0.2));  // 50 % more streaking
}

TEST_CASE("adjoint of IrField's sample maps matches finite differences", "[adjoint]") {
  // The linear functional L(A) = sum_t [cA A(t) + c1 I1(t) + c2 I2(t)] over off-grid times,
  // differentiated by ir_samples_adjoint through the Hermite weights, against central
  // differences of IrField itself.
  Small S;
  std::mt19937 rng(7);
  std::uniform_real_distribution<double> u(-1, 1);
  std::vector<double> times;
  for (int k = 0; k < 300; ++k) times.push_back(units::fs_to_au(10.0) * u(rng));
  times.push_back(S.ir.t0() - 3.0);  // before the window: I1, I2 are the totals
  const double cA = 0.7, c1 = -0.4, c2 = 1.3;
  auto L = [&](const IrField& f) {
    double s = 0;
    for (double t : times) {
      const VolkovIntegrals v = f.at(t);
      s += cA * v.A + c1 * v.I1 + c2 * v.I2;
    }
    return s;
  };
  // Adjoint: the same Hermite bookkeeping as ForwardAdjoint, via a one-delay model is
  // exercised below; here the stored-array adjoints are formed directly.
  const std::size_t n = S.ir.size();
  std::vector<double> bA(n, 0), bdA(n, 0), bI1(n, 0), bI2(n, 0);
  const std::vector<double>& A = S.ir.vector_potential();
  for (double t : times) {
    const double x = (t - S.ir.t0()) / S.ir.dt();
    if (x >= static_cast<double>(n - 1)) continue;  // after the window: all zero
    if (x <= 0) {
      bI1[0] += c1;
      bI2[0] += c2;
      continue;
    }
    const std::size_t i = static_cast<std::size_t>(x);
    const double s = x - static_cast<double>(i), s2 = s * s, s3 = s2 * s, h = S.ir.dt();
    const double h00 = 2 * s3 - 3 * s2 + 1, h10 = s3 - 2 * s2 + s, h01 = -2 * s3 + 3 * s2,
                 h11 = s3 - s2;
    bA[i] += h00 * cA - h10 * h * (c1 + 2 * A[i] * c2);
    bA[i + 1] += h01 * cA - h11 * h * (c1 + 2 * A[i + 1] * c2);
    bdA[i] += h10 * h * cA;
    bdA[i + 1] += h11 * h * cA;
    bI1[i] += h00 * c1;
    bI1[i + 1] += h01 * c1;
    bI2[i] += h00 * c2;
    bI2[i + 1] += h01 * c2;
  }
  const std::vector<double> g = ir_samples_adjoint(S.ir, bA, bdA, bI1, bI2);
  double worst = 0, gmax = 0;
  for (std::size_t k : {std::size_t{0}, std::size_t{1}, std::size_t{2}, n / 3, n / 2, n / 2 + 1,
                        2 * n / 3, n - 3, n - 2, n - 1}) {
    const double h = 1e-5;
    std::vector<double> Ap = A, Am = A;
    Ap[k] += h;
    Am[k] -= h;
    const double fd =
        (L(IrField(S.ir.t0(), S.ir.dt(), Ap)) - L(IrField(S.ir.t0(), S.ir.dt(), Am))) / (2 * h);
    worst = std::max(worst, std::abs(fd - g[k]));
    gmax = std::max(gmax, std::abs(fd));
  }
  CHECK(gmax > 0);
  CHECK(worst / gmax < 1e-7);
}

TEST_CASE("gradient of the scale-projected cost matches central differences", "[adjoint]") {
  // Variable projection (Golub and Pereyra, SIAM J. Numer. Anal. 10, 413 (1973)): the gradient
  // of C(mu*(theta), theta) is mu*^2 grad c2 + mu* grad c1. Checked for XUV envelope samples
  // (real and imaginary parts) and IR samples, full model, hydrogenic dipole.
  Small S;
  const DipoleModel d(DipoleKind::kHydrogenic, S.ip, 2.9);
  const CVec eps = test_envelope(S.grid, 5);
  ForwardModelOptions o;
  o.momentum = MomentumModel::kFull;
  ForwardAdjoint fa(S.ip, d, S.grid, S.carrier, S.D, S.W, 2);
  fa.plan_full(S.ir, o);
  // "Measured" data: the model of a different field pair, plus positive weights.
  Eigen::MatrixXd M, w;
  measured_data(fa, S, &M, &w);

  ScaledCostParts P;
  fa.scaled_cost(eps, S.ir, M, w, true, &P);
  const double mu = -P.c1 / (2 * P.c2);
  auto cost = [&](const CVec& e, const IrField& f) {
    ScaledCostParts q;
    fa.scaled_cost(e, f, M, w, false, &q);
    return projected_cost(q);
  };
  const double C0 = projected_cost(P);
  CHECK(C0 > 0);

  // XUV samples around the pulse: dC/dRe = 2 Re eps_bar, dC/dIm = 2 Im eps_bar.
  const std::size_t mid = S.grid.size() / 2;
  const FdCheck x = check_xuv_samples(cost, eps, S.ir, {mid - 6, mid - 1, mid, mid + 2, mid + 5},
                                      mid, [&](std::size_t s, int part) {
                                        const cdouble eb =
                                            mu * mu * P.eps_bar2[s] + mu * P.eps_bar1[s];
                                        return part == 0 ? 2 * eb.real() : 2 * eb.imag();
                                      });
  CHECK(x.gscale > 0);
  CHECK(x.worst / x.gscale < 1e-6);

  // IR samples where the XUV probes the field (delays +- pulse) and near the window edges.
  const std::size_t n = S.ir.size();
  const FdCheck a = check_ir_samples(
      cost, eps, S.ir, {n / 2 - 40, n / 2 - 7, n / 2, n / 2 + 3, n / 2 + 33, std::size_t{3}},
      [&](std::size_t k) { return mu * mu * P.A_bar2[k] + mu * P.A_bar1[k]; });
  CHECK(a.gscale > 0);
  CHECK(a.worst / a.gscale < 1e-6);
}

TEST_CASE("projected_cost: combined gradient with an extra term matches central differences",
          "[adjoint]") {
  // Variable projection (Golub and Pereyra, SIAM J. Numer. Anal. 10, 413 (1973)) with a further
  // term e2 mu^2 + e1 mu (as the engine's spectrum term): C = c0 + mu*(c1 + e1) + mu*^2 (c2 + e2)
  // at mu* = -(c1 + e1) / (2 (c2 + e2)); its gradient at fixed mu* must match central
  // differences (common practice; Nocedal and Wright, Numerical Optimization (2006), Sec. 8.1).
  // Full model with a hydrogenic dipole (gate arrays; 2 threads), with a constant dipole and an
  // odd node count (gates formed on the fly, paired and unpaired nodes), the CMA plan, and the
  // full model with a 1.5 eV spectrometer resolution (model counts blurred, adjoint through K^T).
  Small S;
  for (const int config : {0, 1, 2, 3}) {
    INFO("configuration " << config);
    const bool full = config != 2;
    const DipoleModel d =
        config == 0 ? DipoleModel(DipoleKind::kHydrogenic, S.ip, 2.9) : DipoleModel();
    ForwardAdjoint fa(S.ip, d, S.grid, S.carrier, S.D, S.W, full ? 2 : 1);
    if (full) {
      ForwardModelOptions o;
      o.momentum = MomentumModel::kFull;
      if (config == 1) o.chebyshev_nodes = 5;
      fa.plan_full(S.ir, o);
    } else {
      fa.plan_central(std::sqrt(2.0 * S.W[S.W.size() / 2]));
    }
    if (config == 3) fa.set_energy_resolution(units::eV_to_au(1.5));
    const CVec eps = test_envelope(S.grid, 5);
    Eigen::MatrixXd M, w;
    measured_data(fa, S, &M, &w);
    // Extra term of the size of the data part's, so that it moves mu* visibly.
    ScaledCostParts tmp;
    fa.scaled_cost(eps, S.ir, M, w, false, &tmp);
    const double e2 = 0.3 * tmp.c2, e1 = 0.1 * tmp.c1;
    auto cost = [&](const CVec& e, const IrField& f) {
      ProjectedCostParts q;
      fa.projected_cost(e, f, M, w, e2, e1, false, &q);
      return q.c0 + q.mu * (q.c1 + e1) + q.mu * q.mu * (q.c2 + e2);
    };
    ProjectedCostParts P;
    fa.projected_cost(eps, S.ir, M, w, e2, e1, true, &P);
    CHECK(P.mu == Approx(-(tmp.c1 + e1) / (2 * (tmp.c2 + e2))).epsilon(1e-12));
    CHECK(P.c2 == Approx(tmp.c2).epsilon(1e-12));
    const std::size_t mid = S.grid.size() / 2;
    const FdCheck x = check_xuv_samples(
        cost, eps, S.ir, {mid - 6, mid, mid + 5}, mid, [&](std::size_t s, int part) {
          return part == 0 ? 2 * P.eps_bar[s].real() : 2 * P.eps_bar[s].imag();
        });
    CHECK(x.gscale > 0);
    CHECK(x.worst / x.gscale < 1e-6);
    const std::size_t n = S.ir.size();
    const FdCheck a = check_ir_samples(cost, eps, S.ir, {n / 2 - 7, n / 2, n / 2 + 33},
                                       [&](std::size_t k) { return P.A_bar[k]; });
    CHECK(a.gscale > 0);
    CHECK(a.worst / a.gscale < 1e-6);
  }
}

TEST_CASE("vjp is the transpose of the linearised model", "[adjoint]") {
  // Dot-product test: 2 Re <a_bar, J dx> = 2 Re <eps_bar, d eps> + <A_bar, dA> with J dx from
  // central differences of the forward model, CMA plan, constant dipole.
  Small S;
  const CVec eps = test_envelope(S.grid, 11);
  ForwardAdjoint fa(S.ip, DipoleModel(), S.grid, S.carrier, S.D, S.W, 1);
  fa.plan_central(std::sqrt(2 * S.W[96]));
  std::mt19937 rng(1);
  std::normal_distribution<double> nrm;
  Eigen::MatrixXcd abar(static_cast<Eigen::Index>(S.D.size()),
                        static_cast<Eigen::Index>(S.W.size()));
  for (Eigen::Index i = 0; i < abar.size(); ++i) abar(i) = cdouble(nrm(rng), nrm(rng));
  CVec eb;
  std::vector<double> Ab;
  fa.vjp(eps, S.ir, abar, &eb, &Ab);
  CVec de(eps.size());
  for (auto& x : de) x = cdouble(nrm(rng), nrm(rng)) * 1e-3;
  std::vector<double> dA(S.ir.size());
  for (auto& x : dA) x = 1e-3 * nrm(rng);
  auto fwd = [&](double h) {
    CVec e = eps;
    for (std::size_t s = 0; s < e.size(); ++s) e[s] += h * de[s];
    std::vector<double> A = S.ir.vector_potential();
    for (std::size_t k = 0; k < A.size(); ++k) A[k] += h * dA[k];
    return fa.amplitude(e, IrField(S.ir.t0(), S.ir.dt(), A));
  };
  const double h = 1e-3;
  const Eigen::MatrixXcd Jdx = (fwd(h) - fwd(-h)) / (2 * h);
  double lhs = 2 * (abar.conjugate().cwiseProduct(Jdx)).sum().real();
  double rhs = 0;
  for (std::size_t s = 0; s < eps.size(); ++s) rhs += 2 * (std::conj(eb[s]) * de[s]).real();
  for (std::size_t k = 0; k < dA.size(); ++k) rhs += Ab[k] * dA[k];
  CHECK(std::abs(lhs - rhs) / std::abs(lhs) < 1e-6);
}

TEST_CASE("energy resolution: model counts are the unblurred counts convolved with a Gaussian",
          "[adjoint]") {
  // Reference: a discrete convolution with a unit-area Gaussian of FWHM 2 sqrt(2 ln 2) sigma,
  // written out here on the uniform axis (as numpy.convolve of |a|^2 with the sampled, normalised
  // kernel would give); compared away from the axis ends, where the engine renormalises.
  Small S;
  ForwardAdjoint fa(S.ip, DipoleModel(), S.grid, S.carrier, S.D, S.W, 1);
  ForwardModelOptions o;
  o.momentum = MomentumModel::kFull;
  fa.plan_full(S.ir, o);
  const CVec eps = test_envelope(S.grid, 5);
  const Eigen::MatrixXd ones = Eigen::MatrixXd::Ones(static_cast<Eigen::Index>(S.D.size()),
                                                     static_cast<Eigen::Index>(S.W.size()));
  ScaledCostParts tmp;
  Eigen::MatrixXd sharp, blurred;
  fa.scaled_cost(eps, S.ir, ones, ones, false, &tmp, &sharp);
  const double fwhm_eV = 2.0, step_eV = 0.5;
  fa.set_energy_resolution(units::eV_to_au(fwhm_eV));
  fa.scaled_cost(eps, S.ir, ones, ones, false, &tmp, &blurred);
  const double sigma = fwhm_eV / (2.0 * std::sqrt(2.0 * std::log(2.0))) / step_eV;  // in bins
  const int half = static_cast<int>(std::floor(4.0 * sigma));
  std::vector<double> k;
  double sum = 0;
  for (int t = -half; t <= half; ++t)
    k.push_back(std::exp(-0.5 * t * t / (sigma * sigma))), sum += k.back();
  for (double& x : k) x /= sum;
  double worst = 0;
  for (Eigen::Index i = 0; i < sharp.rows(); ++i)
    for (Eigen::Index j = half + 1; j < sharp.cols() - half - 1; ++j) {
      double ref = 0;
      for (int t = -half; t <= half; ++t)
        ref += k[static_cast<std::size_t>(t + half)] * sharp(i, j + t);
      worst = std::max(worst, std::abs(blurred(i, j) - ref));
    }
  CHECK(worst < 1e-12 * sharp.maxCoeff());
  // The blur conserves counts in the interior and lowers the peak of a structured row.
  CHECK(blurred.maxCoeff() < sharp.maxCoeff());
  // A resolution below a third of the energy step is ignored (common practice: sub-bin).
  fa.set_energy_resolution(units::eV_to_au(0.1));
  Eigen::MatrixXd again;
  fa.scaled_cost(eps, S.ir, ones, ones, false, &tmp, &again);
  CHECK((again - sharp).cwiseAbs().maxCoeff() == 0.0);
}

TEST_CASE("projected_cost: the phase store changes no number", "[adjoint]") {
  // The fast path (phase factors of the forward pass kept for the adjoint pass) against the
  // reference path that forms them again (limit 0), and a store that holds only some delays:
  // the same arithmetic in the same order, so the same bits (common practice for a cache).
  Small S;
  const CVec eps = test_envelope(S.grid, 5);
  ForwardModelOptions o;
  o.momentum = MomentumModel::kFull;
  ForwardAdjoint fa(S.ip, DipoleModel{}, S.grid, S.carrier, S.D, S.W, 1);
  fa.plan_full(S.ir, o);
  Eigen::MatrixXd M;
  ScaledCostParts tmp;
  const Eigen::MatrixXd w = Eigen::MatrixXd::Ones(static_cast<Eigen::Index>(S.D.size()),
                                                  static_cast<Eigen::Index>(S.W.size()));
  fa.scaled_cost(test_envelope(S.grid, 9), S.ir, w, w, false, &tmp, &M);
  auto run = [&](std::size_t limit) {
    fa.set_phase_store_limit(limit);
    ProjectedCostParts P;
    fa.projected_cost(eps, S.ir, M, w, 0.0, 0.0, true, &P);
    return P;
  };
  const ProjectedCostParts ref = run(0);
  std::size_t arrays = 0;
  for (const MomentumBlock& b : fa.plan().blocks) arrays += 1 + (b.nodes.size() + 1) / 2;
  const std::size_t per_delay = 2 * arrays * S.grid.size() * sizeof(double);
  for (std::size_t limit : {per_delay * 4, per_delay * S.D.size()}) {
    const ProjectedCostParts P = run(limit);
    CHECK(P.c2 == ref.c2);
    CHECK(P.c1 == ref.c1);
    CHECK(P.mu == ref.mu);
    CHECK(P.eps_bar == ref.eps_bar);
    CHECK(P.A_bar == ref.A_bar);
  }
}
