#pragma once
// The "full-model" engine: least-squares fit of the complete SFA streaking model, without the
// central-momentum approximation, to the measured trace (in the spirit of P. D. Keathley,
// S. Bhardwaj, J. Moses, G. Laurent and F. X. Kaertner, New J. Phys. 18, 073009 (2016)).
// Model: retrieval/physics/forward_model.h, kFull (Chebyshev interpolation in p over momentum
// blocks), evaluated with its hand-written adjoint (retrieval/physics/forward_adjoint.h);
// optimiser: Ceres' GradientProblemSolver (L-BFGS with a Wolfe line search; D. C. Liu and J.
// Nocedal, Math. Program. 45, 503 (1989)). A Jacobian of ~5e4 residuals x ~1e3 parameters would not
// fit the memory budget; the gradient alone costs about two forward evaluations.
//
// Parameters (all scaled to O(1) for the optimiser):
//  * XUV: the complex spectral samples E~(Omega_j) at the photon energies Omega_j = W_j + Ip of
//    the problem's energy bins, as real and imaginary parts (carrier Omega_c = W_c + Ip, W_c the
//    bin nearest the field-free-spectrum centroid, so bin j is FFT bin j - c). Real/imaginary
//    rather than amplitude/phase: the cost is then a polynomial (quartic) in the parameters,
//    smooth everywhere, with no phase wrapping and no singular phase where the amplitude
//    vanishes. Only bins inside the spectral support are free (smoothed field-free spectrum
//    above support_threshold x its maximum, widened by support_margin_eV; default 1e-5, i.e.
//    essentially every bin with signal: a tighter support truncates the spectral wings and
//    biases the fit, e.g. +2 % FWHM at 1e-3 for a 70 as pulse); the rest are zero. With
//    spectrum_constraint=amplitude a least-squares term (weight spectrum_weight) ties
//    |d(p_j) E~_j|^2 to the field-free spectrum. It is off by default (centroid: the spectrum
//    sets only carrier, support and initial guess) because "field-free" spectra from the edge
//    rows of a scan still carry residual streaking, and imposing them distorts the fit (G = 0.02
//    instead of 0 on noise-free data in tests). Diagonal preconditioning: bin j's parameters
//    are E~_j / (s sqrt(D_max / D_j)), D_j = sum_i w_ij max(M_ij, 0) (its Gauss-Newton
//    curvature, up to a common factor; ratio capped at 30).
//  * IR: "parametric" (6 parameters of a Gaussian-envelope pulse,
//  retrieval/physics/ir_parametrization.h)
//    or "spline" (cubic B-spline coefficients, knot spacing T/knots_per_period). ir=auto (the
//    default) takes the spline when refining a warm start (EngineOptions::initial_ir given:
//    the field is already close and may be non-Gaussian) and the parametric form from scratch
//    (six parameters keep the first, far-from-solution steps well posed).
//    IR penalty (ir_lowpass_weight): kappa [sum_{t_i in delay range} (L A)_i^2 + E], L a
//    Gaussian low pass of standard deviation one IR period (transfer exp(-W^2 T^2 / 2): 1 at
//    W = 0, 3e-9 at the carrier, 7e-3 at half of it), kappa = ir_lowpass_weight /
//    (N_samples max|A_initial|^2). A laser pulse of more than ~1.5 cycles has no content there,
//    so the penalty does not bias it; it removes a near-degeneracy of the free form: an offset
//    A -> A + c is compensated almost exactly by stretching the XUV spectrum (the gate of
//    momentum p with A + c is the gate of p + c with A, up to an energy shift p c + c^2/2), and
//    without the penalty L-BFGS drifts along that valley while fitting noise (+5..7 % in peak A
//    in tests; a CMA warm start brings an offset of its own). Default weight 100: on a
//    direct-quadrature helium scan (500 counts) the offset falls from 0.011 (weight 1) to 2e-4
//    with G unchanged; at 1000 G starts to rise. For the spline, E = sum_{t_i outside the delay
//    range} A_i^2: where no delay probes the field directly (only XUV tails and I1's tail integral
//    see it) A is pulled to 0, so that an offset inside cannot be balanced by a lobe outside and
//    the edges stay tame. In the CMA the same offset is the gate side of the frequency-shift
//    ambiguity of DESIGN.md.
//
// Cost (Poisson-aware weighted least squares, model in |a|^2 units: RetrievalProblem::intensity
// is already divided by the energy Jacobian p, so the model carries no p either):
//   C = (1/N) [ sum_ij w_ij (mu |a_ij|^2 - M_ij)^2
//               + spectrum_weight sum_j wc_j (mu |d(p_j) E~_j|^2 - S_j)^2 ]  + IR penalty,
//   w_ij = 1 / max(<variance>_ij, variance_floor x max variance),   wc_j = sum_i w_ij,
// <variance> the variance averaged over +-variance_smoothing_bins energies and +-1 delay: a
// weight from the bin's own counts is correlated with its fluctuation and biases least squares
// towards low counts (Neyman's chi^2; e.g. S. Baker and R. D. Cousins, Nucl. Instrum. Methods
// 221, 437 (1984)); the local mean keeps the Poisson scaling without most of that correlation.
// N the number of trace elements, mu the optimal scale eliminated in closed form (variable
// projection, G. H. Golub and V. Pereyra, SIAM J. Numer. Anal. 10, 413 (1973)): C is quadratic
// in mu, mu* = -c1 / (2 c2), and since dC/dmu = 0 there the gradient of the projected cost is
// the partial gradient at fixed mu* (retrieval/physics/forward_adjoint.h). C ~ chi^2 per element:
// ~1 at the Poisson noise floor.
//
// Iterations: each iterate() advances ONE continuing L-BFGS run by lbfgs_per_iteration
// iterations (the solver runs on a worker thread that pauses in an iteration callback, so its
// curvature memory survives between iterate() calls) and returns the trace error G of
// sw::trace_error (Fittinghoff et al., JOSA B 12, 1955 (1995)) of the current estimate. The
// momentum blocks are fixed during a run (one smooth cost); when the IR has moved so far that
// they no longer meet their accuracy target the run is restarted with new blocks. When L-BFGS
// itself converges, one fresh restart is tried; afterwards iterate() returns the same G and the
// shared loop's stall rule ends the run.
//
// Result: the lowest-G estimate; XUV on problem.grid (global phase: arg eps = 0 at the
// intensity peak; no time shift: the delay axis ties the XUV and IR time axes, as in the CMA
// engines), IR on a grid covering the delays +- the XUV support, the retrieved trace from
// sw::ForwardModel kFull itself, scale mu of sw::trace_error.
//
// Settings: FullModelSettings (retrieval/engines/full_model_settings.h; carried typed by
// EngineOptions::settings), described once in FullModelSettings::describe (defaults, limits,
// help).
//
// Several photoelectron lines (RetrievalProblem::extra_lines; retrieval/analysis/multi_line_fit.h):
// one XUV field and one IR field shared by all lines. Line l has its own binding energy Ip_l (its
// amplitude is the reference model with Ip_l: photon energy W + Ip_l), a strength s_l and a
// relative photoemission delay t_l, a linear spectral phase of its dipole, i.e. the time-shifted
// replica sqrt(s_l) eps(t - t_l) of the XUV envelope (E~_l = sqrt(s_l) E~ exp(i w t_l), w the
// offset from the carrier, with the grid's convention eps(t) = int dw/2pi E~(w) e^{-i w t}); an
// electron emitted t_l later sees A(tau + t_l). The counts of different lines add incoherently:
//   model_ij = |a_ref,ij|^2 + sum_l s_l |a_l,ij|^2  (a_l on the columns of its kinetic band),
// and the cost is the one above with this model (scale mu eliminated the same way). The
// parameters of line l follow the IR parameters: ln s_l and t_l / (10 as). The gradient goes
// through each line's own adjoint (ForwardAdjoint::vjp with a_bar = 2 w (mu m - M) mu a_l) and
// the line's spectral map: d/dt_l = 2 Re sum conj(E~bar_l) i w E~_l, d/d ln s_l = Re sum
// conj(E~bar_l) E~_l. The field-free-spectrum term is not used in this mode (the reference
// spectrum then holds every line).
// Line polish (finalize()): a weak line's delay and strength change the cost by far less than
// the rules that stop the engine can see (noise floor, relative change of G), so the run can
// end with them near their start. Each line's ln s_l and t_l are then minimised in turn by
// golden-section search (t_l within +-30 as, s_l within a factor e^0.5; line_polish_sweeps
// sweeps) with every other parameter held, L-BFGS follows for 3 engine iterations' worth, and
// the polish repeats until no delay moves by more than 0.05 of its curvature sigma
// (line_polish_rounds at most). The curvature sigma sqrt(2 / chi2''(t_l)) (chi2 = C x elements,
// second difference over +-1 as) is the Cramer-Rao bound of t_l at the fit with the rest held.
// Settings joint_line.<l>.delay_before_polish_as, .delay_curvature_sigma_as, .polish_rounds.

