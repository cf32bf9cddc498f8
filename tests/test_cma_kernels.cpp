// The CMA data-projection kernels (retrieval/engines/cma_kernels.h) against a plain scalar
// reference written here: std::complex, std::abs, std::sqrt, one bin at a time (no code shared with
// the vectorised kernels). The reference follows the formulas of cma_problem.h: modulus replacement
// (amplitude projection, the least-squares projection onto |psi~| = a) and the Poisson Newton step
// of Thibault and Guizar-Sicairos, New J. Phys. 14, 063004 (2012).
#include "retrieval/engines/cma_kernels.h"

#include <catch2/catch.hpp>

#include <algorithm>
#include <cmath>
#include <complex>
#include <random>
#include <utility>
#include <vector>

#include "retrieval/core/grid.h"
#include "retrieval/core/hot_loop.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/cma_problem_internal.h"
#include "retrieval/physics/gate.h"

namespace {

struct Segment {
  std::vector<double> S, I, a;  // S interleaved (re, im)
  double dt2 = 0.0;
};

// Random segment with zero bins, tiny bins and negative counts (after background subtraction).
Segment make_segment(std::size_t n, unsigned seed) {
  std::mt19937 rng(seed);
  std::normal_distribution<double> g(0.0, 3.0);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  Segment s;
  s.dt2 = 0.37;
  s.S.resize(2 * n);
  s.I.resize(n);
  s.a.resize(n);
  for (std::size_t q = 0; q < n; ++q) {
    double re = g(rng), im = g(rng);
    if (q % 11 == 3) re = im = 0.0;           // an exact zero bin
    if (q % 13 == 5) re *= 1e-9, im *= 1e-9;  // a nearly empty bin
    s.S[2 * q] = re;
    s.S[2 * q + 1] = im;
    s.I[q] = q % 7 == 2 ? -u(rng) : 20.0 * u(rng);  // some negative counts
    s.a[q] = std::sqrt(std::max(s.I[q], 0.0) / s.dt2);
  }
  return s;
}

// Reference: the sums and the projected values, one bin at a time.
void reference(const Segment& s, bool poisson, std::vector<std::complex<double>>* out, double* im,
               double* mm) {
  *im = *mm = 0.0;
  out->clear();
  for (std::size_t q = 0; q < s.I.size(); ++q) {
    const std::complex<double> z(s.S[2 * q], s.S[2 * q + 1]);
    const double M = s.dt2 * std::norm(z);
    *im += s.I[q] * M;
    *mm += M * M;
    const double r = std::abs(z);
    if (r == 0.0) {
      out->push_back(0.0);  // a zero bin stays zero in both projections
      continue;
    }
    double f;
    if (poisson)
      f = std::clamp(0.5 * (1.0 + s.I[q] / M), 0.0, 2.0 * s.a[q] / r + 0.5);
    else
      f = s.a[q] / r;
    out->push_back(f * z);
  }
}

void check_close(double got, double want, double scale) {
  // Relative 1e-12 of the segment's scale: rounding only (FMA contraction differs between the
  // kernels' clones and the reference; rsqrt_newton is accurate to a few ulp).
  CHECK(std::abs(got - want) <= 1e-12 * scale);
}

}  // namespace

TEST_CASE("amplitude and Poisson projections equal the scalar reference", "[cma_kernels]") {
  for (bool poisson : {false, true}) {
    for (std::size_t n : {1u, 7u, 64u, 1001u}) {
      Segment s = make_segment(n, static_cast<unsigned>(n) + (poisson ? 100u : 0u));
      std::vector<std::complex<double>> want;
      double im_ref = 0, mm_ref = 0;
      reference(s, poisson, &want, &im_ref, &mm_ref);
      double im = 1.0, mm = 2.0;  // the kernels add to what is there
      if (poisson)
        sw::cma_kernels::project_poisson(s.S.data(), s.I.data(), s.a.data(), n, s.dt2, &im, &mm);
      else
        sw::cma_kernels::project_amplitude(s.S.data(), s.I.data(), s.a.data(), n, s.dt2, &im, &mm);
      INFO((poisson ? "poisson" : "amplitude") << ", n = " << n);
      check_close(im - 1.0, im_ref, std::abs(im_ref) + mm_ref);
      check_close(mm - 2.0, mm_ref, mm_ref);
      double scale = 0;
      for (const auto& z : want) scale = std::max(scale, std::abs(z));
      for (std::size_t q = 0; q < n; ++q) {
        check_close(s.S[2 * q], want[q].real(), scale);
        check_close(s.S[2 * q + 1], want[q].imag(), scale);
      }
      if (!poisson)  // modulus replacement: |S| = a exactly where S was not zero
        for (std::size_t q = 0; q < n; ++q)
          if (std::abs(want[q]) > 0)
            CHECK(std::hypot(s.S[2 * q], s.S[2 * q + 1]) ==
                  Approx(s.a[q]).epsilon(1e-12).margin(1e-300));
    }
  }
}

