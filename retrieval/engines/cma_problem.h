#pragma once
// The discretised CMA streaking problem shared by the CMA engines (ptychographic, projections):
// the measured amplitudes on the engine's FFT bins, the one modulus-replacement projection,
// the field-free-spectrum constraint, the initial guesses and the conversion of a final
// (eps, gate) pair into a Reconstruction. Engines differ only in how they update eps and the
// gate from the projected exit waves (STYLE.md: families parameterised, not copied).
//
// Conventions (retrieval/physics/forward_model.h): the XUV envelope eps(s) stays on problem.grid
// about the carrier Omega_c = W_c + Ip, W_c the energy bin nearest the field-free (else the
// delay-averaged) spectral centroid, so energy j sits exactly on the signed FFT bin
// b_j = j - c (map_energy_bins: the energy axis must be uniform with step grid.dw()). The exit
// wave of delay tau_j is psi_j(s) = eps(s) G(s + tau_j) and the model is
//     |a(W_j, tau)|^2 = |Int ds psi(s) exp(i w_j s)|^2 = dt^2 |FFT(psi)_{b_j}|^2.
// "raw" spectra below are unscaled FFTs (sw::Fft::time_to_freq).
//
// The projection onto the measured data, on measured bins, one of:
//   poisson (ptychographic's default): |psi~| <- (|psi~| + a^2 / |psi~|) / 2, a = sqrt(max(I, 0)) /
//   dt (capped
//     at 2 a + |psi~| / 2): one Newton step towards a, i.e. psi~ moves along the gradient
//     (I / |psi~|^2 - 1) psi~ of the Poisson log-likelihood (Thibault and Guizar-Sicairos,
//     New J. Phys. 14, 063004 (2012); Godard et al., Opt. Express 20, 25914 (2012)). The step
//     is linear in I, so the fixed point over many noisy bins is |psi~|^2 = E[I]: unbiased in
//     intensity. The amplitude projection's fixed point is |psi~| = E[sqrt(I)], which for
//     Poisson counts N of mean lambda is biased low by ~1/(8 lambda) in intensity (40 % at one
//     count): weak harmonics of a RABBITT scan at 2000 peak counts came out 10-40 % too weak
//     and A0 5 % too high with it (docs/validation.md);
//   amplitude (projections' default): modulus replacement psi~ <- a psi~ / |psi~| (a bin that
//     is exactly 0 stays 0), the least-squares projection for errors on sqrt(I) (a Gaussian
//     amplitude noise model); also the more robust one when a pedestal was left in the data
//     (nothing selects it automatically: the engine's "projection" setting picks one of the
//     two, CmaSettings below).
// The trace error G of trace_error.h weights every bin equally either way. With
// noise_tolerance = k > 0 and variances, |psi~| is only clamped into sqrt(I) +- k sigma_sqrt(I)
// (sigma_sqrt(I) = min(sigma_I / (2 sqrt I), sqrt(sigma_I))): a projection onto the noise band
// instead of onto the noisy value; off by default (on our Poisson tests it did not improve the
// durations).
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
// update (common practice for ePIE-type engines), with the optimal scale of trace_error.h; the
// Reconstruction reports the exact G of the returned estimate.

#include <algorithm>
#include <complex>
#include <cstdint>
#include <string>
#include <utility>
#include <vector>

#include "retrieval/core/grid.h"
#include "retrieval/engines/cma_settings.h"
#include "retrieval/engines/engine.h"
#include "retrieval/physics/gate.h"

