#pragma once
// The discretised CMA streaking problem shared by the CMA engines (ptychographic, projections):
// the measured amplitudes on the engine's FFT bins, the one modulus-replacement projection,
// the field-free-spectrum constraint, the initial guesses and the conversion of a final
// (eps, gate) pair into a Reconstruction. Engines differ only in how they update eps and the
// gate from the projected exit waves (STYLE.md: families parameterised, not copied).
//
// Conventions (retrieval/forward_model.h): the XUV envelope eps(s) stays on problem.grid about
// the carrier Omega_c = W_c + Ip, W_c the energy bin nearest the field-free (else the
// delay-averaged) spectral centroid, so energy j sits exactly on the signed FFT bin
// b_j = j - c (map_energy_bins: the energy axis must be uniform with step grid.dw()). The exit
// wave of delay tau_j is psi_j(s) = eps(s) G(s + tau_j) and the model is
//     |a(W_j, tau)|^2 = |Int ds psi(s) exp(i w_j s)|^2 = dt^2 |FFT(psi)_{b_j}|^2.
// "raw" spectra below are unscaled FFTs (sw::Fft::time_to_freq).
//
// Modulus replacement (the projection onto the measured data): on measured bins
//     psi~ <- sqrt(max(I, 0)) / dt * psi~ / |psi~|        (a bin that is exactly 0 stays 0),
// the least-squares projection for errors on sqrt(I) (a Gaussian amplitude noise model; the
// trace error G of engine.h weights every bin equally). With noise_tolerance = k > 0 and
// variances, |psi~| is only clamped into sqrt(I) +- k sigma_sqrt(I) (sigma_sqrt(I) =
// min(sigma_I / (2 sqrt I), sqrt(sigma_I))): a projection onto the noise band instead of onto
// the noisy value; off by default (on our Poisson tests it did not improve the durations).
// On the other bins psi~ <- unmeasured_damping * psi~. Default damping 1 ("free"): the
// spectrometer window says nothing about those energies, and the XUV spectrum there is
// already removed by the spectral constraint; 0 forces them to zero (use it when the window
// is known to contain the whole streaked spectrum and the run shows leakage).
//
// Ambiguities of the blind problem (DESIGN.md) and how they are fixed:
//   global phase      arg eps = 0 at the peak of |eps| (reconstruct());
//   frequency shift   (eps e^{-i d s}, G e^{+i d t}) leaves every |a| unchanged. Without a
//                     truly field-free reference (RetrievalProblem::reference: weakly
//                     streaked edge rows, or the delay average, whose centroid is shifted by
//                     the ponderomotive term), d is fixed by a zero mean of A(t) over the scan
//                     (align_vector_potential()) and impose_spectrum() uses the reference's
//                     shape re-centred on the XUV. With one, align_spectrum()
//                     moves the XUV spectral centroid onto the field-free spectrum's, and
//                     impose_spectrum() then sets |eps~_j| <- c sqrt(field-free spectrum_j),
//                     c^2 = sum |eps~|^2 / sum spectrum (the energy in the window is kept),
//                     phases kept, XUV bins outside the window zeroed (photon energies the
//                     spectrometer cannot see are assumed absent). The amplitude step passes
//                     the reference spectrum's noise on to |E_X| (and to the duration):
//                     spectrum_constraint = centroid keeps only the alignment;
//   common time shift (eps(s - d), G(t - d)): not applied; the gate's time axis is the delay
//                     axis (t = s + tau), the initial gate comes from the streaking centroids
//                     at t = tau, so the XUV lands where the data put it relative to the IR;
//                     retrieve.h's fix_time_origin() later centres the XUV if wanted;
//   time reversal     fixed by the delay axis (the gate is not the time-reversed XUV).
//
// Trace error during an iteration: the running G of the exit waves each delay saw before its
// update (common practice for ePIE-type engines), with the optimal scale of engine.h; the
// Reconstruction reports the exact G of the returned estimate.

#include <string>
#include <utility>
#include <vector>