TEST_CASE("moduli_and_sums and scale_bins equal the scalar reference", "[cma_kernels]") {
  const std::size_t n = 77;
  Segment s = make_segment(n, 5);
  std::vector<double> r2(n), f(n);
  double im = 0, mm = 0;
  sw::cma_kernels::moduli_and_sums(s.S.data(), s.I.data(), r2.data(), n, s.dt2, &im, &mm);
  std::vector<std::complex<double>> proj;
  double im_ref = 0, mm_ref = 0;
  reference(s, false, &proj, &im_ref, &mm_ref);
  check_close(im, im_ref, std::abs(im_ref) + mm_ref);
  check_close(mm, mm_ref, mm_ref);
  for (std::size_t q = 0; q < n; ++q) {
    const std::complex<double> z(s.S[2 * q], s.S[2 * q + 1]);
    check_close(r2[q], std::norm(z), 1e3);
    f[q] = 0.5 + static_cast<double>(q % 5);
  }
  const std::vector<double> before = s.S;
  sw::cma_kernels::scale_bins(s.S.data(), f.data(), n);
  for (std::size_t q = 0; q < n; ++q) {
    CHECK(s.S[2 * q] == before[2 * q] * f[q]);
    CHECK(s.S[2 * q + 1] == before[2 * q + 1] * f[q]);
  }
}

// Where a delay's gate samples start, from the definition of the table (gate.h: node m at time
// t_0 + m dt, t_0 = s_0 + tau_0 - dt): u = (tau_j - tau_0) / dt + 1 nodes; an exact shift when u
// is within 1e-6 of an integer, else the cubic stencil starts at floor(u) - 1 and its nearest
// node is floor(u) or floor(u) + 1. Written here independently of PhaseGate's constructor.
struct Taps {
  bool exact = false;
  std::size_t first = 0, nearest = 0;
};
Taps reference_taps(const std::vector<double>& delay, double dt, std::size_t j) {
  const double u = (delay[j] - delay.front()) / dt + 1.0;
  const double r = std::round(u);
  Taps t;
  t.exact = std::abs(u - r) < 1e-6;
  const auto fl = static_cast<std::size_t>(std::floor(u));
  t.first = t.exact ? static_cast<std::size_t>(r) : fl - 1;
  t.nearest = t.exact ? t.first : (u - std::floor(u) > 0.5 ? fl + 1 : fl);
  return t;
}

