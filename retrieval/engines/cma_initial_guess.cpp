// CmaProblem: the initial XUV envelope and the initial gate (cma_problem.h).
#include "retrieval/engines/cma_problem.h"

#include <algorithm>
#include <cmath>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/cma_problem_internal.h"

namespace sw {

CVec CmaProblem::initial_xuv(const EngineOptions& o) const {
  const TimeGrid& g = problem_.grid;
  if (o.initial_xuv) {
    // A start made on another grid (a bootstrap replica's support can change the grid) is
    // carried over by its spectrum (XuvField::resampled).
    const TimeGrid& h = o.initial_xuv->grid();
    if (h.size() != n_ || std::abs(h.dt() - g.dt()) > 1e-9 * g.dt() ||
        std::abs(h.t0() - g.t0()) > 1e-6 * g.dt())
      return o.initial_xuv->resampled(g).with_carrier(carrier_).envelope();
    return o.initial_xuv->with_carrier(carrier_).envelope();
  }
  // sqrt(spectrum) with flat phase, peak at s = 0: raw_k = |E~(w_b)| exp(-i w_b t0) / dt.
  CVec raw(n_, cdouble(0.0, 0.0)), eps(n_);
  for (std::size_t j = 0; j < ne_; ++j) {
    double a;
    if (!spectrum_amp_.empty()) {
      a = spectrum_amp_[j];
    } else {
      double m = 0;
      for (std::size_t i = 0; i < nd_; ++i) m += std::max(meas_[i * ne_ + j], 0.0);
      a = std::sqrt(m / static_cast<double>(nd_));
    }
    const double w = static_cast<double>(bin_[j]) * g.dw();
    raw[fft_index(bin_[j], n_)] = std::polar(a / dt_, -w * g.t0());
  }
  fft_.freq_to_time(raw, eps);
  const double inv = 1.0 / static_cast<double>(n_);
  for (auto& e : eps) e *= inv;
  return eps;
}

PhaseGate CmaProblem::initial_gate(const EngineOptions& o) const {
  PhaseGate gate(problem_.grid, problem_.delay_au, knot_step_au());
  const double p0 = problem_.central_momentum_au;
  if (o.initial_ir && o.initial_ir->size() >= 5) {
    const IrField& ir = *o.initial_ir;
    gate.set_phase([&](double t) { return cma_gate_phase(ir, p0, t); });
    gate_guess_ = "initial_ir";
    return gate;
  }
  // Streaking-centroid curve. The gate shifts the spectrum by -d phi/dt = -(p0 A - A^2/2):
  // W_c(tau) = W0 - p0 A(tau) + A(tau)^2 / 2 (= the classical (p0 - A)^2 / 2), so
  // A = p0 - sqrt(p0^2 + 2 (W_c - W0)) (gate.h).
  const std::vector<double>& W = problem_.energy_au;
  std::vector<double> wc(nd_, 0.0);
  for (std::size_t i = 0; i < nd_; ++i) {
    double num_w = 0, den = 0;
    for (std::size_t j = 0; j < ne_; ++j) {
      const double v = std::max(meas_[i * ne_ + j], 0.0);
      num_w += v * W[j];
      den += v;
    }
    wc[i] = den > 0 ? num_w / den : 0.0;
  }
  double W0 = 0.0;
  if (!spectrum_amp_.empty()) {
    double num_w = 0, den = 0;
    for (std::size_t j = 0; j < ne_; ++j) {
      const double v = spectrum_amp_[j] * spectrum_amp_[j];
      num_w += v * W[j];
      den += v;
    }
    W0 = num_w / den;
  } else {
    for (double x : wc) W0 += x / static_cast<double>(nd_);
  }
  std::vector<double> A(nd_);
  double shift = 0.0;
  for (std::size_t i = 0; i < nd_; ++i) {
    A[i] = vector_potential_from_phase_rate(W0 - wc[i], p0);
    shift = std::max(shift, std::abs(wc[i] - W0));
  }
  if (shift < 2.0 * problem_.grid.dw()) {
    gate_guess_ = "flat (centroid sweep below two energy bins)";
    return gate;
  }
  const std::vector<double>& tau = problem_.delay_au;
  const double step = units::period_au(problem_.ir_omega_au) / 64.0;
  const std::size_t m =
      std::max<std::size_t>(5, static_cast<std::size_t>((tau.back() - tau.front()) / step) + 1);
  const double h = (tau.back() - tau.front()) / static_cast<double>(m - 1);
  std::vector<double> a(m);
  std::size_t i = 0;
  for (std::size_t q = 0; q < m; ++q) {
    const double t = tau.front() + static_cast<double>(q) * h;
    while (i + 2 < nd_ && tau[i + 1] < t) ++i;
    const double f = std::clamp((t - tau[i]) / (tau[i + 1] - tau[i]), 0.0, 1.0);
    a[q] = (1.0 - f) * A[i] + f * A[i + 1];
  }
  const IrField guess(tau.front(), h, std::move(a));
  gate.set_phase([&](double t) { return cma_gate_phase(guess, p0, t); });
  gate_guess_ = "centroid curve";
  return gate;
}

}  // namespace sw
