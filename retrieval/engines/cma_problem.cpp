#include "retrieval/engines/cma_problem.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <sstream>
#include <stdexcept>

#include <Eigen/Core>

#include "retrieval/core/enum_names.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/hot_loop.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/cma_kernels.h"
#include "retrieval/engines/cma_problem_internal.h"
#include "retrieval/physics/forward_model.h"

namespace sw {

namespace {

constexpr EnumNames<CmaSpectrum, 3> kCmaSpectrumNames{{{{CmaSpectrum::kAmplitude, "amplitude"},
                                                        {CmaSpectrum::kCentroid, "centroid"},
                                                        {CmaSpectrum::kOff, "off"}}}};
constexpr EnumNames<CmaProjection, 2> kCmaProjectionNames{
    {{{CmaProjection::kPoisson, "poisson"}, {CmaProjection::kAmplitude, "amplitude"}}}};

}  // namespace

SW_ENUM_NAME_FUNCTIONS(CmaSpectrum, parse_option, kCmaSpectrumNames)

SW_ENUM_NAME_FUNCTIONS(CmaProjection, parse_option, kCmaProjectionNames)

namespace {

using cma_detail::num;
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
    nb = std::clamp(
        nb, 1, std::min(kMaxMomentumBands, static_cast<int>(std::max<std::size_t>(1, ne_ / 4))));
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