// The ePIE update against the plain update written with std::complex (Maiden and Rodenburg,
// Ultramicroscopy 109, 1256 (2009)), with the gate sampled by PhaseGate; and the delay taps
// against the gate's own nodes.
TEST_CASE(
    "epie_update equals the std::complex ePIE step; the gate's nodes where the delays put them",
    "[cma_kernels]") {
  using cd = std::complex<double>;
  const std::size_t n = 256;
  const sw::TimeGrid grid = sw::TimeGrid::centered(n, 0.7);
  // Delays on and off the table's nodes.
  std::vector<double> delay;
  for (int j = 0; j < 23; ++j) delay.push_back(-8.0 + (j % 5 == 0 ? 2.1 * j : 0.91 * j + 0.3));
  std::sort(delay.begin(), delay.end());
  sw::PhaseGate gate(grid, delay, 3.0);
  gate.set_phase([](double t) { return 0.8 * std::sin(0.11 * t) + 0.002 * t * t; });
  std::mt19937 rng(11);
  std::normal_distribution<double> g(0.0, 1.0);
  std::vector<cd> eps(n), back(n);
  for (std::size_t q = 0; q < n; ++q) {
    const double env = std::exp(-std::pow((static_cast<double>(q) - 120.0) / 25.0, 2));
    eps[q] = cd(env * g(rng), env * g(rng)) + cd(1e-4 * g(rng), 0.0);
    back[q] = cd(static_cast<double>(n) * g(rng), static_cast<double>(n) * g(rng));
  }
  std::size_t exact = 0;
  for (std::size_t j = 0; j < delay.size(); ++j) {
    const Taps t = reference_taps(delay, grid.dt(), j);
    INFO("delay " << j);
    CHECK(t.exact == gate.exact_shift(j));
    CHECK(t.first == gate.first_node(j));
    CHECK(t.nearest == gate.nearest_node(j));
    exact += t.exact ? 1 : 0;
    for (const auto& [lo, hi] : std::vector<std::pair<std::size_t, std::size_t>>{
             {60, 190}, {0, n}, {0, 0}, {255, 256}, {3, 4}}) {
      INFO("support [" << lo << ", " << hi << ")");
      std::vector<cd> G(n), psi(n);
      const cd* gp = gate.sample_product(j, eps.data(), G.data(), psi.data(), lo, hi);
      std::vector<cd> E = eps, U(n);
      const double bo = 0.9, cg = 0.37;
      const double m = sw::cma_kernels::epie_update(
          reinterpret_cast<const double*>(gp), reinterpret_cast<const double*>(back.data()),
          reinterpret_cast<const double*>(psi.data()), reinterpret_cast<double*>(E.data()),
          reinterpret_cast<double*>(U.data()), n, lo, hi, bo, cg);
      bool close = true;
      double m_plain = 0.0;
      for (std::size_t q = 0; q < n; ++q) {
        const cd d = back[q] / static_cast<double>(n) - psi[q];
        const cd e = eps[q] + bo * std::conj(gp[q]) * d;
        close = close && std::abs(E[q] - e) <= 1e-12 * (std::abs(e) + std::abs(d));
        if (q >= lo && q < hi) {
          const cd u = cg * std::conj(eps[q]) * d;
          close = close && std::abs(U[q] - u) <= 1e-12 * (std::abs(u) + 1e-300);
          m_plain = std::max(m_plain, std::norm(e));
        }
      }
      CHECK(close);
      CHECK(m == Approx(m_plain).epsilon(1e-12).margin(1e-300));
    }
  }
  CHECK(exact > 0);
  CHECK(exact < delay.size());
}

// PhaseGate::coverage (accumulated node block by node block) against the plain sum written delay
// by delay, each delay's |eps|^2 added from its nearest node (reference_taps): the same sums in
// the same order, so the same bits.
TEST_CASE("the blocked gate coverage equals the delay-by-delay sum bit for bit", "[cma_kernels]") {
  std::mt19937 rng(5);
  std::normal_distribution<double> g(0.0, 1.0);
  for (const std::size_t n : {64u, 100u, 256u}) {
    const sw::TimeGrid grid = sw::TimeGrid::centered(n, 0.7);
    std::vector<double> on_nodes, off_nodes;
    for (int j = 0; j < 41; ++j) {
      on_nodes.push_back(-10.0 + 1.4 * j);  // exact shifts (2 dt)
      off_nodes.push_back(-10.0 + 0.83 * j + (j % 3 == 0 ? 0.05 : 0.0));
    }
    for (const auto* delay : {&on_nodes, &off_nodes}) {
      sw::CVec eps(n);
      for (std::size_t q = 0; q < n; ++q) {
        const double env = std::exp(-std::pow((static_cast<double>(q) - 0.4 * n) / 9.0, 2));
        eps[q] = sw::cdouble(env * g(rng), env * g(rng) + 1e-7 * g(rng));
      }
      // The gate of all the delays, and of all but the last.
      const std::vector<double> all = *delay;
      std::vector<double> fewer = all;
      fewer.pop_back();
      for (const std::vector<double>* d : {&all, static_cast<const std::vector<double>*>(&fewer)}) {
        sw::PhaseGate gate(grid, *d, 3.0);
        std::vector<double> want(gate.size(), 0.0), got;
        for (std::size_t j = 0; j < d->size(); ++j) {
          const std::size_t base = reference_taps(*d, grid.dt(), j).nearest;
          for (std::size_t q = 0; q < n; ++q) want[base + q] += std::norm(eps[q]);
        }
        gate.coverage(eps, got);
        INFO("n = " << n << (delay == &on_nodes ? ", exact shifts" : ", interpolated")
                    << (d == &fewer ? ", one delay fewer" : ""));
        REQUIRE(got.size() == want.size());
        bool same = true;
        for (std::size_t m = 0; m < want.size(); ++m) same = same && got[m] == want[m];
        CHECK(same);
        CHECK(got == want);
      }
    }
  }
  // The Hann weights (common practice: the sin^2 window), as align_vector_potential formed them
  // in its own loop before they were kept per thread.
  for (const std::size_t m : {9u, 300u, 9u}) {
    const std::vector<double>& w = sw::cma_detail::hann_weights(m);
    REQUIRE(w.size() == m);
    for (std::size_t i = 0; i < m; ++i) {
      const double x = (static_cast<double>(i) + 0.5) / static_cast<double>(m);
      CHECK(w[i] == std::sin(sw::units::kPi * x) * std::sin(sw::units::kPi * x));
    }
  }
}