#include <memory>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "retrieval/engines/engine.h"
#include "retrieval/engines/full_model_settings.h"
#include "retrieval/physics/forward_adjoint.h"
#include "retrieval/physics/forward_model.h"
#include "retrieval/physics/ir_parametrization.h"

namespace sw {

/// The cost function of the engine on a flat parameter vector x (scaled XUV real/imaginary
/// parts, then scaled IR parameters), with its adjoint gradient. Public so that tests can check
/// the gradient against finite differences and so that other drivers can reuse it.
class FullModelObjective {
 public:
  /// `ir` fixes the IR form and sampling; `model` kFull or kCentral (the CMA, at
  /// problem.central_momentum_au: the same fit under the approximation, for comparisons).
  FullModelObjective(const RetrievalProblem& problem, const FullModelSettings& settings,
                     MomentumModel model, std::unique_ptr<IrParametrization> ir, int threads);

  int num_parameters() const {
    return static_cast<int>(num_xuv_ + ir_->num_params() + 2 * lines_.size());
  }
  std::size_t num_xuv_parameters() const { return num_xuv_; }
  /// Cost C(x); gradient dC/dx when grad is not null.
  double evaluate(const double* x, double* grad) const;

  /// x from spectral samples at the energy bins (size num energies; only support bins used)
  /// and physical IR parameters theta. Sets the XUV and IR parameter scales from them.
  std::vector<double> encode(const std::vector<cdouble>& spectrum,
                             const std::vector<double>& theta);
  /// Spectral samples at the energy bins (0 outside the support).
  std::vector<cdouble> spectrum(const double* x) const;
  CVec envelope(const double* x) const;
  std::vector<double> ir_theta(const double* x) const;
  IrField ir_field(const double* x) const;
  /// |a|^2 (the model, no scale; blurred by the problem's energy resolution) and the
  /// weighted optimal scale mu at x.
  Eigen::MatrixXd model(const double* x, double* mu) const;
  /// The least-squares weights w_ij (delays x energies; see the cost above).
  const Eigen::MatrixXd& weights() const { return weight_; }
  /// Replaces the measured counts (delays x energies, the problem's shape) and keeps everything
  /// that was derived from the problem: weights, parameter scales, support, lines. The same cost
  /// on other counts (linearised replicas, retrieval/engines/full_model_laplace.h).
  void set_measured(const Eigen::MatrixXd& counts);
  /// Blurs model counts (delays x energies) by the problem's energy resolution, in place.
  void apply_resolution(Eigen::MatrixXd& counts) const { fa_.blur_counts(counts); }

