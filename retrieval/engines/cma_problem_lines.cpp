// CmaProblem: further photoelectron lines as incoherent modes of the exit wave (LineMode in
// cma_problem.h; mixed-state ptychography, P. Thibault and A. Menzel, Nature 494, 68 (2013)) --
// the modes, their joint projection, their gates tied to the one A(t), model traces and the
// reconstruction.
#include <algorithm>
#include <cmath>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/cma_kernels.h"
#include "retrieval/engines/cma_problem.h"
#include "retrieval/engines/cma_problem_internal.h"

namespace sw {

using cma_detail::last_probed_node;
using cma_detail::num;

RetrievalProblem joint_lines_view(const RetrievalProblem& problem, double reach) {
  RetrievalProblem q = problem;
  if (q.extra_lines.empty() || q.energy_au.empty()) return q;
  const double W0 = 0.5 * q.central_momentum_au * q.central_momentum_au;
  const bool has = q.support_hi_au > q.support_lo_au;
  double lo = has ? q.support_lo_au : q.energy_au.front();
  double hi = has ? q.support_hi_au : q.energy_au.back();
  for (const ExtraLine& e : q.extra_lines) {
    const double D = e.ionization_energy_au - q.ionization_energy_au;
    if (D > 0) lo = std::max(lo, W0 - reach * D);
    if (D < 0) hi = std::min(hi, W0 - reach * D);
  }
  if (!(hi > lo)) return q;
  q.support_lo_au = lo;
  q.support_hi_au = hi;
  for (std::size_t j = 0; j < q.field_free_spectrum.size() && j < q.energy_au.size(); ++j)
    if (q.energy_au[j] < lo || q.energy_au[j] > hi) q.field_free_spectrum[j] = 0.0;
  return q;
}

std::vector<LineMode> CmaProblem::line_modes() const {
  std::vector<LineMode> out;
  const double p0 = problem_.central_momentum_au, dw = problem_.grid.dw();
  // The XUV's spectral band in signed FFT bins (support, else the measured window).
  const bool has = problem_.support_hi_au > problem_.support_lo_au;
  const double b_lo = has ? (problem_.support_lo_au + problem_.ionization_energy_au - carrier_) / dw
                          : static_cast<double>(bin_.front());
  const double b_hi = has ? (problem_.support_hi_au + problem_.ionization_energy_au - carrier_) / dw
                          : static_cast<double>(bin_.back());
  const double half = 0.5 * static_cast<double>(n_);
  for (const ExtraLine& e : problem_.extra_lines) {
    LineMode m;
    m.name = e.name;
    m.offset_au = e.ionization_energy_au - problem_.ionization_energy_au;
    const double q = p0 * p0 - 2.0 * m.offset_au;
    if (!(q > 0))
      throw input_error(engine_ + ": RetrievalProblem.extra_lines (" + e.name +
                        "): no central momentum (p0^2 - 2 (Ip_line - Ip) = " + num(q) + " a.u.)");
    m.p0_au = std::sqrt(q);
    // The line's counts sit D / dw bins below the reference's: its band must not wrap around.
    const double shift = m.offset_au / dw;
    if (b_lo - shift <= -half || b_hi - shift >= half)
      throw input_error(engine_ + ": RetrievalProblem.extra_lines (" + e.name +
                        "): its band (FFT bins " + num(b_lo - shift) + ".." + num(b_hi - shift) +
                        ") falls outside the grid's " + std::to_string(n_) + " bins");
    m.modulation.resize(n_);
    for (std::size_t s = 0; s < n_; ++s)
      m.modulation[s] = std::polar(1.0, m.offset_au * problem_.grid.time(s));
    out.push_back(std::move(m));
  }
  return out;
}

void CmaProblem::project_modes(std::size_t j, std::vector<CVec>& spectra, std::size_t count,
                               ErrorSums& sums, double* scratch) const {
  const double dt2 = dt_ * dt_;
  const double* I = meas_.data() + j * ne_;
  const double* lo = lo_.data() + j * ne_;
  const double* hi = hi_.data() + j * ne_;
  double* f = scratch;  // per energy: summed |S|^2, then the factor
  for (const Segment& seg : measured_)
    for (std::size_t q = 0; q < seg.len; ++q) {
      double r2 = 0.0;
      for (std::size_t m = 0; m < count; ++m) r2 += std::norm(spectra[m][seg.k0 + q]);
      f[seg.j0 + q] = r2;
    }
  double im = 0.0, mm = 0.0;
  // Weight-0 bins of this row keep the model (factor 1) and stay out of the sums.
  const std::size_t f0 = frozen_start_[j], f1 = frozen_start_[j + 1];
  for (std::size_t z = f0; z < f1; ++z) {
    const double M = dt2 * f[frozen_j_[z]];
    im -= I[frozen_j_[z]] * M;
    mm -= M * M;
  }
  for (const Segment& seg : measured_) {
    double* fs = f + seg.j0;
    if (!band_) {
      cma_kernels::mode_factors(fs, I + seg.j0, lo + seg.j0, seg.len, dt2, poisson_, &im, &mm);
      continue;
    }
    for (std::size_t q = 0; q < seg.len; ++q) {
      const double M = dt2 * fs[q];
      im += I[seg.j0 + q] * M;
      mm += M * M;
      const double r = std::sqrt(fs[q]);
      fs[q] = std::clamp(r, lo[seg.j0 + q], hi[seg.j0 + q]) / std::max(r, 1e-300);
    }
  }
  for (std::size_t z = f0; z < f1; ++z) f[frozen_j_[z]] = 1.0;
  const double damp = settings_.unmeasured_damping;
  for (std::size_t m = 0; m < count; ++m) {
    double* S = reinterpret_cast<double*>(spectra[m].data());
    for (const Segment& seg : measured_)
      cma_kernels::scale_bins(S + 2 * seg.k0, f + seg.j0, seg.len);
    if (damp != 1.0)
      for (const Segment& seg : unmeasured_)
        for (std::size_t q = 0; q < seg.len; ++q) spectra[m][seg.k0 + q] *= damp;
  }
  sums.im += im;
  sums.mm += mm;
}

PhaseGate CmaProblem::line_gate(const std::vector<double>& A, const PhaseGate& reference,
                                double p_au, double delay_au) const {
  std::vector<double> d = problem_.delay_au;
  for (double& x : d) x += delay_au;
  PhaseGate g(problem_.grid, d, knot_step_au());
  std::vector<double> Ag(g.size(), 0.0);
  const long last = static_cast<long>(A.size()) - 1;
  for (std::size_t m = 0; m < g.size(); ++m) {
    const double x = (g.time(m) - reference.time(0)) / reference.dt();
    const long i = std::clamp(static_cast<long>(std::floor(x)), 0L, std::max(last - 1, 0L));
    const double u = std::clamp(x - static_cast<double>(i), 0.0, 1.0);
    const auto k = static_cast<std::size_t>(i);
    Ag[m] = last > 0 ? (1.0 - u) * A[k] + u * A[k + 1] : A[0];
  }
  // A constant phase of one incoherent mode is invisible: the phase origin is the first node.
  set_gate_from_potential(g, Ag, p_au, 0, 0.0, false);
  return g;
}

std::vector<double> CmaProblem::reconcile_line_gates(const CVec& eps, std::vector<PhaseGate>& gates,
                                                     const std::vector<LineMode>& modes,
                                                     const std::vector<double>& strength,
                                                     std::vector<double>& cover) const {
  PhaseGate& ref = gates[0];
  ref.coverage(eps, cover);
  const SmoothPhase ph0 = ref.fit_phase(cover);
  double wsum = 1.0;
  for (double s : strength) wsum += s;
  const std::size_t m = ref.size();
  std::vector<double> A(m, 0.0);
  const double p0 = problem_.central_momentum_au;
  for (std::size_t i = 0; i < m; ++i)
    A[i] = vector_potential_from_phase_rate(ph0.derivative(ref.time(i)), p0) / wsum;
  std::vector<double> ck;
  for (std::size_t k = 0; k < modes.size(); ++k) {
    gates[1 + k].coverage(eps, ck);
    const SmoothPhase ph = gates[1 + k].fit_phase(ck);
    const double w = strength[k] / wsum;
    for (std::size_t i = 0; i < m; ++i)
      A[i] += w * vector_potential_from_phase_rate(ph.derivative(ref.time(i)), modes[k].p0_au);
  }
  const std::size_t end = last_probed_node(cover);
  set_gate_from_potential(ref, A, p0, end, ph0.value(ref.time(end)), false);
  return A;
}

Eigen::MatrixXd CmaProblem::mode_trace(const CVec& eps, const PhaseGate& gate, const LineMode* mode,
                                       double amplitude) const {
  Eigen::MatrixXd M(nd_, ne_);
  CVec g(n_), psi(n_), raw(n_);
  const double dt2 = dt_ * dt_;
  for (std::size_t i = 0; i < nd_; ++i) {
    gate.sample(i, g.data());
    for (std::size_t s = 0; s < n_; ++s)
      psi[s] = mode ? amplitude * eps[s] * mode->modulation[s] * g[s] : eps[s] * g[s];
    fft_.time_to_freq(psi, raw);
    for (std::size_t j = 0; j < ne_; ++j)
      M(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) =
          dt2 * std::norm(raw[fft_index(bin_[j], n_)]);
  }
  return M;
}

std::vector<Eigen::MatrixXd> CmaProblem::line_model_traces(
    const CVec& eps, const std::vector<PhaseGate>& gates, const std::vector<LineMode>& modes,
    const std::vector<double>& amplitude) const {
  std::vector<Eigen::MatrixXd> out;
  out.push_back(mode_trace(eps, gates[0], nullptr, 1.0));
  for (std::size_t l = 0; l < modes.size(); ++l)
    out.push_back(mode_trace(eps, gates[1 + l], &modes[l], amplitude[l]));
  return out;
}

double CmaProblem::line_delay_step(const CVec& eps, const std::vector<double>& A,
                                   const PhaseGate& reference, const LineMode& mode,
                                   const Eigen::MatrixXd& other, double t, double h,
                                   double max_step) const {
  const Eigen::MatrixXd& I = problem_.intensity;
  const bool weighted = problem_.weight.size() != 0;
  double R[3];
  for (int q = 0; q < 3; ++q) {
    const PhaseGate g = line_gate(A, reference, mode.p0_au, t + (q - 1) * h);
    const Eigen::MatrixXd M = mode_trace(eps, g, &mode, 1.0);
    Eigen::ArrayXXd r = (I - other).array();
    Eigen::ArrayXXd m = M.array();
    if (weighted) {
      const Eigen::ArrayXXd w = (problem_.weight.array() > 0).cast<double>();
      r *= w;
      m *= w;
    }
    const double mm = (m * m).sum();
    const double s = mm > 0 ? std::max((r * m).sum() / mm, 0.0) : 0.0;
    R[q] = (r - s * m).square().sum();
  }
  const double curv = R[0] - 2.0 * R[1] + R[2];
  if (!(curv > 0)) return R[0] < R[2] ? t - h : t + h;
  const double step = 0.5 * h * (R[0] - R[2]) / curv;
  return t + std::clamp(step, -max_step, max_step);
}

Reconstruction CmaProblem::reconstruct_lines(CVec eps, std::vector<PhaseGate> gates,
                                             const std::vector<LineMode>& modes,
                                             const std::vector<double>& amplitude,
                                             const std::vector<double>& delay_au) const {
  Reconstruction rec = reconstruct(eps, gates[0]);
  const std::vector<Eigen::MatrixXd> traces = line_model_traces(eps, gates, modes, amplitude);
  rec.retrieved = traces[0];
  for (std::size_t l = 1; l < traces.size(); ++l) rec.retrieved += traces[l];
  rec.trace_error =
      sw::trace_error(problem_.intensity, rec.retrieved, &rec.scale, &problem_.weight);
  // Counts per unit energy carry the Jacobian p (DESIGN.md): the ratio of modelled counts.
  Eigen::VectorXd p(static_cast<Eigen::Index>(ne_));
  for (std::size_t j = 0; j < ne_; ++j)
    p[static_cast<Eigen::Index>(j)] = units::momentum_au(problem_.energy_au[j]);
  const double ref_counts = (traces[0] * p).sum();
  for (std::size_t l = 0; l < modes.size(); ++l) {
    const std::string k = "joint_line." + std::to_string(l) + ".";
    rec.settings.emplace_back(k + "name", modes[l].name);
    rec.settings.emplace_back(k + "delay_as", format_exact(units::au_to_as(delay_au[l])));
    rec.settings.emplace_back(k + "strength", format_exact(amplitude[l] * amplitude[l]));
    rec.settings.emplace_back(
        k + "counts_ratio",
        format_exact(ref_counts > 0 ? (traces[l + 1] * p).sum() / ref_counts : 0.0));
    rec.settings.emplace_back(k + "central_momentum_au", num(modes[l].p0_au));
  }
  rec.settings.emplace_back("joint_lines",
                            std::to_string(modes.size() + 1) +
                                " lines as incoherent modes (mixed-state projection), one gate "
                                "per line from the shared A(t)");
  return rec;
}

}  // namespace sw