namespace sw {

/// One momentum node of the banded CMA: a gate with its own central momentum.
///
/// The CMA's phase error for an electron of momentum p in a gate built for p0 is
/// (p - p0) I1(t), |I1| <= A0 / omega: over a broad band (a RABBITT comb spans p = 0.4-1.6 a.u.)
/// one p0 couples every energy to the IR with the wrong strength -- a sideband's strength
/// relative to its harmonics scales with (p A0 / omega)^2 -- and the fit trades the harmonic
/// amplitudes against the wrong coupling. The banded CMA places B nodes p_b at equal spacing
/// h over the signal's momentum range; node b has the gate exp(i phi_b) of one common A(t)
/// with central momentum p_b, and the amplitude of a row of momentum p between nodes n and
/// n + 1 is the linear interpolation in p of the two nodes' amplitudes,
///     a(p) = (1 - u) FFT(eps G_n) + u FFT(eps G_{n+1}),   u = (p - p_n) / h,
/// (extrapolated linearly up to h/2 beyond the end nodes, constant further out). The amplitude's
/// dependence on p is exp(-i p I1), so the interpolation error is ~ (h I1)^2 / 8 instead of the
/// one-p0 CMA's (p - p0) I1, at B FFT pairs per delay instead of one. (The exact limit is the full
/// model of full_model_engine.h, which interpolates on Chebyshev nodes per energy block.)
struct MomentumBand {
  double p_au = 0.0;    ///< the node's central momentum (a.u.)
  double weight = 0.0;  ///< share of the delay-averaged signal interpolated from the node
};
/// B for momentum_bands = 0, from the signal's momentum range [p_lo, p_hi] (the 0.05 % and
/// 99.95 % points of the delay-averaged spectrum): the smallest number of equally spaced
/// nodes whose spacing is at most 15 % of p0, 2 to 8 (common practice: the
/// interpolation error (h dI1)^2 / 8, dI1 the change of I1 over the XUV's duration, is then
/// below 0.01 rad on every scan of docs/validation.md, and the cost grows with B).
int auto_momentum_bands(double p_lo_au, double p_hi_au, double p0_au);

/// The nodes' current interpolation layout, owned by the engine and updated with the gates.
///
/// Two frames. The measured rows are final momenta p_f, for which the Volkov phase rate is
/// exactly p_f A + A^2/2 (DESIGN.md's phi_V) whenever the electron is born: in the
/// final-momentum frame node b's gate has rate p_b A + A^2/2 and a row is interpolated at
/// its own p_f. The one-p0 gate instead uses the delay-adapted p0 A - A^2/2 (gate.h), exact
/// for the electrons that leave p0 at the XUV's arrival tau; in the initial-momentum frame
/// node b's gate has rate p_b A - A^2/2 and a row is interpolated at its initial momentum
/// p_f + A(tau), so the layout follows the streaking. The first suits a train (bursts every
/// half cycle see A of both signs, where the delay adaptation is off by 2 A^2 in the rate),
/// the second a strongly streaked isolated pulse. band_gates() picks the final frame when
/// the streaking shift max |A| is below half the node spacing (common practice: the rows'
/// interpolation weights then hardly depend on the delay).
struct BandState {
  std::vector<std::uint8_t> node;  ///< delays x energies: lower node of each row
  std::vector<double> frac;        ///< delays x energies: interpolation weight u of node + 1
  /// delays x nodes: exp(-i p_b J1(tau_i)), J1(t) = Int_{t_end}^t A (t_end the last
  /// well-probed gate node, where every node gate has one phase), the node gate's
  /// p-dependent phase at the XUV's arrival, removed before rows are interpolated.
  std::vector<std::complex<double>> twist;
  bool final_momentum = false;      ///< frame (see above)
  double streaking_shift_au = 0.0;  ///< max |A| (a.u.) the frame was chosen from
};

/// One further photoelectron line of the mixed-state CMA (RetrievalProblem::extra_lines): an
/// incoherent mode of the exit wave (P. Thibault and A. Menzel, Nature 494, 68 (2013)).
///
/// Line k's electrons at kinetic energy W come from photon energy W + Ip_k, i.e. from the
/// envelope frequency w_j + D_k with D_k = Ip_k - Ip_ref (w_j the reference line's offset of
/// energy j from the carrier). Its amplitude on the reference's FFT bins is therefore the FFT of
///     psi_k(s) = sqrt(s_k) eps(s) exp(i D_k s) G_k(s + tau + t_k),
/// s_k its strength |d_k|^2 / |d_ref|^2, t_k its relative photoemission delay (+ = emitted
/// later: the line's envelope sqrt(s_k) eps(s - t_k), a linear spectral phase exp(i w t_k) of
/// its dipole, full_model_engine.h "Several photoelectron lines"; substituting s -> s + t_k
/// leaves a unit-modulus factor per bin, so the line sees the gate at tau + t_k), and G_k the
/// CMA gate of the one shared A(t) at the line's own central momentum
/// p_k = sqrt(p0^2 - 2 D_k). The counts of the lines add incoherently (project_modes()).
struct LineMode {
  std::string name;
  double offset_au = 0.0;  ///< D_k = Ip_k - Ip_ref (a.u.)
  double p0_au = 0.0;      ///< the line's central momentum (a.u.)
  CVec modulation;         ///< exp(i D_k s_n) on the XUV grid
};

/// The problem the mixed-state CMA works on: `problem` with the XUV support (and the reference
/// spectrum, zeroed outside it) cut at the fraction `reach` of the way from the reference
/// line's kinetic energy W0 = p0^2 / 2 to each other line's W0 - D_k. The same photon energy
/// gives electrons D_k apart in the two lines, so an XUV band that reaches the other line lets
/// the reference mode explain that line's counts (and those counts would move the spectral
/// centroid the field-free constraint aligns on). Unchanged without extra lines.
RetrievalProblem joint_lines_view(const RetrievalProblem& problem, double reach);

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
  /// The modulus replacement of delay j for the banded CMA: spectra[b] is node b's raw
  /// exit-wave spectrum; the rows are combined as in MomentumBand, projected, and each node's
  /// spectrum moves by its interpolation weight times the change of the row (the gradient
  /// of the combined model). `combined` and `before` are work buffers (resized to N).
  void project_bands(std::size_t j, std::vector<CVec>& spectra, const BandState& state,
                     ErrorSums& sums, double* scratch, CVec& combined, CVec& before) const;
  /// The momentum nodes (one node at central_momentum_au unless CmaSettings::momentum_bands
  /// asks for more).
  const std::vector<MomentumBand>& bands() const { return bands_; }
  /// 3 ne work values plus 2 ne for the weight-0 bins of a row (kept as modelled).
  std::size_t scratch_size() const { return 5 * ne_; }
  /// The mixed-state projection of delay j (modes: the reference line's raw exit-wave spectrum
  /// spectra[0], then one per LineMode, spectra[0..count)): the model is the incoherent sum
  /// M = dt^2 sum_k |psi~_k|^2, and every mode is scaled by the one factor per bin that
  /// project() would apply to a single spectrum of modulus sqrt(sum_k |psi~_k|^2) (amplitude:
  /// psi~_k <- psi~_k sqrt(I / sum_j |psi~_j|^2); poisson: the same Newton step on M; noise band:
  /// the clamp), which keeps each mode's share of the bin. Weight-0 bins keep the model;
  /// unmeasured bins are damped as in project(). `scratch` holds scratch_size() doubles.
  void project_modes(std::size_t j, std::vector<CVec>& spectra, std::size_t count, ErrorSums& sums,
                     double* scratch) const;
  /// The problem's extra lines as modes (empty without them); throws sw::Error(kInput) naming
  /// the line when its central momentum sqrt(p0^2 - 2 D_k) is not real or its band does not fit
  /// the grid's FFT range.
  std::vector<LineMode> line_modes() const;
  /// The gate of a line at delays tau_j + delay_au, central momentum p_au, carrying the vector
  /// potential A of the reference gate `reference` (delay-adapted frame, gate.h); A is taken on
  /// the reference's nodes and interpolated linearly onto the line's.
  PhaseGate line_gate(const std::vector<double>& A, const PhaseGate& reference, double p_au,
                      double delay_au) const;
  /// The shared A(t) of the mixed-state CMA on the reference gate's nodes: each gate's fitted
  /// smooth phase (weights: its own coverage) turned into A at its central momentum
  /// (gates[0]: p0, gates[1 + k]: modes[k].p0_au) and averaged with the weights 1 and
  /// strength[k]; the reference gate is reset to exp(i phi) of that A (its phase kept at the
  /// last well-probed node). Returns A.
  std::vector<double> reconcile_line_gates(const CVec& eps, std::vector<PhaseGate>& gates,
                                           const std::vector<LineMode>& modes,
                                           const std::vector<double>& strength,
                                           std::vector<double>& cover) const;
  /// Line l's delay by a least-squares profile: for trial delays t - h, t, t + h the residual
  /// sum over the data bins (weight > 0) of (I - M_other - s M_l(t))^2, M_l(t) the line's model
  /// trace at unit strength from its gate of `A` (line_gate) at delay t, s >= 0 its
  /// least-squares strength at that delay, M_other the model of every other mode; returns the
  /// vertex of the parabola through the three residuals, within t +- max_step_au (t +- h
  /// downhill when the parabola opens downwards).
  double line_delay_step(const CVec& eps, const std::vector<double>& A, const PhaseGate& reference,
                         const LineMode& mode, const Eigen::MatrixXd& other, double delay_au,
                         double h_au, double max_step_au) const;
  /// The model trace of one line mode (amplitude a, gate `gate`) on the problem's axes.
  Eigen::MatrixXd mode_trace(const CVec& eps, const PhaseGate& gate, const LineMode* mode,
                             double amplitude) const;
  /// Per line: the model trace of the line alone (|a_k|^2, its strength included), on the
  /// problem's axes; [0] is the reference line.
  std::vector<Eigen::MatrixXd> line_model_traces(const CVec& eps,
                                                 const std::vector<PhaseGate>& gates,
                                                 const std::vector<LineMode>& modes,
                                                 const std::vector<double>& amplitude) const;
  /// Reconstruction of the mixed-state CMA: the single-gate bookkeeping of reconstruct() on the
  /// reference gate, the model trace the incoherent sum of the lines, and per line (index l of
  /// problem().extra_lines) the settings joint_line.<l>.delay_as, .strength (s_l) and
  /// .counts_ratio (its modelled counts p-weighted over the reference's), as the full model
  /// reports them (retrieval/analysis/multi_line_fit.h reads them).
  Reconstruction reconstruct_lines(CVec eps, std::vector<PhaseGate> gates,
                                   const std::vector<LineMode>& modes,
                                   const std::vector<double>& amplitude,
                                   const std::vector<double>& delay_au) const;
  /// Running trace error G from the sums of one full sweep over the delays.
  double trace_error(const ErrorSums& sums) const;
  /// Spectral constraint on eps (in place; `work` is resized to N once). No-op without spectrum.
  /// With a reference whose centroid is not trusted (kEdgeRows, kDelayAverage), its shape is
  /// first moved (linear interpolation) onto the current XUV centroid.
  void impose_spectrum(CVec& eps, CVec& work) const;
  /// Energy-support constraint: zeroes eps~ at photon energies outside
  /// [support_lo_au + Ip, support_hi_au + Ip] (RetrievalProblem), including every FFT bin
  /// outside the measured window; no-op when the problem has no support. Applied by
  /// constrain() after every iteration.
  void impose_support(CVec& eps, CVec& work) const;
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
  double align_vector_potential(CVec& eps, PhaseGate& gate) const {
    return align_vector_potential(eps, gate, problem_.central_momentum_au);
  }
  /// The same for a gate built for central momentum p_au.
  double align_vector_potential(CVec& eps, PhaseGate& gate, double p_au) const;