  /// IR parameters whose field is that of theta minus its low-pass part (the penalty's L).
  std::vector<double> without_low_frequencies(const std::vector<double>& theta) const;
  /// Further lines of a joint fit (RetrievalProblem::extra_lines), in the problem's order.
  std::size_t num_lines() const { return lines_.size(); }
  const ExtraLine& line(std::size_t l) const { return lines_[l].spec; }
  /// x holds, after the IR parameters, ln s_l at 2l and t_l / kDelayScaleAs at 2l + 1 per line.
  static constexpr double kDelayScaleAs = 10.0;
  /// Strength s_l and relative delay t_l (a.u.) of line l at x.
  double line_strength(const double* x, std::size_t l) const;
  double line_delay_au(const double* x, std::size_t l) const;
  /// Modelled counts of line l over the reference's (|a|^2 x p summed over the whole scan).
  double line_counts_ratio(const double* x, std::size_t l) const;

  /// Momentum blocks from the IR of x (kFull); no-op for the CMA.
  void replan(const double* x);
  bool plan_covers(const double* x, double slack) const;

  double carrier_au() const { return carrier_; }
  const std::vector<std::size_t>& support() const { return support_; }
  const IrParametrization& ir_parametrization() const { return *ir_; }
  const ForwardAdjoint& forward() const { return fa_; }
  MomentumModel momentum_model() const { return model_; }
  long long evaluations() const { return evaluations_; }

