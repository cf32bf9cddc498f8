// CmaProblem: the constraints applied between iterations -- the field-free spectrum, the energy
// support -- and the fixes of the frequency-shift ambiguity (cma_problem.h).
#include "retrieval/engines/cma_problem.h"

#include <algorithm>
#include <cmath>
#include <vector>

#include "retrieval/core/units.h"
#include "retrieval/engines/cma_problem_internal.h"

namespace sw {

namespace cma_detail {

// v[i] *= exp(i rate (t0 + i step)), by recurrence of unit rotations.
void rotate_linear(cdouble* v, std::size_t n, double t0, double step, double rate) {
  cdouble r = std::polar(1.0, rate * t0);
  const cdouble d = std::polar(1.0, rate * step);
  for (std::size_t i = 0; i < n; ++i) {
    v[i] *= r;
    r *= d;
    if ((i & 255) == 255) r /= std::abs(r);
  }
}

const std::vector<double>& hann_weights(std::size_t m) {
  thread_local std::vector<double> w;
  if (w.size() != m) {
    w.resize(m);
    for (std::size_t i = 0; i < m; ++i) {
      const double x = (static_cast<double>(i) + 0.5) / static_cast<double>(m);
      w[i] = std::sin(units::kPi * x) * std::sin(units::kPi * x);
    }
  }
  return w;
}

}  // namespace cma_detail

using cma_detail::rotate_linear;

void CmaProblem::impose_spectrum(CVec& eps, CVec& work) const {
  if (spectrum_amp_.empty()) return;
  work.resize(n_);
  fft_.time_to_freq(eps, work);
  // The target amplitude per energy index: the reference itself, or (when only its shape is
  // trusted) the reference moved so that its centroid sits on the current XUV centroid.
  const double* target = spectrum_amp_.data();
  std::vector<double> moved;
  if (problem_.reference != ReferenceSpectrum::kFieldFree) {
    double cx = 0, sx = 0, cr = 0, sr = 0;
    for (const Segment& seg : measured_)
      for (std::size_t q = 0; q < seg.len; ++q) {
        const double j = static_cast<double>(seg.j0 + q), p = std::norm(work[seg.k0 + q]);
        const double r = spectrum_amp_[seg.j0 + q] * spectrum_amp_[seg.j0 + q];
        cx += j * p;
        sx += p;
        cr += j * r;
        sr += r;
      }
    if (sx > 0 && sr > 0) {
      const double shift = cr / sr - cx / sx;  // target(j) = reference(j + shift)
      moved.resize(ne_);
      for (std::size_t j = 0; j < ne_; ++j) {
        const double x = static_cast<double>(j) + shift;
        const double f = std::floor(x);
        const long i0 = static_cast<long>(f);
        const double u = x - f;
        auto at = [&](long i) {
          return i >= 0 && i < static_cast<long>(ne_) ? spectrum_amp_[static_cast<std::size_t>(i)]
                                                      : 0.0;
        };
        moved[j] = (1.0 - u) * at(i0) + u * at(i0 + 1);
      }
      target = moved.data();
    }
  }
  double have = 0.0, want = 0.0;
  for (const Segment& seg : measured_)
    for (std::size_t q = 0; q < seg.len; ++q) {
      have += std::norm(work[seg.k0 + q]);
      want += target[seg.j0 + q] * target[seg.j0 + q];
    }
  const double c = want > 0 && have > 0 ? std::sqrt(have / want) : 1.0 / dt_;
  for (const Segment& seg : measured_)
    for (std::size_t q = 0; q < seg.len; ++q) {
      cdouble& w = work[seg.k0 + q];
      const double r = std::abs(w), t = c * target[seg.j0 + q];
      w = r > 1e-300 ? w * (t / r) : cdouble(t, 0.0);
    }
  for (const Segment& seg : unmeasured_)
    for (std::size_t q = 0; q < seg.len; ++q) work[seg.k0 + q] = 0.0;
  fft_.freq_to_time(work, eps);
  const double inv = 1.0 / static_cast<double>(n_);
  for (auto& e : eps) e *= inv;
}

void CmaProblem::impose_support(CVec& eps, CVec& work) const {
  if (outside_support_.empty()) return;
  work.resize(n_);
  fft_.time_to_freq(eps, work);
  for (std::size_t k : outside_support_) work[k] = 0.0;
  fft_.freq_to_time(work, eps);
  const double inv = 1.0 / static_cast<double>(n_);
  for (auto& e : eps) e *= inv;
}

double CmaProblem::align_vector_potential(CVec& eps, PhaseGate& gate, double p0) const {
  std::vector<double> cover;
  gate.coverage(eps, cover);
  double cmax = 0;
  for (double c : cover) cmax = std::max(cmax, c);
  const CVec& G = gate.table();
  std::size_t lo = 0, hi = cover.size() - 1;
  while (lo < hi && cover[lo] < 0.3 * cmax) ++lo;
  while (hi > lo && cover[hi] < 0.3 * cmax) --hi;
  if (hi < lo + 8) return 0.0;
  // Phase rate between neighbouring nodes and Hann weights over [lo, hi].
  const std::size_t m = hi - lo;
  std::vector<double> rate(m);
  const std::vector<double>& w = cma_detail::hann_weights(m);
  for (std::size_t i = 0; i < m; ++i)
    rate[i] = std::arg(G[lo + i + 1] * std::conj(G[lo + i])) / gate.dt();
  // Newton on f(d) = sum w A(rate + d), f' = sum w / (p0 + A); f is increasing in d.
  double d = 0.0;
  for (int it = 0; it < 20; ++it) {
    double f = 0, fp = 0, sw = 0;
    for (std::size_t i = 0; i < m; ++i) {
      const double A = vector_potential_from_phase_rate(rate[i] + d, p0);
      f += w[i] * A;
      fp += w[i] / std::max(p0 + A, 0.1 * p0);
      sw += w[i];
    }
    const double step = f / fp;
    d -= step;
    if (std::abs(step) < 1e-10 * p0 || std::abs(f) < 1e-12 * sw) break;
  }
  if (!std::isfinite(d) || std::abs(d) < 1e-3 * problem_.grid.dw()) return 0.0;
  rotate_linear(eps.data(), n_, problem_.grid.t0(), problem_.grid.dt(), -d);
  rotate_linear(gate.table().data(), gate.size(), gate.time(0), gate.dt(), d);
  return d;
}

double CmaProblem::align_spectrum(CVec& eps, PhaseGate& gate, CVec& work) const {
  if (spectrum_amp_.empty()) return 0.0;
  if (problem_.reference != ReferenceSpectrum::kFieldFree) return align_vector_potential(eps, gate);
  work.resize(n_);
  fft_.time_to_freq(eps, work);
  double cw = 0, c = 0, tw = 0, t = 0;
  for (const Segment& seg : measured_)
    for (std::size_t q = 0; q < seg.len; ++q) {
      const double b = static_cast<double>(bin_[seg.j0 + q]);
      const double p = std::norm(work[seg.k0 + q]), s = spectrum_amp_[seg.j0 + q];
      cw += b * p;
      c += p;
      tw += b * s * s;
      t += s * s;
    }
  if (!(c > 0) || !(t > 0)) return 0.0;
  const double dw = problem_.grid.dw();
  const double delta = (tw / t - cw / c) * dw;
  if (std::abs(delta) < 1e-3 * dw) return 0.0;
  // eps(s) exp(-i delta s), G(t) exp(+i delta t).
  rotate_linear(eps.data(), n_, problem_.grid.t0(), problem_.grid.dt(), -delta);
  rotate_linear(gate.table().data(), gate.size(), gate.time(0), gate.dt(), delta);
  return delta;
}

void CmaProblem::constrain(int k, CVec& eps, PhaseGate& gate, CVec& work,
                           std::vector<double>& cover) const {
  const CmaSettings& s = settings_;
  if (s.spectrum != CmaSettings::Spectrum::kOff && s.spectrum_interval > 0 &&
      k % s.spectrum_interval == 0) {
    align_spectrum(eps, gate, work);
    if (s.spectrum == CmaSettings::Spectrum::kAmplitude) impose_spectrum(eps, work);
  }
  impose_support(eps, work);
  if (s.gate_smoothing_interval > 0 && k % s.gate_smoothing_interval == 0) {
    gate.coverage(eps, cover);
    gate.smooth(cover);
  }
}

}  // namespace sw