  /// The constraints both engines apply after iteration k (1-based), at their intervals:
  /// the field-free spectrum (align_spectrum, then impose_spectrum for kAmplitude) and the
  /// smooth-gate projection (PhaseGate::smooth with the current coverage).
  void constrain(int k, CVec& eps, PhaseGate& gate, CVec& work, std::vector<double>& cover) const;
  /// The same for one gate per momentum band (gates[b] for bands()[b]): the spectral
  /// alignment is computed on the band of largest weight and its rotation applied to every
  /// gate; then reconcile_gates() every iteration (it is also the smooth-gate projection).
  void constrain(int k, CVec& eps, std::vector<PhaseGate>& gates, CVec& work,
                 std::vector<double>& cover, BandState& state) const;
  /// Ties the node gates to one vector potential: each gate's phase is fitted as in
  /// PhaseGate::smooth, converted to A_b(t) by the inverse of its frame's rate (BandState),
  /// the A_b averaged with the nodes' signal shares, and every gate reset to exp(i phi_b) of
  /// that common A (phase integrated node by node from the last well-probed node, where all
  /// nodes share one phase); the layout of `state` follows the new A. One gate: smooth().
  void reconcile_gates(const CVec& eps, std::vector<PhaseGate>& gates, std::vector<double>& cover,
                       BandState& state) const;
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
  /// One gate per momentum band carrying the vector potential of a one-p0 gate (its smooth
  /// phase fitted with the coverage of eps, A = p0 - sqrt(p0^2 - 2 phi')).
  /// Also chooses the bands' frame (BandState) from that A and fills state.
  std::vector<PhaseGate> band_gates(const CVec& eps, const PhaseGate& gate, BandState& state) const;
  /// What initial_gate() used ("initial_ir", "centroid curve", "flat").
  const std::string& gate_guess() const { return gate_guess_; }

