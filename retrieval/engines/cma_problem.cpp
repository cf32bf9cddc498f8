#include "retrieval/engines/cma_problem.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <sstream>
#include <stdexcept>

#include <Eigen/Core>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/hot_loop.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/cma_kernels.h"
#include "retrieval/physics/forward_model.h"

namespace sw {

const char* to_string(CmaSpectrum s) {
  switch (s) {
    case CmaSpectrum::kCentroid:
      return "centroid";
    case CmaSpectrum::kOff:
      return "off";
    default:
      return "amplitude";
  }
}

bool parse_option(const std::string& s, CmaSpectrum* out) {
  if (s == "amplitude")
    *out = CmaSpectrum::kAmplitude;
  else if (s == "centroid")
    *out = CmaSpectrum::kCentroid;
  else if (s == "off")
    *out = CmaSpectrum::kOff;
  else
    return false;
  return true;
}

const char* to_string(CmaProjection p) {
  return p == CmaProjection::kPoisson ? "poisson" : "amplitude";
}

bool parse_option(const std::string& s, CmaProjection* out) {
  if (s == "poisson")
    *out = CmaProjection::kPoisson;
  else if (s == "amplitude")
    *out = CmaProjection::kAmplitude;
  else
    return false;
  return true;
}

int auto_momentum_bands(double p_lo, double p_hi, double p0) {
  if (!(p0 > 0) || !(p_hi > p_lo)) return 1;
  const int b = static_cast<int>(std::ceil((p_hi - p_lo) / (0.15 * p0) - 1e-9)) + 1;
  return std::clamp(b, 2, 8);
}

namespace {

std::string num(double x) { return format_g(x); }

using cma_kernels::moduli_and_sums;
using cma_kernels::scale_bins;

}  // namespace

CmaProblem::CmaProblem(const RetrievalProblem& p, const CmaSettings& settings, std::string engine)
    : problem_(p),
      settings_(settings),
      engine_(std::move(engine)),
      fft_(std::max<std::size_t>(p.grid.size(), 2)) {
  auto fail = [&](const std::string& m) { throw input_error(engine_ + ": RetrievalProblem." + m); };
  n_ = p.grid.size();
  nd_ = p.delay_au.size();
  ne_ = p.energy_au.size();
  if (n_ < 8) fail("grid has " + std::to_string(n_) + " points: expected at least 8");
  if (nd_ < 3) fail("delay_au has " + std::to_string(nd_) + " delays: expected at least 3");
  if (ne_ < 4) fail("energy_au has " + std::to_string(ne_) + " energies: expected at least 4");
  if (p.intensity.rows() != static_cast<Eigen::Index>(nd_) ||
      p.intensity.cols() != static_cast<Eigen::Index>(ne_))
    fail("intensity is " + std::to_string(p.intensity.rows()) + "x" +
         std::to_string(p.intensity.cols()) +
         ": expected delays x energies = " + std::to_string(nd_) + "x" + std::to_string(ne_));
  if (p.variance.size() != 0 &&
      (p.variance.rows() != p.intensity.rows() || p.variance.cols() != p.intensity.cols()))
    fail("variance must be empty or the size of intensity");
  if (p.weight.size() != 0 &&
      (p.weight.rows() != p.intensity.rows() || p.weight.cols() != p.intensity.cols()))
    fail("weight must be empty or the size of intensity");
  if (ne_ > n_)
    fail("energy_au has " + std::to_string(ne_) + " bins but the XUV grid only " +
         std::to_string(n_) + ": expected grid.size() >= number of energies");
  for (std::size_t i = 0; i < nd_; ++i) {
    if (!std::isfinite(p.delay_au[i])) fail("delay_au[" + std::to_string(i) + "] is not finite");
    if (i > 0 && !(p.delay_au[i] > p.delay_au[i - 1]))
      fail("delay_au is not strictly ascending at index " + std::to_string(i));
  }
  if (!(p.central_momentum_au > 0))
    fail("central_momentum_au = " + num(p.central_momentum_au) + ": must be > 0 for the CMA");
  if (!(p.ir_omega_au > 0))
    fail("ir_omega_au = " + num(p.ir_omega_au) + ": must be > 0 (IR angular frequency)");
  if (!p.intensity.allFinite()) fail("intensity has values that are not finite");
  if (!(p.intensity.maxCoeff() > 0)) fail("intensity has no positive value");
  const double dw = p.grid.dw();
  for (std::size_t j = 1; j < ne_; ++j)
    if (std::abs(p.energy_au[j] - p.energy_au[j - 1] - dw) > 1e-6 * dw)
      fail("energy_au is not uniform with the grid's step dw = " + num(units::au_to_eV(dw)) +
           " eV (at index " + std::to_string(j) + " the step is " +
           num(units::au_to_eV(p.energy_au[j] - p.energy_au[j - 1])) + " eV)");
  if (!p.field_free_spectrum.empty()) {
    if (p.field_free_spectrum.size() != ne_)
      fail("field_free_spectrum has " + std::to_string(p.field_free_spectrum.size()) +
           " values: expected one per energy (" + std::to_string(ne_) + ") or none");
    double sum = 0;
    for (double v : p.field_free_spectrum) {
      if (!std::isfinite(v)) fail("field_free_spectrum has values that are not finite");
      sum += std::max(v, 0.0);
    }
    if (!(sum > 0)) fail("field_free_spectrum has no positive value");
  }
  dt_ = p.grid.dt();

  // Carrier on the energy bin nearest the spectral centroid (field-free, else delay-averaged).
  std::vector<double> spec(ne_, 0.0);
  if (!p.field_free_spectrum.empty())
    for (std::size_t j = 0; j < ne_; ++j) spec[j] = std::max(p.field_free_spectrum[j], 0.0);
  else
    for (std::size_t j = 0; j < ne_; ++j)
      spec[j] = p.intensity.col(static_cast<Eigen::Index>(j)).cwiseMax(0.0).mean();
  double sj = 0, s = 0;
  for (std::size_t j = 0; j < ne_; ++j) {
    sj += static_cast<double>(j) * spec[j];
    s += spec[j];
  }
  const long half = static_cast<long>(n_ / 2);
  long c = s > 0 ? std::lround(sj / s) : static_cast<long>(ne_ / 2);
  c = std::clamp(c, static_cast<long>(ne_) - half, half);
  carrier_ = p.energy_au[static_cast<std::size_t>(c)] + p.ionization_energy_au;
  EnergyBinMap map;
  try {
    map = map_energy_bins(p.grid, carrier_, p.ionization_energy_au, p.energy_au);
  } catch (const std::invalid_argument& e) {
    fail(std::string("energy_au: ") + e.what());
  }
  for (std::size_t j = 0; j < ne_; ++j)
    if (map.frac[j] != 0.0 || std::abs(map.carrier_shift) > 1e-6 * dw)
      fail("energy_au does not fall on the FFT bins of the grid (energy " + std::to_string(j) +
           ")");
  bin_ = map.bin;

  // Measured and unmeasured FFT-index segments.
  std::vector<unsigned char> measured(n_, 0);
  for (std::size_t j = 0; j < ne_; ++j) {
    const std::size_t k = fft_index(bin_[j], n_);
    measured[k] = 1;
    if (!measured_.empty() && measured_.back().k0 + measured_.back().len == k &&
        measured_.back().j0 + measured_.back().len == j)
      ++measured_.back().len;
    else
      measured_.push_back({k, j, 1});
  }
  for (std::size_t k = 0; k < n_; ++k) {
    if (measured[k]) continue;
    if (!unmeasured_.empty() && unmeasured_.back().k0 + unmeasured_.back().len == k)
      ++unmeasured_.back().len;
    else
      unmeasured_.push_back({k, 0, 1});
  }

  // Energy support of the signal (RetrievalProblem::support_*): the FFT bins of photon energy
  // outside [lo + Ip, hi + Ip] -- measured energies outside the band and every unmeasured bin.
  // A support that reaches an end of the window leaves that side open: the signal may go on
  // beyond the window (a harmonic just outside still feeds a sideband inside).
  if (p.support_hi_au > p.support_lo_au) {
    const bool lo_open = p.support_lo_au <= p.energy_au.front() - 0.5 * dw + 1e-6 * dw;
    const bool hi_open = p.support_hi_au >= p.energy_au.back() + 0.5 * dw - 1e-6 * dw;
    for (std::size_t k = 0; k < n_; ++k) {
      const double W = carrier_ + p.grid.omega_fft(k) - p.ionization_energy_au;
      if ((W < p.support_lo_au && !lo_open) || (W > p.support_hi_au && !hi_open))
        outside_support_.push_back(k);
    }
  }

  // Momentum nodes: equally spaced over the signal's momentum range (spec above).
  {
    const double p0 = p.central_momentum_au;
    row_momentum_.resize(ne_);
    for (std::size_t j = 0; j < ne_; ++j)
      row_momentum_[j] = std::sqrt(2.0 * std::max(p.energy_au[j], 0.0));
    std::size_t ja = 0, jb = ne_ - 1;
    if (s > 0) {
      double cum = 0.0;
      bool a_set = false;
      for (std::size_t j = 0; j < ne_; ++j) {
        cum += spec[j];
        if (!a_set && cum >= 0.0005 * s) {
          ja = j;
          a_set = true;
        }
        if (cum <= 0.9995 * s) jb = std::min(j + 1, ne_ - 1);
      }
    }
    const double plo = row_momentum_[ja], phi = std::max(row_momentum_[jb], plo);
    int nb = settings_.momentum_bands;
    if (nb <= 0) nb = auto_momentum_bands(plo, phi, p0);
    nb = std::clamp(nb, 1, static_cast<int>(std::max<std::size_t>(1, ne_ / 4)));
    bands_.clear();
    if (nb == 1 || !(phi > plo)) {
      bands_.push_back({p0, 1.0});
    } else {
      node_step_ = (phi - plo) / (nb - 1);
      for (int b = 0; b < nb; ++b) bands_.push_back({plo + node_step_ * b, 0.0});
      // Each node's share of the signal: the spectrum weighted by its interpolation weight.
      for (std::size_t j = 0; j < ne_; ++j) {
        double u;
        const std::size_t n = node_of(row_momentum_[j], &u);
        bands_[n].weight += (1.0 - u) * spec[j] / s;
        bands_[n + 1].weight += u * spec[j] / s;
      }
    }
  }

  lo_.resize(nd_ * ne_);
  hi_.resize(nd_ * ne_);
  meas_.resize(nd_ * ne_);
  const bool with_noise = settings_.noise_tolerance > 0 && p.variance.size() != 0;
  band_ = with_noise;
  poisson_ = settings_.projection == CmaProjection::kPoisson && !band_;
  // Elements of weight 0 are not data (RetrievalProblem::weight): the projection keeps the
  // model there (frozen_*) and the running G leaves them out; any weight > 0 counts as data.
  const bool weighted = p.weight.size() != 0;
  peak_ = -std::numeric_limits<double>::infinity();
  sum_ii_ = 0.0;
  count_ = 0.0;
  frozen_start_.assign(nd_ + 1, 0);
  frozen_k_.clear();
  frozen_j_.clear();
  for (std::size_t i = 0; i < nd_; ++i) {
    frozen_start_[i] = frozen_k_.size();
    for (std::size_t j = 0; j < ne_; ++j) {
      const auto ii = static_cast<Eigen::Index>(i), jj = static_cast<Eigen::Index>(j);
      if (weighted && !(p.weight(ii, jj) > 0)) {
        frozen_k_.push_back(fft_index(bin_[j], n_));
        frozen_j_.push_back(j);
        continue;
      }
      peak_ = std::max(peak_, p.intensity(ii, jj));
      sum_ii_ += p.intensity(ii, jj) * p.intensity(ii, jj);
      count_ += 1.0;
    }
  }
  frozen_start_[nd_] = frozen_k_.size();
  if (!(peak_ > 0)) fail("intensity has no positive value of weight > 0");
  for (std::size_t i = 0; i < nd_; ++i)
    for (std::size_t j = 0; j < ne_; ++j) {
      const double I = p.intensity(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j));
      meas_[i * ne_ + j] = I;
      const double a = std::sqrt(std::max(I, 0.0));
      double sa = 0.0;
      if (with_noise) {
        const double sI = std::sqrt(
            std::max(p.variance(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)), 0.0));
        sa = settings_.noise_tolerance * std::min(a > 0 ? sI / (2.0 * a) : sI, std::sqrt(sI));
      }
      lo_[i * ne_ + j] = std::max(a - sa, 0.0) / dt_;
      hi_[i * ne_ + j] = (a + sa) / dt_;
    }
  if (!p.field_free_spectrum.empty()) {
    spectrum_amp_.resize(ne_);
    for (std::size_t j = 0; j < ne_; ++j) spectrum_amp_[j] = std::sqrt(spec[j]);
  }
}

