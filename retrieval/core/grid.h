#pragma once
// FFT-compatible time/frequency grids and reusable FFTW plans.
//
// Fourier convention (DESIGN.md): a field oscillates as E(t) ~ exp(-i Omega t), so
//     E~(w) = Int dt E(t) exp(+i w t),        E(t) = (1/2pi) Int dw E~(w) exp(-i w t).
// On a grid t_n = t0 + n dt (n = 0..N-1) with angular frequencies w_k = k dw, dw = 2pi/(N dt)
// (k in FFT order: 0..N/2-1, -N/2..-1), the discrete pair is
//     E~_k = dt exp(+i w_k t0) sum_n E_n exp(+2pi i k n / N)      (FFTW_BACKWARD sign)
//     E_n  = (dw / 2pi) sum_k E~_k exp(-i w_k t0) exp(-2pi i k n / N)  (FFTW_FORWARD sign).
// Plans are made once per grid size (FFTW_MEASURE), guarded by a global mutex, and executed on
// any FFTW-aligned buffer with the new-array interface, which is thread-safe.

#include <complex>
#include <cstddef>
#include <memory>
#include <vector>

#include <fftw3.h>

namespace sw {

using cdouble = std::complex<double>;

/// Allocator returning FFTW-aligned memory (SIMD alignment required by the new-array execute).
template <class T>
struct FftwAllocator {
  using value_type = T;
  FftwAllocator() = default;
  template <class U>
  FftwAllocator(const FftwAllocator<U>&) {}
  T* allocate(std::size_t n) {
    void* p = fftw_malloc(n * sizeof(T));
    if (!p) throw std::bad_alloc();
    return static_cast<T*>(p);
  }
  void deallocate(T* p, std::size_t) { fftw_free(p); }
  template <class U>
  bool operator==(const FftwAllocator<U>&) const {
    return true;
  }
};

/// Complex vector whose storage FFTW plans may execute on.
using CVec = std::vector<cdouble, FftwAllocator<cdouble>>;

/// Uniform time grid with its FFT-conjugate angular-frequency grid (atomic units).
class TimeGrid {
 public:
  TimeGrid() = default;
  /// N points of step dt_au starting at t0_au.
  TimeGrid(std::size_t n, double dt_au, double t0_au);
  /// N points of step dt_au centred on t = 0 (t0 = -(N/2) dt, so t = 0 is sample N/2).
  static TimeGrid centered(std::size_t n, double dt_au);
  /// Grid whose frequency step equals the given energy step (a.u.): N dt = 2pi / dw.
  static TimeGrid for_energy_step(std::size_t n, double energy_step_au);

  std::size_t size() const { return n_; }
  double dt() const { return dt_; }
  double t0() const { return t0_; }
  double time(std::size_t i) const { return t0_ + static_cast<double>(i) * dt_; }
  double window() const { return static_cast<double>(n_) * dt_; }
  /// Angular-frequency step dw = 2pi/(N dt).
  double dw() const;
  /// Angular frequency of FFT bin k (FFT order).
  double omega_fft(std::size_t k) const;
  /// Angular frequency of centred bin j (ascending order; j = N/2 is w = 0).
  double omega_centered(std::size_t j) const;
  std::vector<double> times() const;

 private:
  std::size_t n_ = 0;
  double dt_ = 0.0;
  double t0_ = 0.0;
};

/// FFT-order index of the signed frequency bin b in (-n, n) of an n-point FFT: b for b >= 0,
/// b + n for b < 0 (bin b has the angular frequency b dw).
inline std::size_t fft_index(long b, std::size_t n) {
  return static_cast<std::size_t>(b < 0 ? b + static_cast<long>(n) : b);
}

/// Reusable 1-D complex FFT of one size. Cheap to copy (plans are shared).
class Fft {
 public:
  explicit Fft(std::size_t n);
  std::size_t size() const { return n_; }
  /// out_k = sum_n in_n exp(+2 pi i k n / N)  (time -> frequency in our convention; unscaled).
  void time_to_freq(const cdouble* in, cdouble* out) const;
  /// out_n = sum_k in_k exp(-2 pi i k n / N)  (frequency -> time; unscaled).
  void freq_to_time(const cdouble* in, cdouble* out) const;
  void time_to_freq(const CVec& in, CVec& out) const { time_to_freq(in.data(), out.data()); }
  void freq_to_time(const CVec& in, CVec& out) const { freq_to_time(in.data(), out.data()); }

 private:
  struct Plans;
  std::size_t n_;
  std::shared_ptr<const Plans> plans_;
};

/// Physical spectrum E~(w_k) (FFT order) of samples E(t_n) on the grid (scaled as above).
void to_spectrum(const TimeGrid& grid, const Fft& fft, const CVec& field_t, CVec& spectrum_w);
/// Inverse of to_spectrum.
void to_time(const TimeGrid& grid, const Fft& fft, const CVec& spectrum_w, CVec& field_t);

/// Index permutations between FFT order and centred (ascending) order.
std::size_t fft_to_centered(std::size_t k, std::size_t n);
std::size_t centered_to_fft(std::size_t j, std::size_t n);

/// Smallest "FFT-friendly" size >= n (products of 2, 3, 5, 7).
std::size_t good_fft_size(std::size_t n);

}  // namespace sw
