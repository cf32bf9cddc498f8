// The CMA phase gate of the engines: interpolation against direct evaluation, the transpose
// (scatter) against the forward (sample), exact shifts, unit modulus, and the smooth phase
// <-> vector potential conversion against a known IR field.
#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <random>

#include "retrieval/core/units.h"
#include "retrieval/physics/gate.h"

using namespace sw;

namespace {

TimeGrid grid() { return TimeGrid::for_energy_step(1024, units::eV_to_au(0.25)); }

std::vector<double> delays(int n, double first_fs, double step_fs, double jitter_fs = 0.0) {
  std::mt19937_64 rng(3);
  std::uniform_real_distribution<double> u(-jitter_fs, jitter_fs);
  std::vector<double> d;
  for (int i = 0; i < n; ++i) d.push_back(units::fs_to_au(first_fs + step_fs * i + u(rng)));
  std::sort(d.begin(), d.end());
  return d;
}

// A smooth test phase with an IR-like oscillation (rad, t in a.u.).
double test_phase(double t) { return 2.0 * std::sin(0.057 * t + 0.3) + 1e-3 * t; }

}  // namespace

TEST_CASE("gate samples match the phase evaluated at s + tau", "[gate]") {
  // Four-point Lagrange interpolation error <= h^4 max|f''''| / 24 * (9/16) (common numerical
  // analysis, e.g. Abramowitz and Stegun 25.2.15); for exp(i phi) with |phi'| <= 0.115 /a.u.,
  // |f''''| < 1e-3 /a.u.^4 and h = 0.67 a.u. that is < 5e-6.
  const TimeGrid g = grid();
  const auto d = delays(37, -6.0, 0.33, 0.04);
  PhaseGate gate(g, d, 3.0);
  gate.set_phase(test_phase);
  CVec out(g.size());
  double worst = 0;
  for (std::size_t j = 0; j < d.size(); ++j) {
    gate.sample(j, out.data());
    for (std::size_t n = 0; n < g.size(); ++n)
      worst = std::max(worst, std::abs(out[n] - std::polar(1.0, test_phase(g.time(n) + d[j]))));
  }
  CHECK(worst < 5e-6);
  CHECK_FALSE(gate.exact_shifts());
}

TEST_CASE("delays that are multiples of the grid step are exact shifts", "[gate]") {
  const TimeGrid g = grid();
  std::vector<double> d;
  for (int i = 0; i < 21; ++i) d.push_back((i - 10) * 3 * g.dt());
  PhaseGate gate(g, d, 3.0);
  gate.set_phase(test_phase);
  REQUIRE(gate.exact_shifts());
  CVec out(g.size());
  double worst = 0;
  for (std::size_t j = 0; j < d.size(); ++j) {
    gate.sample(j, out.data());
    REQUIRE(gate.exact_samples(j) != nullptr);
    for (std::size_t n = 0; n < g.size(); ++n) {
      CHECK(out[n] == gate.exact_samples(j)[n]);
      worst = std::max(worst, std::abs(out[n] - std::polar(1.0, test_phase(g.time(n) + d[j]))));
    }
  }
  CHECK(worst < 1e-12);
}

