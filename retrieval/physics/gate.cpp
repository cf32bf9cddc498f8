#include "retrieval/physics/gate.h"

#include <algorithm>
#include <cmath>
#include <cstring>
#include <stdexcept>

#include "retrieval/core/hot_loop.h"

namespace sw {

namespace {

// Uniform cubic B-spline weights of coefficients i..i+3 at fraction f in [0, 1].
inline void bspline_weights(double f, double b[4]) {
  const double g = 1.0 - f, f2 = f * f, f3 = f2 * f;
  b[0] = g * g * g / 6.0;
  b[1] = (3.0 * f3 - 6.0 * f2 + 4.0) / 6.0;
  b[2] = (-3.0 * f3 + 3.0 * f2 + 3.0 * f + 1.0) / 6.0;
  b[3] = f3 / 6.0;
}

// d/df of the same weights.
inline void bspline_slopes(double f, double b[4]) {
  const double g = 1.0 - f;
  b[0] = -0.5 * g * g;
  b[1] = 0.5 * (3.0 * f * f - 4.0 * f);
  b[2] = 0.5 * (-3.0 * f * f + 2.0 * f + 1.0);
  b[3] = 0.5 * f * f;
}

// Four-point cubic Lagrange weights for nodes -1, 0, 1, 2 at fraction f.
inline void lagrange_weights(double f, double* w) {
  w[0] = -f * (f - 1.0) * (f - 2.0) / 6.0;
  w[1] = (f + 1.0) * (f - 1.0) * (f - 2.0) / 2.0;
  w[2] = -(f + 1.0) * f * (f - 2.0) / 2.0;
  w[3] = (f + 1.0) * f * (f - 1.0) / 6.0;
}

// Knot index and fraction of time t on a spline, clamped to the covered range.
inline std::size_t locate(const SmoothPhase& s, double t, double* f) {
  const std::size_t last = s.coef.size() - 4;
  double u = (t - s.t0) / s.h;
  u = std::clamp(u, 0.0, static_cast<double>(last) + 1.0);
  std::size_t i = static_cast<std::size_t>(u);
  if (i > last) i = last;
  *f = u - static_cast<double>(i);
  return i;
}

}  // namespace

double SmoothPhase::value(double t) const {
  if (coef.size() < 4) return 0.0;
  double f, b[4];
  const std::size_t i = locate(*this, t, &f);
  bspline_weights(f, b);
  return b[0] * coef[i] + b[1] * coef[i + 1] + b[2] * coef[i + 2] + b[3] * coef[i + 3];
}

double SmoothPhase::derivative(double t) const {
  if (coef.size() < 4) return 0.0;
  double f, b[4];
  const std::size_t i = locate(*this, t, &f);
  bspline_slopes(f, b);
  return (b[0] * coef[i] + b[1] * coef[i + 1] + b[2] * coef[i + 2] + b[3] * coef[i + 3]) / h;
}

double SmoothPhase::t_last() const {
  return coef.size() < 4 ? t0 : t0 + static_cast<double>(coef.size() - 3) * h;
}

PhaseGate::PhaseGate(const TimeGrid& g, const std::vector<double>& delay, double knot_step)
    : n_(g.size()), dt_(g.dt()) {
  if (delay.empty()) throw std::invalid_argument("PhaseGate: no delays");
  h_ = std::max(knot_step, dt_);
  t0_ = g.time(0) + delay.front() - dt_;
  const std::size_t nd = delay.size();
  first_.resize(nd);
  weights_.assign(4 * nd, 0.0);
  frac_.assign(nd, 0.0);
  exact_.assign(nd, 0);
  std::size_t last_start = 0;
  for (std::size_t j = 0; j < nd; ++j) {
    const double u = (delay[j] - delay.front()) / dt_ + 1.0;
    auto i = static_cast<std::size_t>(std::floor(u));
    double f = u - static_cast<double>(i);
    if (f > 1.0 - 1e-6) {
      ++i;
      f = 0.0;
    }
    if (f < 1e-6) {
      exact_[j] = 1;
      first_[j] = i;
      weights_[4 * j + 1] = 1.0;
    } else {
      exact_all_ = false;
      first_[j] = i - 1;
      frac_[j] = f;
      lagrange_weights(f, &weights_[4 * j]);
    }
    last_start = std::max(last_start, i);
  }
  table_.assign(last_start + n_ + 3, cdouble(1.0, 0.0));
}

void PhaseGate::sample(std::size_t j, cdouble* g) const {
  const double* T = reinterpret_cast<const double*>(table_.data() + first_[j]);
  double* out = reinterpret_cast<double*>(g);
  const std::size_t m = 2 * n_;
  if (exact_[j]) {
    std::copy(T, T + m, out);
    return;
  }
  const double w0 = weights_[4 * j], w1 = weights_[4 * j + 1], w2 = weights_[4 * j + 2],
               w3 = weights_[4 * j + 3];
#pragma omp simd
  for (std::size_t k = 0; k < m; ++k)
    out[k] = w0 * T[k] + w1 * T[k + 2] + w2 * T[k + 4] + w3 * T[k + 6];
}

namespace {

// psi = eps * G with G read from the table (exact shift).
SW_HOT_LOOP void product_kernel(const double* E, const double* G, double* P, std::size_t n) {
#pragma omp simd
  for (std::size_t q = 0; q < n; ++q) {
    const double er = E[2 * q], ei = E[2 * q + 1], gr = G[2 * q], gi = G[2 * q + 1];
    P[2 * q] = er * gr - ei * gi;
    P[2 * q + 1] = er * gi + ei * gr;
  }
}

// G = linear interpolation between table nodes T + 2 and T + 4 (per sample), psi = eps * G.
SW_HOT_LOOP void linear_kernel(const double* T, const double* E, double* G, double* P,
                               std::size_t a, std::size_t b, double f) {
  const double f1 = 1.0 - f;
#pragma omp simd
  for (std::size_t q = a; q < b; ++q) {
    const std::size_t k = 2 * q;
    const double gr = f1 * T[k + 2] + f * T[k + 4], gi = f1 * T[k + 3] + f * T[k + 5];
    G[k] = gr;
    G[k + 1] = gi;
    const double er = E[k], ei = E[k + 1];
    P[k] = er * gr - ei * gi;
    P[k + 1] = er * gi + ei * gr;
  }
}

// G = 4-tap cubic Lagrange interpolation of the table, psi = eps * G.
SW_HOT_LOOP void cubic_kernel(const double* T, const double* E, double* G, double* P, std::size_t a,
                              std::size_t b, const double* w) {
  const double w0 = w[0], w1 = w[1], w2 = w[2], w3 = w[3];
#pragma omp simd
  for (std::size_t q = a; q < b; ++q) {
    const std::size_t k = 2 * q;
    const double gr = w0 * T[k] + w1 * T[k + 2] + w2 * T[k + 4] + w3 * T[k + 6];
    const double gi = w0 * T[k + 1] + w1 * T[k + 3] + w2 * T[k + 5] + w3 * T[k + 7];
    G[k] = gr;
    G[k + 1] = gi;
    const double er = E[k], ei = E[k + 1];
    P[k] = er * gr - ei * gi;
    P[k + 1] = er * gi + ei * gr;
  }
}

SW_HOT_LOOP void axpy_kernel(double* a, const double* u, std::size_t m, double w) {
#pragma omp simd
  for (std::size_t k = 0; k < m; ++k) a[k] += w * u[k];
}

// a[k + 2q] += w[q] u[k] for q = 0..3 and k < m in one pass over a (the four axpy passes of
// the interpolated scatter fused; the terms are added to each a[i] in the same order, q = 0..3).
SW_HOT_LOOP void scatter4_kernel(double* a, const double* u, std::size_t m, const double* w) {
  const double w0 = w[0], w1 = w[1], w2 = w[2], w3 = w[3];
  auto edge = [&](std::size_t i) {
    double acc = a[i];
    for (std::size_t q = 0; q < 4; ++q)
      if (i >= 2 * q && i - 2 * q < m) acc += w[q] * u[i - 2 * q];
    a[i] = acc;
  };
  const std::size_t head = std::min<std::size_t>(6, m);
  for (std::size_t i = 0; i < head; ++i) edge(i);
#pragma omp simd
  for (std::size_t i = 6; i < m; ++i)
    a[i] = a[i] + w0 * u[i] + w1 * u[i - 2] + w2 * u[i - 4] + w3 * u[i - 6];
  for (std::size_t i = std::max<std::size_t>(6, m); i < m + 6; ++i) edge(i);
}

SW_HOT_LOOP void unit_kernel(double* V, std::size_t n) {
#pragma omp simd
  for (std::size_t m = 0; m < n; ++m) {
    const double re = V[2 * m], im = V[2 * m + 1];
    const double s = detail::rsqrt_newton(re * re + im * im + 1e-300);
    V[2 * m] = re * s;
    V[2 * m + 1] = im * s;
  }
}

}  // namespace

const cdouble* PhaseGate::sample_product(std::size_t j, const cdouble* eps, cdouble* g,
                                         cdouble* psi, std::size_t lo, std::size_t hi) const {
  const double* E = reinterpret_cast<const double*>(eps);
  double* P = reinterpret_cast<double*>(psi);
  if (exact_[j]) {
    const cdouble* gp = table_.data() + first_[j];
    product_kernel(E, reinterpret_cast<const double*>(gp), P, n_);
    return gp;
  }
  const double* T = reinterpret_cast<const double*>(table_.data() + first_[j]);
  double* G = reinterpret_cast<double*>(g);
  hi = std::min(hi, n_);
  lo = std::min(lo, hi);
  linear_kernel(T, E, G, P, 0, lo, frac_[j]);
  cubic_kernel(T, E, G, P, lo, hi, &weights_[4 * j]);
  linear_kernel(T, E, G, P, hi, n_, frac_[j]);
  return g;
}

void PhaseGate::scatter(std::size_t j, const cdouble* u, cdouble* acc, std::size_t lo,
                        std::size_t hi) const {
  hi = std::min(hi, n_);
  if (lo >= hi) return;
  double* A = reinterpret_cast<double*>(acc + first_[j] + lo);
  const double* U = reinterpret_cast<const double*>(u + lo);
  const std::size_t m = 2 * (hi - lo);
  if (exact_[j]) {
    axpy_kernel(A, U, m, 1.0);
    return;
  }
  scatter4_kernel(A, U, m, &weights_[4 * j]);
}

void PhaseGate::update(std::size_t j, const cdouble* u, std::size_t lo, std::size_t hi) {
  hi = std::min(hi, n_);
  if (lo >= hi) return;
  scatter(j, u, table_.data(), lo, hi);
  const std::size_t first = first_[j] + lo;
  normalize(first, std::min(size(), first + (hi - lo) + (exact_[j] ? 0 : 3)));
}

void normalize_to_unit(cdouble* v, std::size_t n) { unit_kernel(reinterpret_cast<double*>(v), n); }

void PhaseGate::normalize(std::size_t first, std::size_t last) {
  if (first < last) normalize_to_unit(table_.data() + first, last - first);
}

void PhaseGate::rotate(double a) {
  const cdouble r = std::polar(1.0, a);
  for (auto& g : table_) g *= r;
}

void PhaseGate::set_phase(const std::function<double(double)>& phi) {
  for (std::size_t m = 0; m < table_.size(); ++m) table_[m] = std::polar(1.0, phi(time(m)));
}

namespace {

constexpr std::size_t kCoverBlock = 32;  // nodes accumulated together, eight registers of four
using V4 = double __attribute__((vector_size(4 * sizeof(double))));

// a += the four values at p (by reference: a vector passed by value changes the baseline ABI).
inline void add4(V4& a, const double* p) {
  V4 v;
  std::memcpy(&v, p, sizeof v);
  a += v;
}

// w[m0 + i] = sum over j (in order) of e[m0 + i - base[j]] for the nodes m0 = 0, kCoverBlock,
// ...; e is |eps|^2 with `pad` zeros before and after it, so that every read is inside. Adding
// a zero leaves a sum of non-negative terms unchanged, so the reads outside eps, and the delays
// skipped because they do not reach a block, change no bit of the delay-by-delay sums.
SW_HOT_LOOP void coverage_blocks(const double* e, std::size_t n, std::size_t pad,
                                 const std::size_t* base, std::size_t nd, double* w,
                                 std::size_t nodes) {
  for (std::size_t m0 = 0; m0 < nodes; m0 += kCoverBlock) {
    V4 a0 = {}, a1 = {}, a2 = {}, a3 = {}, a4 = {}, a5 = {}, a6 = {}, a7 = {};
    for (std::size_t j = 0; j < nd; ++j) {
      if (base[j] >= m0 + kCoverBlock || base[j] + n <= m0) continue;
      const double* p = e + pad + m0 - base[j];
      add4(a0, p);
      add4(a1, p + 4);
      add4(a2, p + 8);
      add4(a3, p + 12);
      add4(a4, p + 16);
      add4(a5, p + 20);
      add4(a6, p + 24);
      add4(a7, p + 28);
    }
    double* out = w + m0;
    for (const V4& a : {a0, a1, a2, a3, a4, a5, a6, a7}) {
      std::memcpy(out, &a, sizeof a);
      out += 4;
    }
  }
}

}  // namespace

void PhaseGate::coverage(const CVec& eps, std::vector<double>& w) const {
  // Every nearest node + n_ <= size() (the table ends 3 nodes past the last start + n_).
  const std::size_t nd = first_.size(), M = table_.size();
  std::vector<std::size_t> base(nd);
  for (std::size_t j = 0; j < nd; ++j) base[j] = nearest_node(j);
  const std::size_t nodes = (M + kCoverBlock - 1) / kCoverBlock * kCoverBlock, pad = nodes;
  std::vector<double> e(pad + n_ + pad, 0.0), blocks(nodes);
  for (std::size_t q = 0; q < n_; ++q) e[pad + q] = std::norm(eps[q]);
  coverage_blocks(e.data(), n_, pad, base.data(), nd, blocks.data(), nodes);
  w.assign(blocks.begin(), blocks.begin() + static_cast<std::ptrdiff_t>(M));
}

SmoothPhase PhaseGate::fit_phase(const std::vector<double>& weight) const {
  return std::move(fit_phases(std::span<const PhaseGate>(this, 1), weight)[0]);
}

std::vector<SmoothPhase> PhaseGate::fit_phases(std::span<const PhaseGate> gates,
                                               const std::vector<double>& weight) {
  if (gates.empty()) return {};
  const PhaseGate& g0 = gates[0];
  for (const PhaseGate& g : gates)
    if (g.size() != g0.size() || g.dt_ != g0.dt_ || g.t0_ != g0.t0_ || g.h_ != g0.h_)
      throw std::invalid_argument("PhaseGate::fit_phases: gates of different geometry");
  const std::size_t M = g0.size();
  SmoothPhase s;
  s.t0 = g0.time(0);
  s.h = g0.h_;
  const std::size_t K = static_cast<std::size_t>(std::floor((g0.time(M - 1) - s.t0) / s.h)) + 4;
  s.coef.assign(K, 0.0);
  // The weighted samples: node, knot index and B-spline weights (the same for every gate).
  double wmax = 0.0;
  for (double w : weight) wmax = std::max(wmax, w);
  const double inv = wmax > 0 ? 1.0 / wmax : 0.0;
  struct Sample {
    std::size_t m, i;
    double w, b[4];
  };
  std::vector<Sample> used;
  used.reserve(M);
  for (std::size_t m = 0; m < M; ++m) {
    Sample x{.m = m, .i = 0, .w = (m < weight.size() ? weight[m] : 0.0) * inv, .b = {}};
    if (!(x.w > 0)) continue;
    double f;
    x.i = locate(s, g0.time(m), &f);
    bspline_weights(f, x.b);
    used.push_back(x);
  }
  // Banded normal equations, band(k, d) = N(k, k - d), d = 0..3: they depend on the weights
  // alone, so they are assembled and factored once for all gates.
  std::vector<double> band(4 * K, 0.0);
  auto at = [&](std::size_t k, std::size_t d) -> double& { return band[4 * k + d]; };
  for (const Sample& x : used)
    for (std::size_t a = 0; a < 4; ++a)
      for (std::size_t c = 0; c <= a; ++c) at(x.i + a, a - c) += x.w * x.b[a] * x.b[c];
  // Second-difference penalty (linear extension where unconstrained) and a tiny ridge.
  const double lambda = 1e-3;
  const double d2[3] = {1.0, -2.0, 1.0};
  for (std::size_t k = 1; k + 1 < K; ++k)
    for (std::size_t a = 0; a < 3; ++a)
      for (std::size_t c = 0; c <= a; ++c) at(k - 1 + a, a - c) += lambda * d2[a] * d2[c];
  for (std::size_t k = 0; k < K; ++k) at(k, 0) += 1e-12;
  // Banded Cholesky N = L L^T (L overwrites band).
  for (std::size_t k = 0; k < K; ++k) {
    for (std::size_t d = std::min<std::size_t>(3, k); d >= 1; --d) {
      const std::size_t j = k - d;
      double v = at(k, d);
      for (std::size_t e = d + 1; e <= 3 && e <= k; ++e) v -= at(k, e) * at(j, e - d);
      at(k, d) = v / at(j, 0);
    }
    double v = at(k, 0);
    for (std::size_t e = 1; e <= 3 && e <= k; ++e) v -= at(k, e) * at(k, e);
    at(k, 0) = std::sqrt(std::max(v, 1e-300));
  }
  std::vector<SmoothPhase> out(gates.size(), s);
  std::vector<double> ph(M), rhs(K);
  for (std::size_t g = 0; g < gates.size(); ++g) {
    // Unwrapped phase along the table, its right-hand side, then two triangular solves.
    const CVec& t = gates[g].table_;
    ph[0] = std::arg(t[0]);
    for (std::size_t m = 1; m < M; ++m) ph[m] = ph[m - 1] + std::arg(t[m] * std::conj(t[m - 1]));
    std::fill(rhs.begin(), rhs.end(), 0.0);
    for (const Sample& x : used)
      for (std::size_t a = 0; a < 4; ++a) rhs[x.i + a] += x.w * x.b[a] * ph[x.m];
    std::vector<double>& c = out[g].coef;
    for (std::size_t k = 0; k < K; ++k) {
      double v = rhs[k];
      for (std::size_t e = 1; e <= 3 && e <= k; ++e) v -= at(k, e) * c[k - e];
      c[k] = v / at(k, 0);
    }
    for (std::size_t k = K; k-- > 0;) {
      double v = c[k];
      for (std::size_t e = 1; e <= 3 && k + e < K; ++e) v -= at(k + e, e) * c[k + e];
      c[k] = v / at(k, 0);
    }
  }
  return out;
}

SmoothPhase PhaseGate::smooth(const std::vector<double>& weight) {
  SmoothPhase s = fit_phase(weight);
  for (std::size_t m = 0; m < table_.size(); ++m) table_[m] = std::polar(1.0, s.value(time(m)));
  return s;
}

double vector_potential_from_phase_rate(double rate, double p0) {
  const double q = p0 * p0 - 2.0 * rate;
  if (q <= 0) return p0;
  return 2.0 * rate / (p0 + std::sqrt(q));  // = p0 - sqrt(q), without cancellation
}

double cma_gate_phase(const IrField& ir, double p0, double t) {
  const VolkovIntegrals v = ir.at(t);
  return -p0 * v.I1 + 0.5 * v.I2;
}

IrField ir_from_gate_phase(const SmoothPhase& phase, double p0, double t_first, double t_last,
                           double dt) {
  const std::size_t n =
      std::max<std::size_t>(5, static_cast<std::size_t>(std::ceil((t_last - t_first) / dt)) + 1);
  std::vector<double> A(n);
  for (std::size_t i = 0; i < n; ++i)
    A[i] = vector_potential_from_phase_rate(phase.derivative(t_first + static_cast<double>(i) * dt),
                                            p0);
  return IrField(t_first, dt, std::move(A));
}

}  // namespace sw