double CmaProblem::knot_step_au() const {
  // The gate is probed at t = s + tau_j only within the XUV's support around each delay, so
  // knots finer than the delay step let its phase wander between delays (and bias the peak of
  // A(t) upwards). The knot step is therefore at least the median delay step, up to T / 8.
  const double T = units::period_au(problem_.ir_omega_au);
  std::vector<double> steps;
  for (std::size_t i = 1; i < problem_.delay_au.size(); ++i)
    steps.push_back(problem_.delay_au[i] - problem_.delay_au[i - 1]);
  double median = 0.0;
  if (!steps.empty()) {
    std::nth_element(steps.begin(), steps.begin() + static_cast<long>(steps.size() / 2),
                     steps.end());
    median = steps[steps.size() / 2];
  }
  return std::max(T / settings_.gate_knots_per_period, std::min(median, T / 8.0));
}

void CmaProblem::project(std::size_t j, cdouble* spectrum, ErrorSums& sums, double* scratch) const {
  double* S = reinterpret_cast<double*>(spectrum);
  const double* lo = lo_.data() + j * ne_;
  const double* hi = hi_.data() + j * ne_;
  const double* I = meas_.data() + j * ne_;
  const double dt2 = dt_ * dt_;
  const bool band = band_;
  double im = 0.0, mm = 0.0;
  // Weight-0 bins of this row: remember the model, restore it after the projection.
  const std::size_t f0 = frozen_start_[j], f1 = frozen_start_[j + 1];
  double* saved = scratch + 3 * ne_;
  for (std::size_t f = f0; f < f1; ++f) {
    saved[2 * (f - f0)] = S[2 * frozen_k_[f]];
    saved[2 * (f - f0) + 1] = S[2 * frozen_k_[f] + 1];
  }
  using Arr = Eigen::Map<Eigen::ArrayXd>;
  using CArr = Eigen::Map<const Eigen::ArrayXd>;
  for (const Segment& seg : measured_) {
    double* sp = S + 2 * seg.k0;
    const std::size_t len = seg.len;
    const double* ii = I + seg.j0;
    double* r2 = scratch;
    double* z = scratch + len;
    if (!band) {
      if (poisson_)
        cma_kernels::project_poisson(sp, ii, lo + seg.j0, len, dt2, &im, &mm);
      else
        cma_kernels::project_amplitude(sp, ii, lo + seg.j0, len, dt2, &im, &mm);
      continue;
    }
    // Band mode: |psi~| clamped into [lo, hi] (Eigen vectorises sqrt, min and max).
    moduli_and_sums(sp, ii, r2, len, dt2, &im, &mm);
    Arr R(r2, static_cast<Eigen::Index>(len));
    const CArr L(lo + seg.j0, static_cast<Eigen::Index>(len));
    const CArr H(hi + seg.j0, static_cast<Eigen::Index>(len));
    Arr r(z, static_cast<Eigen::Index>(len));
    r = R.sqrt();
    R = r.max(L).min(H) / r.max(1e-300);
    scale_bins(sp, r2, len);
  }
  for (std::size_t f = f0; f < f1; ++f) {
    const double re = saved[2 * (f - f0)], iv = saved[2 * (f - f0) + 1];
    const double M = dt2 * (re * re + iv * iv);
    im -= I[frozen_j_[f]] * M;  // the sums above included the bin: take it out again
    mm -= M * M;
    S[2 * frozen_k_[f]] = re;
    S[2 * frozen_k_[f] + 1] = iv;
  }
  const double damp = settings_.unmeasured_damping;
  if (damp != 1.0)
    for (const Segment& seg : unmeasured_) {
      double* sp = S + 2 * seg.k0;
#pragma omp simd
      for (std::size_t q = 0; q < 2 * seg.len; ++q) sp[q] *= damp;
    }
  sums.im += im;
  sums.mm += mm;
}