TEST_CASE("scatter is the transpose of sample", "[gate]") {
  // Dot-product test of an adjoint pair (common practice): <S a, b> = <a, S^T b>.
  const TimeGrid g = grid();
  const auto d = delays(9, -2.0, 0.5, 0.1);
  PhaseGate gate(g, d, 3.0);
  std::mt19937_64 rng(11);
  std::normal_distribution<double> N;
  for (auto& t : gate.table()) t = {N(rng), N(rng)};
  const CVec a = gate.table();
  CVec b(g.size()), sa(g.size());
  for (auto& v : b) v = {N(rng), N(rng)};
  for (std::size_t j = 0; j < d.size(); ++j) {
    gate.sample(j, sa.data());
    cdouble lhs = 0, rhs = 0;
    for (std::size_t n = 0; n < g.size(); ++n) lhs += sa[n] * std::conj(b[n]);
    CVec stb(gate.size(), 0.0);
    gate.scatter(j, b.data(), stb.data());
    for (std::size_t m = 0; m < gate.size(); ++m) rhs += a[m] * std::conj(stb[m]);
    CHECK(std::abs(lhs - rhs) < 1e-10 * std::abs(lhs));
    // Restricted to samples [100, 300): the same identity on that window.
    cdouble lw = 0, rw = 0;
    for (std::size_t n = 100; n < 300; ++n) lw += sa[n] * std::conj(b[n]);
    CVec stw(gate.size(), 0.0);
    gate.scatter(j, b.data(), stw.data(), 100, 300);
    for (std::size_t m = 0; m < gate.size(); ++m) rw += a[m] * std::conj(stw[m]);
    CHECK(std::abs(lw - rw) < 1e-10 * std::abs(lw));
  }
}

TEST_CASE("the fused exit wave uses cubic samples on the support and linear ones off it",
          "[gate]") {
  const TimeGrid g = grid();
  const auto d = delays(5, -1.0, 0.37, 0.05);
  PhaseGate gate(g, d, 3.0);
  gate.set_phase(test_phase);
  CVec eps(g.size()), ref(g.size()), gs(g.size()), psi(g.size());
  for (std::size_t n = 0; n < g.size(); ++n) eps[n] = {std::cos(0.01 * n), 0.5};
  for (std::size_t j = 0; j < d.size(); ++j) {
    gate.sample(j, ref.data());
    const cdouble* used = gate.sample_product(j, eps.data(), gs.data(), psi.data(), 400, 600);
    double off = 0;
    for (std::size_t n = 0; n < g.size(); ++n) {
      CHECK(std::abs(psi[n] - eps[n] * used[n]) < 1e-14);
      if (n >= 400 && n < 600)
        CHECK(std::abs(used[n] - ref[n]) < 1e-14);
      else
        off = std::max(off, std::abs(used[n] - ref[n]));
    }
    // Linear interpolation error <= h^2/8 max|G''| (common numerical analysis).
    const double h = g.dt(), curv = std::pow(2.0 * 0.057 + 1e-3, 2) + 2.0 * 0.057 * 0.057;
    CHECK(off < h * h / 8 * curv);
    if (!gate.exact_shift(j)) CHECK(off > 0);  // the first delay anchors the table: exact
  }
}

TEST_CASE("updates keep the gate on the unit circle", "[gate]") {
  const TimeGrid g = grid();
  const auto d = delays(7, -1.0, 0.3, 0.05);
  PhaseGate gate(g, d, 3.0);
  gate.set_phase(test_phase);
  std::mt19937_64 rng(5);
  std::normal_distribution<double> N(0.0, 0.2);
  CVec u(g.size());
  for (std::size_t j = 0; j < d.size(); ++j) {
    for (auto& v : u) v = {N(rng), N(rng)};
    gate.update(j, u.data());
  }
  double worst = 0;
  for (const auto& t : gate.table()) worst = std::max(worst, std::abs(std::abs(t) - 1.0));
  CHECK(worst < 1e-14);
  // normalize_to_unit over many orders of magnitude (its reciprocal square root).
  CVec v;
  for (double m = 1e-140; m < 1e140; m *= 3.7) v.push_back(std::polar(m, std::log(m)));
  normalize_to_unit(v.data(), v.size());
  worst = 0;
  for (const auto& x : v) worst = std::max(worst, std::abs(std::abs(x) - 1.0));
  CHECK(worst < 1e-15);
}

