// CmaProblem: the momentum nodes of the banded CMA (MomentumBand, BandState in cma_problem.h) --
// their gates tied to one vector potential, the interpolation layout of the rows, the banded
// projection, model trace and reconstruction.
#include "retrieval/engines/cma_problem.h"

#include <algorithm>
#include <cmath>
#include <cstdint>

#include "retrieval/engines/cma_problem_internal.h"

namespace sw {

using cma_detail::last_probed_node;
using cma_detail::rotate_linear;

int auto_momentum_bands(double p_lo, double p_hi, double p0) {
  if (!(p0 > 0) || !(p_hi > p_lo)) return 1;
  const int b = static_cast<int>(std::ceil((p_hi - p_lo) / (0.15 * p0) - 1e-9)) + 1;
  return std::clamp(b, 2, 8);
}

void CmaProblem::constrain(int k, CVec& eps, std::vector<PhaseGate>& gates, CVec& work,
                           std::vector<double>& cover, BandState& state) const {
  if (gates.size() == 1) return constrain(k, eps, gates[0], work, cover);
  const CmaSettings& s = settings_;
  if (s.spectrum != CmaSettings::Spectrum::kOff && s.spectrum_interval > 0 &&
      k % s.spectrum_interval == 0 && !spectrum_amp_.empty()) {
    std::size_t ref = 0;
    for (std::size_t b = 1; b < bands_.size(); ++b)
      if (bands_[b].weight > bands_[ref].weight) ref = b;
    // (align_vector_potential inverts the rate in the delay-adapted frame; in the final frame
    // the zero of the Hann-weighted mean of A moves by O(A^2 / p), which the next
    // reconcile_gates() averages over the bands.)
    const double d = problem_.reference != ReferenceSpectrum::kFieldFree
                         ? align_vector_potential(eps, gates[ref], bands_[ref].p_au)
                         : align_spectrum(eps, gates[ref], work);
    if (d != 0.0)
      for (std::size_t b = 0; b < gates.size(); ++b)
        if (b != ref)
          rotate_linear(gates[b].table().data(), gates[b].size(), gates[b].time(0), gates[b].dt(),
                        d);
    if (s.spectrum == CmaSettings::Spectrum::kAmplitude) impose_spectrum(eps, work);
  }
  impose_support(eps, work);
  // Every iteration, whatever gate_smoothing_interval says: band gates left to their own
  // updates for a few iterations drift apart (each band alone has its own frequency-shift
  // freedom), and the shared XUV then fits none of them (measured: G stalls at 9x the noise
  // floor on a 38 eV neon train with reconciliation every 4 iterations, reaches it with 1).
  reconcile_gates(eps, gates, cover, state);
}

namespace {

// Phase rate of a band gate and its inverse (physical branch, A -> 0 with the rate):
// final-momentum frame p A + A^2/2, A = sqrt(p^2 + 2 rate) - p; initial-momentum
// (delay-adapted) frame p A - A^2/2, A = p - sqrt(p^2 - 2 rate) (gate.h).
double band_rate(double A, double p, bool final_frame) {
  return final_frame ? p * A + 0.5 * A * A : p * A - 0.5 * A * A;
}
double band_potential(double rate, double p, bool final_frame) {
  if (!final_frame) return vector_potential_from_phase_rate(rate, p);
  const double q = p * p + 2.0 * rate;
  if (q <= 0) return -p;
  return 2.0 * rate / (p + std::sqrt(q));
}

}  // namespace

std::size_t cma_detail::last_probed_node(const std::vector<double>& cover) {
  double cmax = 0;
  for (double c : cover) cmax = std::max(cmax, c);
  std::size_t hi = cover.empty() ? 0 : cover.size() - 1;
  while (hi > 0 && cover[hi] < 0.3 * cmax) --hi;
  return hi;
}

CmaProblem::CommonPotential CmaProblem::common_potential(const CVec& eps,
                                                         const std::vector<PhaseGate>& gates,
                                                         std::vector<double>& cover,
                                                         bool final_frame) const {
  gates[0].coverage(eps, cover);
  CommonPotential c;
  c.end = last_probed_node(cover);
  const std::size_t m = gates[0].size();
  c.A.assign(m, 0.0);
  const bool one = gates.size() == 1;  // the one-p0 (delay-adapted) gate
  double wsum = 0.0;
  std::size_t ref = 0;
  for (std::size_t b = 0; b < gates.size(); ++b) {
    wsum += one ? 1.0 : bands_[b].weight;
    if (!one && bands_[b].weight > bands_[ref].weight) ref = b;
  }
  const std::vector<SmoothPhase> phases = PhaseGate::fit_phases(gates, cover);
  for (std::size_t b = 0; b < gates.size(); ++b) {
    const SmoothPhase& ph = phases[b];
    const double w = one        ? 1.0
                     : wsum > 0 ? bands_[b].weight / wsum
                                : 1.0 / static_cast<double>(gates.size());
    const double p = one ? problem_.central_momentum_au : bands_[b].p_au;
    for (std::size_t i = 0; i < m; ++i)
      c.A[i] += w * band_potential(ph.derivative(gates[b].time(i)), p, final_frame && !one);
    if (b == ref) c.end_phase = ph.value(gates[b].time(c.end));
  }
  return c;
}

void CmaProblem::set_gate_from_potential(PhaseGate& gate, const std::vector<double>& A, double p,
                                         std::size_t end, double end_phase, bool final_frame) {
  // The rate integrated by the trapezoid rule on the nodes (A is smooth on the node step, a
  // few attoseconds), then shifted so that phi(end) = end_phase. The same end_phase for every
  // band makes phi_b = -p_b I1 -+ I2/2 + C with I1, I2 integrated from the last well-probed
  // node. (A constant phase per band gate is invisible to |a| anyway, but keeping them tied
  // keeps the interpolated rows of neighbouring nodes coherent.)
  const std::size_t m = gate.size();
  std::vector<double> phi(m, 0.0);
  for (std::size_t i = 1; i < m; ++i)
    phi[i] =
        phi[i - 1] +
        0.5 * gate.dt() * (band_rate(A[i - 1], p, final_frame) + band_rate(A[i], p, final_frame));
  const double shift = end_phase - phi[std::min(end, m - 1)];
  CVec& t = gate.table();
  for (std::size_t i = 0; i < m; ++i) t[i] = std::polar(1.0, phi[i] + shift);
}

void CmaProblem::band_layout(const CommonPotential& c, const PhaseGate& gate,
                             BandState& state) const {
  const std::size_t nb = bands_.size();
  const std::vector<double>& A = c.A;
  state.node.assign(nd_ * ne_, 0);
  state.frac.assign(nd_ * ne_, 0.0);
  state.twist.assign(nd_ * nb, cdouble(1.0, 0.0));
  // J1(t) = Int_{t_end}^t A on the gate nodes (set_gate_from_potential's origin).
  std::vector<double> J1(A.size(), 0.0);
  for (std::size_t m = 1; m < A.size(); ++m)
    J1[m] = J1[m - 1] + 0.5 * gate.dt() * (A[m - 1] + A[m]);
  const double e = J1[std::min(c.end, J1.size() - 1)];
  for (double& v : J1) v -= e;
  for (std::size_t i = 0; i < nd_; ++i) {
    const double x = (problem_.delay_au[i] - gate.time(0)) / gate.dt();
    const long m =
        std::clamp(static_cast<long>(std::floor(x)), 0L, static_cast<long>(A.size()) - 2);
    const double u = std::clamp(x - static_cast<double>(m), 0.0, 1.0);
    const std::size_t q = static_cast<std::size_t>(m);
    const double a = state.final_momentum ? 0.0 : (1.0 - u) * A[q] + u * A[q + 1];
    const double j1 = (1.0 - u) * J1[q] + u * J1[q + 1];
    // Node b's gate carries the phase p_b J1(t); at t ~ tau_i that is a constant per node and
    // delay which |a| of one node ignores but the interpolation between nodes does not
    // (h J1 reaches radians in strong streaking): it is removed before combining.
    for (std::size_t b = 0; b < nb; ++b)
      state.twist[i * nb + b] = std::polar(1.0, -bands_[b].p_au * j1);
    // Initial-momentum frame: row p_f is interpolated at its initial momentum p_f + A(tau_i)
    // (classical streaking, p_f = p_i - A); final-momentum frame: at p_f (a = 0).
    // (In the final-momentum frame every delay's layout is the first delay's.)
    std::uint8_t* node = state.node.data() + i * ne_;
    double* frac = state.frac.data() + i * ne_;
    if (state.final_momentum && i > 0) {
      std::copy_n(state.node.data(), ne_, node);
      std::copy_n(state.frac.data(), ne_, frac);
      continue;
    }
    for (std::size_t j = 0; j < ne_; ++j)
      node[j] = static_cast<std::uint8_t>(node_of(row_momentum_[j] + a, &frac[j]));
  }
}

void CmaProblem::project_bands(std::size_t j, std::vector<CVec>& spectra, const BandState& state,
                               ErrorSums& sums, double* scratch, CVec& combined,
                               CVec& before) const {
  if (spectra.size() == 1) return project(j, spectra[0].data(), sums, scratch);
  // Only the measured bins are written below; the others stay 0 through project() (which
  // at most scales them), so the buffers are zeroed once.
  if (combined.size() != n_) combined.assign(n_, cdouble(0.0, 0.0));
  before.resize(n_);
  // The complex products are written out in real arithmetic, in the order std::complex uses
  // for finite values ((w re) x, then x y = (ac - bd, ad + bc)): the same numbers without the
  // compiler's NaN branch per product, which kept this loop scalar and branchy.
  const std::size_t nb = spectra.size();
  double* sp[kMaxMomentumBands];
  for (std::size_t b = 0; b < nb; ++b) sp[b] = reinterpret_cast<double*>(spectra[b].data());
  const std::uint8_t* node = state.node.data() + j * ne_;
  const double* frac = state.frac.data() + j * ne_;
  const double* tw = reinterpret_cast<const double*>(state.twist.data() + j * nb);
  double* comb = reinterpret_cast<double*>(combined.data());
  double* prev = reinterpret_cast<double*>(before.data());
  for (const Segment& seg : measured_) {
    const std::uint8_t* nd = node + seg.j0;
    const double* fr = frac + seg.j0;
    for (std::size_t q = 0; q < seg.len; ++q) {
      const std::size_t n = nd[q], k2 = 2 * (seg.k0 + q);
      const double u = fr[q], v = 1.0 - u;
      const double ar = v * tw[2 * n], ai = v * tw[2 * n + 1];
      const double br = u * tw[2 * n + 2], bi = u * tw[2 * n + 3];
      const double* x = sp[n] + k2;
      const double* y = sp[n + 1] + k2;
      const double re = (ar * x[0] - ai * x[1]) + (br * y[0] - bi * y[1]);
      const double im = (ar * x[1] + ai * x[0]) + (br * y[1] + bi * y[0]);
      comb[k2] = prev[k2] = re;
      comb[k2 + 1] = prev[k2 + 1] = im;
    }
  }
  project(j, combined.data(), sums, scratch);  // unmeasured bins are 0 and stay 0
  // The gradient of the combined model: each node's spectrum moves by its weight times the
  // change of the row (the two weights sum to 1, so the row moves by the whole change when
  // both nodes' exit waves are updated): x += (w conj(tw)) d, written out as above.
  for (const Segment& seg : measured_) {
    const std::uint8_t* nd = node + seg.j0;
    const double* fr = frac + seg.j0;
    for (std::size_t q = 0; q < seg.len; ++q) {
      const std::size_t n = nd[q], k2 = 2 * (seg.k0 + q);
      const double u = fr[q], v = 1.0 - u;
      const double dr = comb[k2] - prev[k2], di = comb[k2 + 1] - prev[k2 + 1];
      const double ar = v * tw[2 * n], ai = v * -tw[2 * n + 1];
      const double br = u * tw[2 * n + 2], bi = u * -tw[2 * n + 3];
      double* x = sp[n] + k2;
      double* y = sp[n + 1] + k2;
      x[0] += ar * dr - ai * di;
      x[1] += ar * di + ai * dr;
      y[0] += br * dr - bi * di;
      y[1] += br * di + bi * dr;
    }
  }
  const double damp = settings_.unmeasured_damping;
  if (damp != 1.0)
    for (CVec& spec : spectra)
      for (const Segment& seg : unmeasured_)
        for (std::size_t q = 0; q < seg.len; ++q) spec[seg.k0 + q] *= damp;
}

void CmaProblem::apply_potential(const CommonPotential& c, std::vector<PhaseGate>& gates,
                                 BandState& state) const {
  for (std::size_t b = 0; b < gates.size(); ++b)
    set_gate_from_potential(gates[b], c.A, bands_[b].p_au, c.end, c.end_phase,
                            state.final_momentum);
  band_layout(c, gates[0], state);
}

std::vector<PhaseGate> CmaProblem::band_gates(const CVec& eps, const PhaseGate& gate,
                                              BandState& state) const {
  std::vector<double> cover;
  const std::vector<PhaseGate> one = {gate};
  const CommonPotential c = common_potential(eps, one, cover, false);
  // The frame: final momenta when the streaking shift max |A| over the well-probed nodes is
  // below half the node spacing (rows then hardly move between nodes, and the
  // final-momentum rate is exact for electrons born at any time -- a train), else initial
  // momenta (delay-adapted: exact at the streaked centre of an isolated pulse).
  double cmax = 0.0, a0 = 0.0;
  for (double v : cover) cmax = std::max(cmax, v);
  for (std::size_t i = 0; i < c.A.size() && i < cover.size(); ++i)
    if (cover[i] >= 0.3 * cmax) a0 = std::max(a0, std::abs(c.A[i]));
  state.final_momentum = a0 < 0.5 * node_step_;
  state.streaking_shift_au = a0;
  std::vector<PhaseGate> gates(bands_.size(), gate);
  apply_potential(c, gates, state);
  return gates;
}

void CmaProblem::reconcile_gates(const CVec& eps, std::vector<PhaseGate>& gates,
                                 std::vector<double>& cover, BandState& state) const {
  if (gates.size() == 1) {
    gates[0].coverage(eps, cover);
    gates[0].smooth(cover);
    return;
  }
  apply_potential(common_potential(eps, gates, cover, state.final_momentum), gates, state);
}

Eigen::MatrixXd CmaProblem::model_trace(const CVec& eps, const std::vector<PhaseGate>& gates,
                                        const BandState& state) const {
  if (gates.size() == 1) return model_trace(eps, gates[0]);
  const std::size_t nb = gates.size();
  Eigen::MatrixXd M(nd_, ne_);
  CVec g(n_), psi(n_);
  std::vector<CVec> raw(nb, CVec(n_));
  const double dt2 = dt_ * dt_;
  for (std::size_t i = 0; i < nd_; ++i) {
    for (std::size_t b = 0; b < nb; ++b) {
      gates[b].sample(i, g.data());
      for (std::size_t n = 0; n < n_; ++n) psi[n] = eps[n] * g[n];
      fft_.time_to_freq(psi, raw[b]);
    }
    for (std::size_t j = 0; j < ne_; ++j) {
      const std::size_t k = fft_index(bin_[j], n_), n = state.node[i * ne_ + j];
      const double u = state.frac[i * ne_ + j];
      const cdouble* tw = state.twist.data() + i * nb;
      M(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) =
          dt2 * std::norm((1.0 - u) * tw[n] * raw[n][k] + u * tw[n + 1] * raw[n + 1][k]);
    }
  }
  return M;
}

Reconstruction CmaProblem::reconstruct(CVec eps, std::vector<PhaseGate> gates,
                                       bool final_momentum) const {
  if (gates.size() == 1) return reconstruct(std::move(eps), std::move(gates[0]));
  // One consistent set: every node gate from the common A, the reported A(t) through the p0
  // gate of that A (the single-gate bookkeeping below then applies unchanged).
  std::vector<double> cover;
  BandState state;
  state.final_momentum = final_momentum;
  const CommonPotential c = common_potential(eps, gates, cover, final_momentum);
  apply_potential(c, gates, state);
  PhaseGate g0 = gates[0];
  set_gate_from_potential(g0, c.A, problem_.central_momentum_au, c.end, c.end_phase, false);
  Reconstruction rec = reconstruct(eps, std::move(g0));
  rec.model = "banded-cma";
  // |a| does not see the global phase applied to rec.xuv.
  rec.retrieved = model_trace(eps, gates, state);
  rec.settings.emplace_back("momentum_band_frame",
                            state.final_momentum
                                ? "final momentum (gate rate p_b A + A^2/2)"
                                : "initial momentum (delay-adapted, p_b A - A^2/2)");
  rec.trace_error =
      sw::trace_error(problem_.intensity, rec.retrieved, &rec.scale, &problem_.weight);
  return rec;
}

}  // namespace sw