namespace {

// The Poisson projection in one loop, bin by bin on std::complex values: the step of
// cma_problem.h with its bound 2 a / |S| + 1/2 evaluated in every bin. It is the bit-for-bit
// reference of project_poisson, whose blocked form leaves the bound out where it cannot bite; bit
// for bit needs the same arithmetic: the error sums in a vectorised reduction, 1/|S| from
// rsqrt_newton, and a clone for the same instruction set (SW_HOT_LOOP).
SW_HOT_LOOP void poisson_one_loop(double* S, const double* I, const double* a, std::size_t n,
                                  double dt2, double* im_out, double* mm_out) {
  auto* z = reinterpret_cast<std::complex<double>*>(S);  // interleaved (re, im) pairs
  double im = 0.0, mm = 0.0;
#pragma omp simd reduction(+ : im, mm)
  for (std::size_t q = 0; q < n; ++q) {
    const double r2 = std::norm(z[q]), model = dt2 * r2;
    im += I[q] * model;
    mm += model * model;
    const double bound = 2.0 * a[q] * sw::detail::rsqrt_newton(r2 + 1e-300) + 0.5;
    z[q] *= std::clamp(0.5 + 0.5 * I[q] / (dt2 * (r2 + 1e-300)), 0.0, bound);
  }
  *im_out += im;
  *mm_out += mm;
}

}  // namespace

TEST_CASE("project_poisson equals the one-loop Poisson kernel bit for bit", "[cma_kernels]") {
  std::vector<std::size_t> sizes;
  for (std::size_t n = 1; n <= 70; ++n) sizes.push_back(n);
  for (std::size_t n : {127u, 128u, 129u, 400u, 1001u}) sizes.push_back(n);
  std::size_t fast_only = 0;
  for (const std::size_t n : sizes)
    for (const double scale : {1.0, 30.0, 0.05}) {  // model near, above and far below the data
      Segment s = make_segment(n, static_cast<unsigned>(7 * n));
      for (double& x : s.S) x *= scale;
      std::vector<double> S_ref = s.S;
      double im_ref = 0.25, mm_ref = 0.5, im = 0.25, mm = 0.5;
      poisson_one_loop(S_ref.data(), s.I.data(), s.a.data(), n, s.dt2, &im_ref, &mm_ref);
      sw::cma_kernels::project_poisson(s.S.data(), s.I.data(), s.a.data(), n, s.dt2, &im, &mm);
      INFO("n = " << n << ", scale " << scale);
      CHECK(im == im_ref);
      CHECK(mm == mm_ref);
      CHECK(s.S == S_ref);
      double vmax = 0.0;
      for (std::size_t q = 0; q < n; ++q) {
        const double r2 = S_ref[2 * q] * S_ref[2 * q] + S_ref[2 * q + 1] * S_ref[2 * q + 1];
        if (r2 > 0) vmax = std::max(vmax, s.I[q] / (s.dt2 * r2));
      }
      if (scale == 30.0 && vmax < 1.0) ++fast_only;
    }
  CHECK(fast_only > 0);  // some segments take only the path without the reciprocal modulus
}