  /// Model trace |a|^2 on the problem's axes for (eps, gate).
  Eigen::MatrixXd model_trace(const CVec& eps, const PhaseGate& gate) const;
  /// Model trace of the banded CMA (rows interpolated between the nodes' gates).
  Eigen::MatrixXd model_trace(const CVec& eps, const std::vector<PhaseGate>& gates,
                              const BandState& state) const;
  /// Final bookkeeping shared by the CMA engines: smooth gate phase, global phase (arg eps = 0
  /// at its peak, the gate rotated to compensate), A(t) from the gate phase over the delay
  /// range plus the XUV support, model trace, exact G and scale. No time shift is applied
  /// (the delay axis ties the gate's time axis to the IR reference).
  Reconstruction reconstruct(CVec eps, PhaseGate gate) const;
  /// The same for node gates in the given frame (BandState): A(t) is their common vector
  /// potential, the model trace and G are the banded CMA's.
  Reconstruction reconstruct(CVec eps, std::vector<PhaseGate> gates, bool final_momentum) const;
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
  bool poisson_ = false;              // the Poisson projection (and no noise band)
  std::vector<double> meas_;          // nd x ne, I
  std::vector<double> spectrum_amp_;  // ne, sqrt(max(S_ff,0)) (empty: no spectrum)
  std::vector<std::size_t> outside_support_;  // FFT indices zeroed by impose_support()
  std::vector<long> bin_;                     // signed FFT bin of each energy
  std::vector<MomentumBand> bands_;
  std::vector<double> row_momentum_;  // ne, sqrt(2 W_j)
  double node_step_ = 1.0;            // spacing h of the momentum nodes (a.u.)
  // Lower node n of momentum p and the weight u of node n + 1 (linear extrapolation up to
  // half a node step beyond the end nodes, constant further out). Inline, with an int node,
  // so that band_layout's loop over the rows vectorises.
  std::size_t node_of(double p, double* u) const {
    const int nb = static_cast<int>(bands_.size());
    const double x =
        std::clamp((p - bands_.front().p_au) / node_step_, -0.5, static_cast<double>(nb - 1) + 0.5);
    const int n = x < 0 ? 0 : std::min(static_cast<int>(x), nb - 2);
    *u = x - static_cast<double>(n);
    return static_cast<std::size_t>(n);
  }
  // The banded CMA's common A on the gate nodes (signal-weighted mean of the bands' A_b; one
  // gate: its own A at p0), the last well-probed node and the phase every band gate takes
  // there (the fitted phase of the heaviest band).
  struct CommonPotential {
    std::vector<double> A;
    std::size_t end = 0;
    double end_phase = 0.0;
  };
  CommonPotential common_potential(const CVec& eps, const std::vector<PhaseGate>& gates,
                                   std::vector<double>& cover, bool final_frame) const;
  static void set_gate_from_potential(PhaseGate& gate, const std::vector<double>& A, double p,
                                      std::size_t end, double end_phase, bool final_frame);
  // Every node gate from the common A in state's frame, and the interpolation layout of every
  // row at every delay that goes with it (band_layout).
  void apply_potential(const CommonPotential& c, std::vector<PhaseGate>& gates,
                       BandState& state) const;
  void band_layout(const CommonPotential& c, const PhaseGate& gate, BandState& state) const;
  double sum_ii_ = 0.0, peak_ = 0.0;
  double count_ = 0.0;                            // elements of weight > 0 (the G normalisation)
  std::vector<std::size_t> frozen_start_;         // nd + 1: first weight-0 entry of each delay row
  std::vector<std::size_t> frozen_k_, frozen_j_;  // FFT index and energy index of each
  mutable std::string gate_guess_;
};

}  // namespace sw