TEST_CASE("the vector potential comes back from the smooth gate phase", "[gate]") {
  // Delay-adapted CMA gate phase phi = -p0 I1 + I2/2, so d phi/dt = p0 A - A^2/2 (the exact
  // rate of electrons streaked to p0 - A, classical streaking: Itatani et al., PRL 88, 173903
  // (2002); gate form of Mairesse and Quere, PRA 71, 011401 (2005)); the B-spline fit with knots
  // every T/32 must return A(t) of a 5 fs, 5e12 W/cm^2 pulse to 0.5 % of its peak.
  const TimeGrid g = grid();
  GaussianIrPulse P;
  P.peak_intensity_Wcm2 = 5e12;
  const IrField ir =
      make_gaussian_ir(P, units::fs_to_au(-30), units::fs_to_au(30), units::as_to_au(20));
  const double p0 = std::sqrt(2 * units::eV_to_au(73.4));
  const auto d = delays(121, -6.0, 0.1);
  const double T = units::period_au(units::wavelength_nm_to_omega_au(800));
  PhaseGate gate(g, d, T / 32);
  gate.set_phase([&](double t) { return cma_gate_phase(ir, p0, t); });
  const std::vector<double> w(gate.size(), 1.0);
  const SmoothPhase s = gate.smooth(w);
  const IrField back = ir_from_gate_phase(s, p0, units::fs_to_au(-6), units::fs_to_au(6), T / 64);
  double worst = 0;
  for (std::size_t i = 0; i < back.size(); ++i)
    worst = std::max(worst,
                     std::abs(back.vector_potential()[i] - ir.vector_potential_at(back.time(i))));
  CHECK(worst < 5e-3 * ir.peak_vector_potential());
  // Round trip of the rate <-> A relation, both signs of A.
  for (double A : {-0.4, -0.05, 0.0, 0.03, 0.3})
    CHECK(vector_potential_from_phase_rate(p0 * A - 0.5 * A * A, p0) == Approx(A).margin(1e-13));
  CHECK(vector_potential_from_phase_rate(10.0, p0) == Approx(p0));
}

TEST_CASE("one factored fit for gates of the same geometry gives each gate's own fit", "[gate]") {
  // fit_phases shares the normal matrix of the weighted B-spline fit between gates of one
  // geometry: every coefficient must equal fit_phase's on each gate to the last bit, and the
  // fit must reproduce a phase the spline can represent (a linear phase: the cubic B-splines
  // reproduce polynomials up to degree 3, de Boor, "A Practical Guide to Splines", 1978).
  const TimeGrid g = grid();
  const auto d = delays(41, -5.0, 0.25, 0.03);
  PhaseGate a(g, d, 4.0);
  a.set_phase([](double t) { return test_phase(t); });
  PhaseGate b = a, c = a;
  b.set_phase([](double t) { return 0.7 * test_phase(t) - 0.02 * t; });
  c.set_phase([](double t) { return 0.004 * t + 0.4; });
  std::vector<double> w(a.size());
  for (std::size_t m = 0; m < w.size(); ++m)
    w[m] =
        std::exp(-std::pow((a.time(m) - a.time(w.size() / 2)) / 60.0, 2)) + (m % 7 == 0 ? 0 : 0.1);
  const std::vector<PhaseGate> gates = {a, b, c};
  const std::vector<SmoothPhase> all = PhaseGate::fit_phases(gates, w);
  REQUIRE(all.size() == 3);
  for (std::size_t k = 0; k < 3; ++k) {
    const SmoothPhase one = gates[k].fit_phase(w);
    CHECK(all[k].coef == one.coef);
    CHECK(all[k].t0 == one.t0);
    CHECK(all[k].h == one.h);
  }
  // The linear phase comes back where the weights are strong (the 1e-3 curvature penalty
  // does not act on a straight line).
  for (std::size_t m = w.size() / 4; m < 3 * w.size() / 4; m += 17)
    CHECK(all[2].value(c.time(m)) == Approx(0.004 * c.time(m) + 0.4).margin(1e-6));
  // Gates of another geometry are refused.
  const PhaseGate other(g, delays(41, -5.0, 0.3), 4.0);
  const std::vector<PhaseGate> mixed = {a, other};
  CHECK_THROWS_AS(PhaseGate::fit_phases(mixed, w), std::invalid_argument);
}