#include "retrieval/engine.h"
#include "retrieval/gate.h"
#include "retrieval/grid.h"

namespace sw {

/// Settings shared by the CMA engines, read from EngineOptions::extra.
struct CmaSettings {
  /// How the field-free spectrum is used every spectrum_interval iterations: kAmplitude
  /// imposes |eps~| (and aligns the centroid), kCentroid only aligns the centroid (the
  /// frequency-shift ambiguity), kOff ignores it.
  enum class Spectrum { kAmplitude, kCentroid, kOff };
  Spectrum spectrum = Spectrum::kAmplitude;
  int spectrum_interval = 1;  ///< use the field-free spectrum every n iterations (0 = never)
  int gate_smoothing_interval =
      4;  ///< smooth the gate phase every n iterations (0 = at the end only)
  double gate_knots_per_period = 32;  ///< B-spline knots per IR period for the smooth gate phase
  double unmeasured_damping = 1.0;    ///< exit-wave factor on unmeasured FFT bins (1 free, 0 zero)
  double noise_tolerance = 0.0;       ///< half-width of the modulus band in standard deviations
};
/// Descriptions of the CMA settings (names, defaults, limits) for Engine::extra_options().
std::vector<ExtraOption> cma_extra_options();
CmaSettings read_cma_settings(const EngineOptions& options);

/// Running sums of the trace error: sum I M and sum M^2 over the measured bins.
struct ErrorSums {
  double im = 0.0;
  double mm = 0.0;
  void add(const ErrorSums& o) {
    im += o.im;
    mm += o.mm;
  }
};

class CmaProblem {
 public:
  /// Validates the problem (throws sw::Error(kInput) naming `engine` and the field) and keeps
  /// a copy of it.
  CmaProblem(const RetrievalProblem& problem, const CmaSettings& settings, std::string engine);

  const RetrievalProblem& problem() const { return problem_; }
  const CmaSettings& settings() const { return settings_; }
  const TimeGrid& grid() const { return problem_.grid; }
  const Fft& fft() const { return fft_; }
  std::size_t samples() const { return n_; }
  std::size_t num_delays() const { return nd_; }
  std::size_t num_energies() const { return ne_; }
  double carrier_au() const { return carrier_; }
  double central_momentum_au() const { return problem_.central_momentum_au; }
  bool has_spectrum() const { return !spectrum_amp_.empty(); }
  /// Knot step of the smooth gate phase: IR period / gate_knots_per_period, but at least the
  /// median delay step (at most T / 8).
  double knot_step_au() const;

  /// The modulus replacement of delay j on its raw exit-wave spectrum (FFT order, in place);
  /// adds the model-vs-measured sums of the spectrum it saw to `sums`. `scratch` holds
  /// scratch_size() doubles (one buffer per thread; no allocation here).
  void project(std::size_t j, cdouble* spectrum, ErrorSums& sums, double* scratch) const;
  std::size_t scratch_size() const { return 3 * ne_; }
  /// Running trace error G from the sums of one full sweep over the delays.
  double trace_error(const ErrorSums& sums) const;
  /// Spectral constraint on eps (in place; `work` is resized to N once). No-op without spectrum.
  /// With a reference whose centroid is not trusted (kEdgeRows, kDelayAverage), its shape is
  /// first moved (linear interpolation) onto the current XUV centroid.
  void impose_spectrum(CVec& eps, CVec& work) const;
  /// Frequency-shift ambiguity: moves eps~ by delta so that its centroid over the measured
  /// window equals the field-free spectrum's, and multiplies the gate by exp(i delta t), which
  /// leaves every |a(W, tau)| unchanged (psi_j gains only the phase exp(i delta tau_j)).
  /// Returns delta (a.u.); no-op (0) without spectrum. When the reference's centroid is not
  /// trusted (RetrievalProblem::reference != kFieldFree) it calls align_vector_potential().
  double align_spectrum(CVec& eps, PhaseGate& gate, CVec& work) const;
  /// Frequency-shift ambiguity without a field-free reference: the same rotation (of eps and
  /// the gate, in place), with delta chosen so that the Hann-weighted time average of
  /// A(t) = p0 - sqrt(p0^2 - 2 dphi/dt) (gate.h) over
  /// the well-probed gate nodes (coverage >= 30 % of its maximum) is zero. A radiated field has
  /// no DC part, so A averages to zero over a pulse; over a window that truncates it the Hann
  /// taper keeps the leakage of the oscillation below ~1e-3 A0 (common practice for
  /// windowed averages). Returns delta (a.u.).
  double align_vector_potential(CVec& eps, PhaseGate& gate) const;