  /// Carrier (a.u.) of a problem: Ip + the energy bin nearest the centroid of the field-free
  /// spectrum (else of the delay-averaged spectrum).
  static double carrier_for(const RetrievalProblem& problem);

 private:
  void xuv_adjoint(const CVec& eps_bar, std::vector<cdouble>* spec_bar) const;
  void lowpass(const std::vector<double>& a, std::vector<double>* out) const;
  bool spectrum_term() const;
  double evaluate_lines(const double* x, double* grad) const;
  double ir_penalty(const IrField& irf, std::vector<double>* LA, std::vector<double>* A_edge) const;
  void ir_penalty_gradient(const std::vector<double>& LA, const std::vector<double>& A_edge,
                           std::vector<double>* Ab) const;
  /// |a|^2 of the reference and of each line (line l on its columns) at x.
  void line_models(const double* x, Eigen::MatrixXd* ref,
                   std::vector<Eigen::MatrixXd>* per_line) const;
  std::vector<cdouble> line_spectrum(const std::vector<cdouble>& spec, const double* x,
                                     std::size_t l) const;
  CVec to_envelope(const std::vector<cdouble>& spec) const;

  struct LineTerm {
    ExtraLine spec;
    std::unique_ptr<ForwardAdjoint> fa;
    std::size_t c0 = 0, c1 = 0;  // columns [c0, c1) of the problem's energy axis
  };
  std::vector<LineTerm> lines_;
  std::vector<double> energy_au_;
  std::vector<double> omega_bin_;  // FFT angular frequency (about the carrier) of each energy bin

  MomentumModel model_;
  FullModelSettings settings_;
  double carrier_;
  std::size_t ne_, nd_, n_;
  TimeGrid grid_;
  ForwardAdjoint fa_;
  std::unique_ptr<IrParametrization> ir_;
  Eigen::MatrixXd measured_, weight_;
  std::vector<double> spectrum_, spectrum_weight_col_, dip2_;  // S_j, wc_j, d(p_j)^2
  std::vector<std::size_t> support_;                           // energy indices of free bins
  std::vector<std::size_t> fft_slot_;                          // FFT index of each energy bin
  std::size_t num_xuv_ = 0;
  double xuv_scale_ = 1.0;
  std::vector<double> bin_scale_;  // per support bin, >= 1
  std::vector<double> ir_scale_;
  double inv_elements_ = 1.0;
  std::vector<double> lowpass_kernel_;  // one side, unit DC gain
  double lowpass_weight_ = 0.0;         // kappa (set by encode)
  std::vector<char> probed_;            // IR sample inside the delay range
  bool edge_ridge_ = false;             // free form: also penalise A outside the delay range
  mutable long long evaluations_ = 0;
};

/// Factory of the registered engine "full-model" (model "full").
std::unique_ptr<Engine> make_full_model_engine();
/// The same least-squares engine under the CMA ("cma-least-squares", model "cma"): not
/// registered; for comparisons of the two models on the same data.
std::unique_ptr<Engine> make_cma_least_squares_engine();

}  // namespace sw