double CmaProblem::trace_error(const ErrorSums& s) const {
  const double r = s.mm > 0 ? sum_ii_ - s.im * s.im / s.mm : sum_ii_;
  return std::sqrt(std::max(r, 0.0) / (count_ * peak_ * peak_));
}

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

namespace {

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

}  // namespace

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
  std::vector<double> rate(m), w(m);
  for (std::size_t i = 0; i < m; ++i) {
    rate[i] = std::arg(G[lo + i + 1] * std::conj(G[lo + i])) / gate.dt();
    const double x = (static_cast<double>(i) + 0.5) / static_cast<double>(m);
    w[i] = std::sin(units::kPi * x) * std::sin(units::kPi * x);
  }
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

// Last gate node whose coverage reaches 30 % of the maximum (where reconstruct() ends A(t)).
std::size_t last_probed_node(const std::vector<double>& cover) {
  double cmax = 0;
  for (double c : cover) cmax = std::max(cmax, c);
  std::size_t hi = cover.empty() ? 0 : cover.size() - 1;
  while (hi > 0 && cover[hi] < 0.3 * cmax) --hi;
  return hi;
}

}  // namespace

std::size_t CmaProblem::node_of(double p, double* u) const {
  const std::size_t nb = bands_.size();
  // Linear extrapolation up to half a node step beyond the end nodes, then constant.
  const double x =
      std::clamp((p - bands_.front().p_au) / node_step_, -0.5, static_cast<double>(nb - 1) + 0.5);
  const std::size_t n = x < 0 ? 0 : std::min(static_cast<std::size_t>(x), nb - 2);
  *u = x - static_cast<double>(n);
  return n;
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
  for (std::size_t b = 0; b < gates.size(); ++b) {
    const SmoothPhase ph = gates[b].fit_phase(cover);
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
    for (std::size_t j = 0; j < ne_; ++j) {
      double w;
      state.node[i * ne_ + j] = static_cast<std::uint8_t>(node_of(row_momentum_[j] + a, &w));
      state.frac[i * ne_ + j] = w;
    }
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
  const std::uint8_t* node = state.node.data() + j * ne_;
  const double* frac = state.frac.data() + j * ne_;
  const cdouble* tw = state.twist.data() + j * spectra.size();
  for (const Segment& seg : measured_)
    for (std::size_t q = 0; q < seg.len; ++q) {
      const std::size_t r = seg.j0 + q, k = seg.k0 + q, n = node[r];
      const double u = frac[r];
      combined[k] = (1.0 - u) * tw[n] * spectra[n][k] + u * tw[n + 1] * spectra[n + 1][k];
      before[k] = combined[k];
    }
  project(j, combined.data(), sums, scratch);  // unmeasured bins are 0 and stay 0
  // The gradient of the combined model: each node's spectrum moves by its weight times the
  // change of the row (the two weights sum to 1, so the row moves by the whole change when
  // both nodes' exit waves are updated).
  for (const Segment& seg : measured_)
    for (std::size_t q = 0; q < seg.len; ++q) {
      const std::size_t r = seg.j0 + q, k = seg.k0 + q, n = node[r];
      const double u = frac[r];
      const cdouble d = combined[k] - before[k];
      spectra[n][k] += (1.0 - u) * std::conj(tw[n]) * d;
      spectra[n + 1][k] += u * std::conj(tw[n + 1]) * d;
    }
  const double damp = settings_.unmeasured_damping;
  if (damp != 1.0)
    for (CVec& sp : spectra)
      for (const Segment& seg : unmeasured_)
        for (std::size_t q = 0; q < seg.len; ++q) sp[seg.k0 + q] *= damp;
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

void CmaProblem::support(const CVec& eps, std::size_t* lo, std::size_t* hi) {
  const std::size_t n = eps.size();
  double m = 0.0;
  for (const cdouble& e : eps) m = std::max(m, std::norm(e));
  std::size_t a = 0, b = n;
  while (a < n && std::norm(eps[a]) < 1e-4 * m) ++a;
  while (b > a && std::norm(eps[b - 1]) < 1e-4 * m) --b;
  *lo = a >= 2 ? a - 2 : 0;
  *hi = std::min(n, b + 2);
  if (*lo >= *hi) {
    *lo = 0;
    *hi = n;
  }
}

CVec CmaProblem::initial_xuv(const EngineOptions& o) const {
  const TimeGrid& g = problem_.grid;
  if (o.initial_xuv) {
    const TimeGrid& h = o.initial_xuv->grid();
    if (h.size() != n_ || std::abs(h.dt() - g.dt()) > 1e-9 * g.dt() ||
        std::abs(h.t0() - g.t0()) > 1e-6 * g.dt())
      throw usage_error(engine_ + ": EngineOptions.initial_xuv is on a grid of " +
                        std::to_string(h.size()) + " points, step " + num(h.dt()) +
                        " a.u., start " + num(h.t0()) + " a.u.: expected the problem's grid (" +
                        std::to_string(n_) + ", " + num(g.dt()) + ", " + num(g.t0()) + ")");
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

Eigen::MatrixXd CmaProblem::model_trace(const CVec& eps, const PhaseGate& gate) const {
  Eigen::MatrixXd M(nd_, ne_);
  CVec g(n_), psi(n_), raw(n_);
  const double dt2 = dt_ * dt_;
  for (std::size_t i = 0; i < nd_; ++i) {
    gate.sample(i, g.data());
    for (std::size_t n = 0; n < n_; ++n) psi[n] = eps[n] * g[n];
    fft_.time_to_freq(psi, raw);
    for (std::size_t j = 0; j < ne_; ++j)
      M(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) =
          dt2 * std::norm(raw[fft_index(bin_[j], n_)]);
  }
  return M;
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

Reconstruction CmaProblem::reconstruct(CVec eps, PhaseGate gate) const {
  std::vector<double> cover;
  gate.coverage(eps, cover);
  SmoothPhase phase = gate.smooth(cover);
  // Global phase: arg eps = 0 at the peak of |eps|; the gate takes the opposite phase.
  std::size_t peak = 0;
  for (std::size_t n = 1; n < n_; ++n)
    if (std::norm(eps[n]) > std::norm(eps[peak])) peak = n;
  const double a = std::arg(eps[peak]);
  const cdouble r = std::polar(1.0, -a);
  for (auto& e : eps) e *= r;
  gate.rotate(a);
  for (auto& c : phase.coef) c += a;

  Reconstruction rec;
  rec.engine = engine_;
  rec.model = "cma";
  rec.retrieved = model_trace(eps, gate);
  rec.trace_error =
      sw::trace_error(problem_.intensity, rec.retrieved, &rec.scale, &problem_.weight);
  rec.xuv = XuvField(problem_.grid, carrier_, std::move(eps));
  // A(t) where the data constrain the gate well: from the first to the last node whose
  // coverage reaches 30 % of its maximum (beyond the delay range only the XUV's tails probe
  // the gate and its phase rate is noise).
  double cmax = 0;
  for (double c : cover) cmax = std::max(cmax, c);
  std::size_t lo = 0, hi = cover.size() - 1;
  while (lo < hi && cover[lo] < 0.3 * cmax) ++lo;
  while (hi > lo && cover[hi] < 0.3 * cmax) --hi;
  const double p0 = problem_.central_momentum_au;
  const double dt_ir =
      std::min(0.5 * gate.knot_step(), units::period_au(problem_.ir_omega_au) / 64.0);
  rec.ir = ir_from_gate_phase(phase, p0, gate.time(lo), gate.time(hi), dt_ir);
  rec.settings = used_settings();
  rec.noise_model = poisson_ ? "poisson" : "gaussian";
  rec.settings.emplace_back("gate_table_nodes", std::to_string(gate.size()));
  rec.settings.emplace_back("gate_exact_shifts", gate.exact_shifts() ? "yes" : "no");
  return rec;
}

std::vector<std::pair<std::string, std::string>> CmaProblem::used_settings() const {
  std::vector<std::pair<std::string, std::string>> s;
  const TimeGrid& g = problem_.grid;
  s.emplace_back("forward_model", "cma (unit-modulus gate, dipole taken constant)");
  s.emplace_back("grid", std::to_string(n_) + " points x " + num(units::au_to_as(g.dt())) + " as");
  s.emplace_back("carrier_eV", num(units::au_to_eV(carrier_)));
  s.emplace_back("central_momentum_au", num(problem_.central_momentum_au));
  s.emplace_back("energy_bins", std::to_string(ne_) + " (signed FFT bins " +
                                    std::to_string(bin_.front()) + ".." +
                                    std::to_string(bin_.back()) + ")");
  s.emplace_back("delays", std::to_string(nd_));
  s.emplace_back("gate_guess", gate_guess_.empty() ? "-" : gate_guess_);
  s.emplace_back("gate_knot_step_as", num(units::au_to_as(std::max(knot_step_au(), g.dt()))));
  const char* sc[] = {"amplitude", "centroid", "off"};
  s.emplace_back("spectrum_constraint",
                 spectrum_amp_.empty() || settings_.spectrum_interval == 0
                     ? std::string("off (no field-free spectrum)")
                     : std::string(sc[static_cast<int>(settings_.spectrum)]) + " every " +
                           std::to_string(settings_.spectrum_interval) + " iterations");
  s.emplace_back("projection",
                 band_      ? "noise band (noise_tolerance > 0)"
                 : poisson_ ? "poisson: |psi| <- (|psi| + I / |psi|) / 2 (unbiased in intensity)"
                            : "amplitude: |psi| <- sqrt(I) (least squares on sqrt(I))");
  s.emplace_back("noise_tolerance", num(settings_.noise_tolerance) +
                                        (problem_.variance.size() ? "" : " (no variance: exact)"));
  s.emplace_back("gate_smoothing_interval", std::to_string(settings_.gate_smoothing_interval));
  s.emplace_back("unmeasured_damping", num(settings_.unmeasured_damping));
  std::string mb = std::to_string(bands_.size());
  if (bands_.size() > 1) {
    mb += " momentum nodes, linear interpolation between them (p_b a.u. / signal share:";
    for (const MomentumBand& b : bands_)
      mb += " " + num(std::round(b.p_au * 1000.0) / 1000.0) + "/" +
            num(std::round(b.weight * 1000.0) / 1000.0);
    mb += ")";
  } else {
    mb += " (one central momentum)";
  }
  s.emplace_back("momentum_bands", mb);
  return s;
}

}  // namespace sw
