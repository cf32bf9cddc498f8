#include "retrieval/core/grid.h"

#include <mutex>
#include <stdexcept>

#include "retrieval/core/units.h"

namespace sw {

namespace {
std::mutex& planner_mutex() {
  static std::mutex m;
  return m;
}
}  // namespace

TimeGrid::TimeGrid(std::size_t n, double dt_au, double t0_au) : n_(n), dt_(dt_au), t0_(t0_au) {
  if (n < 2 || !(dt_au > 0.0)) throw std::invalid_argument("TimeGrid needs n >= 2 and dt > 0");
}

TimeGrid TimeGrid::centered(std::size_t n, double dt_au) {
  return TimeGrid(n, dt_au, -static_cast<double>(n / 2) * dt_au);
}

TimeGrid TimeGrid::for_energy_step(std::size_t n, double energy_step_au) {
  return centered(n, units::kTwoPi / (static_cast<double>(n) * energy_step_au));
}

double TimeGrid::dw() const { return units::kTwoPi / window(); }

double TimeGrid::omega_fft(std::size_t k) const {
  long kk = static_cast<long>(k);
  if (k >= (n_ + 1) / 2) kk -= static_cast<long>(n_);
  return static_cast<double>(kk) * dw();
}

double TimeGrid::omega_centered(std::size_t j) const {
  return (static_cast<double>(j) - static_cast<double>(n_ / 2)) * dw();
}

std::vector<double> TimeGrid::times() const {
  std::vector<double> t(n_);
  for (std::size_t i = 0; i < n_; ++i) t[i] = time(i);
  return t;
}

struct Fft::Plans {
  fftw_plan backward = nullptr;  // exp(+i...)
  fftw_plan forward = nullptr;   // exp(-i...)
  ~Plans() {
    std::lock_guard<std::mutex> lock(planner_mutex());
    if (backward) fftw_destroy_plan(backward);
    if (forward) fftw_destroy_plan(forward);
  }
};

Fft::Fft(std::size_t n) : n_(n) {
  // One set of plans per size for the whole process.
  static std::mutex cache_mutex;
  static std::vector<std::pair<std::size_t, std::shared_ptr<const Plans>>> cache;
  std::lock_guard<std::mutex> cache_lock(cache_mutex);
  for (auto& [size, p] : cache)
    if (size == n) {
      plans_ = p;
      return;
    }
  auto p = std::make_shared<Plans>();
  {
    std::lock_guard<std::mutex> lock(planner_mutex());
    CVec a(n), b(n);
    auto* in = reinterpret_cast<fftw_complex*>(a.data());
    auto* out = reinterpret_cast<fftw_complex*>(b.data());
    // ESTIMATE: the plan depends only on n, so every process (batch jobs, shards, re-runs)
    // computes bit-identical results; MEASURE picks plans by timing, and iterative engines
    // turned its last-digit differences into different summaries between runs. Cost: one FFT
    // of 1024 points 1.5x slower, one ptychographic iteration 1.26x (docs/performance.md).
    // Execution arrays are CVec (fftw_malloc alignment, as the planning arrays).
    const unsigned flags = FFTW_ESTIMATE;
    p->backward = fftw_plan_dft_1d(static_cast<int>(n), in, out, FFTW_BACKWARD, flags);
    p->forward = fftw_plan_dft_1d(static_cast<int>(n), in, out, FFTW_FORWARD, flags);
  }
  if (!p->backward || !p->forward) throw std::runtime_error("FFTW could not create a plan");
  plans_ = p;
  cache.emplace_back(n, p);
}

void Fft::time_to_freq(const cdouble* in, cdouble* out) const {
  fftw_execute_dft(plans_->backward, reinterpret_cast<fftw_complex*>(const_cast<cdouble*>(in)),
                   reinterpret_cast<fftw_complex*>(out));
}

void Fft::freq_to_time(const cdouble* in, cdouble* out) const {
  fftw_execute_dft(plans_->forward, reinterpret_cast<fftw_complex*>(const_cast<cdouble*>(in)),
                   reinterpret_cast<fftw_complex*>(out));
}

void to_spectrum(const TimeGrid& grid, const Fft& fft, const CVec& field_t, CVec& spectrum_w) {
  spectrum_w.resize(grid.size());
  fft.time_to_freq(field_t, spectrum_w);
  for (std::size_t k = 0; k < grid.size(); ++k)
    spectrum_w[k] *= grid.dt() * std::polar(1.0, grid.omega_fft(k) * grid.t0());
}

void to_time(const TimeGrid& grid, const Fft& fft, const CVec& spectrum_w, CVec& field_t) {
  CVec tmp(grid.size());
  for (std::size_t k = 0; k < grid.size(); ++k)
    tmp[k] = spectrum_w[k] * std::polar(1.0, -grid.omega_fft(k) * grid.t0());
  field_t.resize(grid.size());
  fft.freq_to_time(tmp, field_t);
  const double scale = grid.dw() / units::kTwoPi;
  for (auto& v : field_t) v *= scale;
}

std::size_t fft_to_centered(std::size_t k, std::size_t n) { return (k + n / 2) % n; }
std::size_t centered_to_fft(std::size_t j, std::size_t n) { return (j + n - n / 2) % n; }

std::size_t good_fft_size(std::size_t n) {
  for (std::size_t m = std::max<std::size_t>(n, 2);; ++m) {
    std::size_t r = m;
    for (std::size_t f : {2, 3, 5, 7})
      while (r % f == 0) r /= f;
    if (r == 1) return m;
  }
}

}  // namespace sw