  /// The constraints both engines apply after iteration k (1-based), at their intervals:
  /// the field-free spectrum (align_spectrum, then impose_spectrum for kAmplitude) and the
  /// smooth-gate projection (PhaseGate::smooth with the current coverage).
  void constrain(int k, CVec& eps, PhaseGate& gate, CVec& work, std::vector<double>& cover) const;
  /// Samples [lo, hi) outside which |eps|^2 < 1e-4 max |eps|^2 (plus a 2-sample margin): the
  /// gate updates are applied there only, elsewhere they are below 1 % of their peak (and
  /// the smooth-gate projection, weighted by the coverage, would discard them anyway).
  static void support(const CVec& eps, std::size_t* lo, std::size_t* hi);

  /// Initial XUV envelope: options.initial_xuv re-expressed about the carrier (it must be on
  /// the problem's grid, else sw::Error(kUsage)), else
  /// sqrt(field-free spectrum) (else sqrt of the delay-averaged spectrum) with flat phase,
  /// centred at s = 0.
  CVec initial_xuv(const EngineOptions& options) const;
  /// Gate table for the problem's delays, initialised from options.initial_ir, else from the
  /// streaking-centroid curve W_c(tau) = W0 - p0 A + A^2/2 = (p0 - A)^2/2 (classical
  /// streaking, p0 ~ the field-free momentum, DESIGN.md),
  /// else flat when the centroid sweep is below two energy bins.
  PhaseGate initial_gate(const EngineOptions& options) const;
  /// What initial_gate() used ("initial_ir", "centroid curve", "flat").
  const std::string& gate_guess() const { return gate_guess_; }

  /// Model trace |a|^2 on the problem's axes for (eps, gate).
  Eigen::MatrixXd model_trace(const CVec& eps, const PhaseGate& gate) const;
  /// Final bookkeeping shared by the CMA engines: smooth gate phase, global phase (arg eps = 0
  /// at its peak, the gate rotated to compensate), A(t) from the gate phase over the delay
  /// range plus the XUV support, model trace, exact G and scale. No time shift is applied
  /// (the delay axis ties the gate's time axis to the IR reference).
  Reconstruction reconstruct(CVec eps, PhaseGate gate) const;
  /// Settings the engines report (grid, carrier, bins, gate table, CMA settings).
  std::vector<std::pair<std::string, std::string>> used_settings() const;

 private:
  struct Segment {
    std::size_t k0 = 0;  // first FFT index
    std::size_t j0 = 0;  // first energy index (measured segments)
    std::size_t len = 0;
  };
  RetrievalProblem problem_;  // a copy: the engine outlives no caller's data
  CmaSettings settings_;
  std::string engine_;
  std::size_t n_ = 0, nd_ = 0, ne_ = 0;
  double carrier_ = 0.0;
  double dt_ = 1.0;
  Fft fft_;
  std::vector<Segment> measured_, unmeasured_;
  std::vector<double> lo_, hi_;       // nd x ne, modulus band (raw units)
  bool band_ = false;                 // lo < hi somewhere (noise_tolerance > 0 with variances)
  std::vector<double> meas_;          // nd x ne, I
  std::vector<double> spectrum_amp_;  // ne, sqrt(max(S_ff,0)) (empty: no spectrum)
  std::vector<long> bin_;             // signed FFT bin of each energy
  double sum_ii_ = 0.0, peak_ = 0.0;
  mutable std::string gate_guess_;
};

}  // namespace sw
