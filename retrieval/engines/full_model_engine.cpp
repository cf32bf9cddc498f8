#include "retrieval/engines/full_model_engine.h"

#include <algorithm>
#include <cmath>
#include <exception>
#include <sstream>
#include <utility>

#include <ceres/ceres.h>

#include "retrieval/core/error.h"
#include "retrieval/core/golden_section.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/full_model_internal.h"
#include "retrieval/engines/full_model_lbfgs.h"

namespace sw {

namespace {

using full_model_detail::check_problem;
using full_model_detail::FullModelStart;
using full_model_detail::LbfgsRunner;
using full_model_detail::make_full_model_start;
using full_model_detail::num;
using full_model_detail::plan_options;
using full_model_detail::reference_spectrum;

}  // namespace

namespace {

// --- initial guesses --------------------------------------------------------------------------

// A(tau) = p_ref - <p>(tau) from the momentum centroids (classical streaking, p_f = p_i - A:
// DESIGN.md; J. Itatani et al., PRL 88, 173903 (2002)).
void centroid_curve(const RetrievalProblem& P, std::vector<double>* A) {
  const std::size_t ne = P.energy_au.size(), nd = P.delay_au.size();
  std::vector<double> p(ne);
  for (std::size_t j = 0; j < ne; ++j) p[j] = units::momentum_au(P.energy_au[j]);
  const std::vector<double> ref = reference_spectrum(P);
  double n0 = 0, d0 = 0;
  for (std::size_t j = 0; j < ne; ++j) {
    n0 += std::max(ref[j], 0.0) * p[j];
    d0 += std::max(ref[j], 0.0);
  }
  const double pref = d0 > 0 ? n0 / d0 : p[ne / 2];
  A->assign(nd, 0.0);
  for (std::size_t i = 0; i < nd; ++i) {
    double nn = 0, dd = 0;
    for (std::size_t j = 0; j < ne; ++j) {
      const double m =
          std::max(P.intensity(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)), 0.0);
      nn += m * p[j];
      dd += m;
    }
    (*A)[i] = dd > 0 ? pref - nn / dd : 0.0;
  }
}

}  // namespace

namespace full_model_detail {

FullModelStart make_full_model_start(const RetrievalProblem& P, const EngineOptions& options,
                                     const FullModelSettings& settings, MomentumModel model) {
  FullModelStart st;
  const double ip = P.ionization_energy_au;
  const double omega = P.ir_omega_au > 0 ? P.ir_omega_au : units::wavelength_nm_to_omega_au(800.0);
  const double T = units::period_au(omega);
  const double carrier = FullModelObjective::carrier_for(P);
  const std::size_t n = P.grid.size(), ne = P.energy_au.size();

  // Initial XUV spectrum at the energy bins.
  std::vector<cdouble> spec(ne, 0.0);
  if (options.initial_xuv) {
    std::vector<double> omegas(P.energy_au.size());  // photon energies W_j + Ip
    for (std::size_t j = 0; j < omegas.size(); ++j) omegas[j] = P.energy_au[j] + ip;
    const CVec s = options.initial_xuv->spectrum_at(omegas);
    spec.assign(s.begin(), s.end());
  } else {
    const std::vector<double> ref = reference_spectrum(P);
    for (std::size_t j = 0; j < ne; ++j) {
      const double d = std::abs(P.dipole(units::momentum_au(P.energy_au[j])));
      spec[j] = d > 0 ? std::sqrt(std::max(ref[j], 0.0)) / d : 0.0;
    }
  }
  // Time support of that XUV (|eps|^2 above 1e-6 of its peak), widened by T/4.
  double s_lo = P.grid.time(0), s_hi = P.grid.time(n - 1);
  {
    const EnergyBinMap map = map_energy_bins(P.grid, carrier, ip, P.energy_au);
    CVec S(n, 0.0), eps(n);
    for (std::size_t j = 0; j < ne; ++j) S[fft_index(map.bin[j], n)] = spec[j];
    to_time(P.grid, Fft(n), S, eps);
    double peak = 0;
    for (const cdouble& e : eps) peak = std::max(peak, std::norm(e));
    std::size_t first = n, last = 0;
    for (std::size_t s = 0; s < n; ++s)
      if (std::norm(eps[s]) >= 1e-6 * peak) {
        first = std::min(first, s);
        last = s;
      }
    if (first < n) {
      s_lo = std::max(P.grid.time(0), P.grid.time(first) - T / 4);
      s_hi = std::min(P.grid.time(n - 1), P.grid.time(last) + T / 4);
    }
  }
  const IrSampling sampling = IrSampling::covering(
      P.delay_au.front() + s_lo, P.delay_au.back() + s_hi, T / settings.ir_samples_per_period);

  // IR form and initial parameters.
  st.ir_form = settings.ir == "auto" ? (options.initial_ir ? "spline" : "parametric") : settings.ir;
  std::vector<double> gauss;  // parametric guess when needed
  if (!options.initial_ir) {
    std::vector<double> A;
    centroid_curve(P, &A);
    double amax = 0;
    for (double a : A) amax = std::max(amax, std::abs(a));
    if (amax > 0) {
      gauss = GaussianIrParametrization::fit_samples(P.delay_au, A,
                                                     std::vector<double>(A.size(), 1.0), omega);
      st.ir_guess = "centroid curve";
    } else {
      gauss = {1e-3, omega, 2 * T, 0.0, 0.0, 0.5 * (P.delay_au.front() + P.delay_au.back())};
      st.ir_guess = "weak default (no centroid sweep)";
    }
  } else {
    st.ir_guess = "initial_ir";
  }
  std::unique_ptr<IrParametrization> param;
  std::vector<double> theta;
  if (st.ir_form == "parametric") {
    auto g = std::make_unique<GaussianIrParametrization>(sampling);
    theta = options.initial_ir ? g->fit(*options.initial_ir) : gauss;
    param = std::move(g);
  } else {
    auto sp = std::make_unique<SplineIrParametrization>(sampling, T / settings.knots_per_period);
    if (options.initial_ir) {
      theta = sp->fit(*options.initial_ir);
    } else {
      std::vector<double> A(sampling.size);
      for (std::size_t i = 0; i < A.size(); ++i)
        A[i] = GaussianIrParametrization::value(gauss.data(), sampling.time(i));
      theta = sp->fit_samples(A);
    }
    double amax = 0;
    for (double c : theta) amax = std::max(amax, std::abs(c));
    sp->set_amplitude_scale(std::max(amax, 1e-2));
    param = std::move(sp);
  }
  st.objective =
      std::make_unique<FullModelObjective>(P, settings, model, std::move(param), options.threads);
  // A warm-start IR from a CMA engine carries an arbitrary low-frequency offset (the gate side of
  // the frequency-shift ambiguity); start the free form without it.
  if (st.ir_form == "spline" && settings.ir_lowpass_weight > 0)
    theta = st.objective->without_low_frequencies(theta);
  st.x = st.objective->encode(spec, theta);
  return st;
}

}  // namespace full_model_detail

namespace {

// --- the engine -------------------------------------------------------------------------------

class LeastSquaresEngine : public Engine {
 public:
  explicit LeastSquaresEngine(MomentumModel m) : model_(m) {}
  ~LeastSquaresEngine() override { runner_.reset(); }

  std::string name() const override {
    return model_ == MomentumModel::kFull ? "full-model" : "cma-least-squares";
  }
  std::string description() const override {
    return model_ == MomentumModel::kFull
               ? "least-squares fit of the full SFA model (no central-momentum approximation), "
                 "L-BFGS with adjoint gradients"
               : "least-squares fit of the SFA model in the central-momentum approximation, "
                 "L-BFGS with adjoint gradients";
  }
  std::string reference() const override {
    return "P. D. Keathley et al., New J. Phys. 18, 073009 (2016); D. C. Liu and J. Nocedal, "
           "Math. Program. 45, 503 (1989)";
  }
  void prepare(const RetrievalProblem& problem, const EngineOptions& options) override;
  IterationRecord iterate(int k) override;
  Reconstruction finalize() override;

 private:
  double current_G(const std::vector<double>& x) const {
    return trace_error(problem_.intensity, objective_->model(x.data(), nullptr), nullptr,
                       &problem_.weight);
  }
  double polish_lines();

  // Per joint line: the delay before the first polish (as) and the curvature sigma after the
  // last (as).
  struct LinePolish {
    double start_as = 0.0, curvature_sigma_as = 0.0;
  };
  std::vector<LinePolish> polish_;
  int polish_rounds_ = 0;

  MomentumModel model_;
  RetrievalProblem problem_;
  EngineOptions options_;
  FullModelSettings settings_;
  std::unique_ptr<FullModelObjective> objective_;
  ceres::GradientProblemSolver::Options ceres_options_;
  std::unique_ptr<LbfgsRunner> runner_;
  std::vector<double> x_, best_x_;
  double best_G_ = 0.0, initial_G_ = 0.0, last_G_ = 0.0, initial_cost_ = 0.0;
  bool done_ = false;
  long long lbfgs_iterations_ = 0;
  int runs_ = 0, replans_ = 0;
  std::string ir_form_, ir_guess_, last_termination_;
};

void LeastSquaresEngine::prepare(const RetrievalProblem& P, const EngineOptions& options) {
  runner_.reset();
  check_problem(P, name());
  problem_ = P;
  options_ = options;
  settings_ = validated_settings(options.settings.full_model, name());
  done_ = false;
  lbfgs_iterations_ = 0;
  runs_ = replans_ = 0;
  last_termination_.clear();

  FullModelStart st = make_full_model_start(P, options, settings_, model_);
  objective_ = std::move(st.objective);
  x_ = std::move(st.x);
  ir_form_ = std::move(st.ir_form);
  ir_guess_ = std::move(st.ir_guess);
  best_x_ = x_;
  initial_G_ = best_G_ = last_G_ = current_G(x_);
  initial_cost_ = objective_->evaluate(x_.data(), nullptr);

  ceres_options_ = ceres::GradientProblemSolver::Options();
  ceres_options_.line_search_direction_type = ceres::LBFGS;
  ceres_options_.line_search_type = ceres::WOLFE;
  ceres_options_.max_lbfgs_rank = settings_.lbfgs_memory;
  ceres_options_.use_approximate_eigenvalue_bfgs_scaling = true;
  ceres_options_.max_num_iterations = 100000000;
  ceres_options_.max_solver_time_in_seconds = options.max_seconds;
  ceres_options_.function_tolerance = 1e-12;
  ceres_options_.gradient_tolerance = 1e-14;
  ceres_options_.parameter_tolerance = 1e-12;
  ceres_options_.logging_type = ceres::SILENT;
}

IterationRecord LeastSquaresEngine::iterate(int) {
  IterationRecord rec;
  if (!objective_) throw Error(ErrorKind::kInternal, name() + ": iterate() before prepare()");
  if (done_) {
    rec.trace_error = last_G_;
    return rec;
  }
  if (!runner_) {
    runner_ = std::make_unique<LbfgsRunner>(*objective_, ceres_options_, x_);
    ++runs_;
  }
  runner_->advance(settings_.lbfgs_per_iteration);
  if (const std::exception_ptr e = runner_->error()) {
    runner_.reset();
    try {
      std::rethrow_exception(e);
    } catch (const std::exception& ex) {
      throw numeric_error(name() + ": model evaluation failed: " + ex.what());
    }
  }
  x_ = runner_->x();
  rec.step_size = runner_->step_size();
  if (runner_->finished()) {
    const ceres::GradientProblemSolver::Summary& s = runner_->summary();
    lbfgs_iterations_ += runner_->iterations();
    last_termination_ = s.message;
    // A run that still made progress earns a fresh restart (new blocks, new memory).
    const double gain = runner_->initial_cost() - s.final_cost;
    const bool progress = gain > 1e-9 * std::abs(runner_->initial_cost());
    runner_.reset();
    if (progress && s.termination_type != ceres::FAILURE) {
      objective_->replan(x_.data());
      ++replans_;
    } else {
      done_ = true;
    }
  } else if (!objective_->plan_covers(x_.data(), 0.25)) {
    lbfgs_iterations_ += runner_->iterations();
    runner_.reset();
    objective_->replan(x_.data());
    ++replans_;
  }
  last_G_ = current_G(x_);
  if (last_G_ < best_G_) {
    best_G_ = last_G_;
    best_x_ = x_;
  }
  rec.trace_error = last_G_;
  return rec;
}

// Joint lines: a weak line's delay and strength change the cost by far less than the rules that
// stop L-BFGS can see (noise floor, relative change of G), so the run may end with them near
// their start. Each line's two coordinates are minimised in turn by golden-section search with
// every other parameter held; then the cost's curvature in the delay gives its sigma with the
// rest fixed, sqrt(2 / chi2''), chi2 = cost x elements (weights 1 / variance). Returns the
// largest move of a delay in units of its curvature sigma.
double LeastSquaresEngine::polish_lines() {
  const FullModelObjective& f = *objective_;
  const std::size_t off =
      f.num_xuv_parameters() + static_cast<std::size_t>(f.ir_parametrization().num_params());
  auto cost_with = [&](std::size_t i, double v) {
    const double keep = best_x_[i];
    best_x_[i] = v;
    const double c = f.evaluate(best_x_.data(), nullptr);
    best_x_[i] = keep;
    return c;
  };
  auto delay_as = [&](std::size_t l) {
    return units::au_to_as(f.line_delay_au(best_x_.data(), l));
  };
  std::vector<double> before(f.num_lines());
  for (std::size_t l = 0; l < f.num_lines(); ++l) before[l] = delay_as(l);
  // Brackets: +-30 as for the delay, a factor e^(+-0.5) for the strength.
  const double unit_as = FullModelObjective::kDelayScaleAs;
  double cost = f.evaluate(best_x_.data(), nullptr);
  for (int sweep = 0; sweep < settings_.line_polish_sweeps; ++sweep)
    for (std::size_t l = 0; l < f.num_lines(); ++l)
      for (const auto& [i, half] :
           {std::pair{off + 2 * l + 1, 30.0 / unit_as}, std::pair{off + 2 * l, 0.5}}) {
        const double v = golden_section_min([&](double t) { return cost_with(i, t); },
                                            best_x_[i] - half, best_x_[i] + half, 18);
        const double c = cost_with(i, v);
        if (c < cost) {
          best_x_[i] = v;
          cost = c;
        }
      }
  const double elements = static_cast<double>(problem_.intensity.size());
  const double h = 1.0 / unit_as;  // 1 as
  polish_.assign(f.num_lines(), {});
  double largest = 0.0;
  for (std::size_t l = 0; l < f.num_lines(); ++l) {
    const std::size_t i = off + 2 * l + 1;
    const double chi2_curvature =
        (cost_with(i, best_x_[i] + h) - 2.0 * cost + cost_with(i, best_x_[i] - h)) * elements;
    LinePolish& p = polish_[l];
    p.curvature_sigma_as = chi2_curvature > 0 ? std::sqrt(2.0 / chi2_curvature) : 0.0;
    const double moved = std::abs(delay_as(l) - before[l]);
    largest = std::max(largest, p.curvature_sigma_as > 0 ? moved / p.curvature_sigma_as
                                : moved > 0              ? HUGE_VAL
                                                         : 0.0);
  }
  return largest;
}

Reconstruction LeastSquaresEngine::finalize() {
  if (!objective_) throw Error(ErrorKind::kInternal, name() + ": finalize() before prepare()");
  if (runner_) {
    lbfgs_iterations_ += runner_->iterations();
    runner_.reset();
  }
  if (objective_->num_lines() > 0) {
    // The polished line coordinates move the pulse and field's optimum a little: L-BFGS follows
    // for a few engine iterations' worth and the lines are polished again, until a polish moves
    // no delay by more than 0.05 of its curvature sigma (at most line_polish_rounds polishes).
    std::vector<double> start(objective_->num_lines());
    for (std::size_t l = 0; l < start.size(); ++l)
      start[l] = units::au_to_as(objective_->line_delay_au(best_x_.data(), l));
    polish_lines();
    for (polish_rounds_ = 1; polish_rounds_ < settings_.line_polish_rounds; ++polish_rounds_) {
      LbfgsRunner follow(*objective_, ceres_options_, best_x_);
      follow.advance(3 * settings_.lbfgs_per_iteration);
      follow.stop();
      lbfgs_iterations_ += follow.iterations();
      if (!follow.error() && objective_->evaluate(follow.x().data(), nullptr) <
                                 objective_->evaluate(best_x_.data(), nullptr))
        best_x_ = follow.x();
      if (polish_lines() <= 0.05) break;
    }
    for (std::size_t l = 0; l < start.size(); ++l) polish_[l].start_as = start[l];
  }
  const FullModelObjective& f = *objective_;
  CVec eps = f.envelope(best_x_.data());
  // Global phase: arg eps = 0 at the intensity peak.
  std::size_t peak = 0;
  for (std::size_t s = 1; s < eps.size(); ++s)
    if (std::norm(eps[s]) > std::norm(eps[peak])) peak = s;
  const cdouble rot = std::abs(eps[peak]) > 0 ? std::conj(eps[peak]) / std::abs(eps[peak]) : 1.0;
  for (cdouble& e : eps) e *= rot;

  Reconstruction r;
  r.engine = name();
  r.model = model_ == MomentumModel::kFull ? "full" : "cma";
  r.noise_model = problem_.variance.size() != 0 ? "poisson" : "gaussian";
  r.reference = reference();
  r.xuv = XuvField(problem_.grid, f.carrier_au(), std::move(eps));
  r.ir = f.ir_field(best_x_.data());
  ForwardModelOptions fo = plan_options(settings_);
  fo.momentum = model_;
  fo.central_momentum_au = problem_.central_momentum_au;
  fo.energy_jacobian = false;
  fo.threads = options_.threads;
  if (f.num_lines() > 0) {
    // Joint fit: the model of every line (the reference's own ForwardModel would miss the others).
    r.retrieved = f.model(best_x_.data(), nullptr);
  } else {
    r.retrieved = ForwardModel(problem_.ionization_energy_au, problem_.dipole, fo)
                      .trace(r.xuv, r.ir, problem_.delay_au, problem_.energy_au);
    f.apply_resolution(r.retrieved);  // counts as the spectrometer records them
  }
  r.trace_error = trace_error(problem_.intensity, r.retrieved, &r.scale, &problem_.weight);
  r.termination = done_ ? Termination::kConverged : Termination::kMaxIterations;
  r.message = last_termination_.empty() ? "L-BFGS still running" : "L-BFGS: " + last_termination_;

  double wmu = 0;
  const double wcost = f.evaluate(best_x_.data(), nullptr);
  f.model(best_x_.data(), &wmu);
  auto& S = r.settings;
  S.emplace_back("forward_model", r.model);
  S.emplace_back("ir_form", ir_form_);
  S.emplace_back("ir_initial_guess", ir_guess_);
  S.emplace_back("xuv_initial_guess",
                 options_.initial_xuv ? "initial_xuv" : "sqrt(spectrum)/|d|, flat phase");
  S.emplace_back("parameters", std::to_string(f.num_parameters()));
  S.emplace_back("xuv_support_bins", std::to_string(f.support().size()));
  S.emplace_back("carrier_eV", num(units::au_to_eV(f.carrier_au())));
  const IrSampling& smp = f.ir_parametrization().sampling();
  S.emplace_back("ir_window_fs",
                 num(units::au_to_fs(smp.t0_au)) + " .. " + num(units::au_to_fs(smp.last_time())));
  S.emplace_back("ir_samples", std::to_string(smp.size));
  if (const auto* sp = dynamic_cast<const SplineIrParametrization*>(&f.ir_parametrization()))
    S.emplace_back("spline_knot_spacing_fs", num(units::au_to_fs(sp->knot_spacing_au())));
  if (ir_form_ == "parametric") {
    const std::vector<double> th = f.ir_theta(best_x_.data());
    const GaussianIrPulse p = GaussianIrParametrization::to_pulse(th.data());
    S.emplace_back("ir_wavelength_nm", num(p.wavelength_nm));
    S.emplace_back("ir_fwhm_fs", num(p.fwhm_fs));
    S.emplace_back("ir_peak_intensity_Wcm2", num(p.peak_intensity_Wcm2));
    S.emplace_back("ir_cep_rad", num(p.cep_rad));
    S.emplace_back("ir_chirp_rad_per_fs2", num(p.chirp_rad_per_fs2));
    S.emplace_back("ir_center_fs", num(p.center_fs));
  }
  S.emplace_back("momentum_blocks", std::to_string(f.forward().plan().blocks.size()));
  std::size_t nodes = 0;
  for (const MomentumBlock& b : f.forward().plan().blocks) nodes += b.nodes.size();
  S.emplace_back("momentum_nodes", std::to_string(nodes));
  S.emplace_back("node_plan", settings_.node_plan + " (interpolation bound " +
                                  num(chebyshev_interpolation_bound(settings_.block_phase_rad,
                                                                    settings_.chebyshev_nodes)) +
                                  ")");
  S.emplace_back("lbfgs_runs", std::to_string(runs_));
  S.emplace_back("lbfgs_iterations", std::to_string(lbfgs_iterations_));
  S.emplace_back("cost_evaluations", std::to_string(f.evaluations()));
  S.emplace_back("block_replans", std::to_string(replans_));
  S.emplace_back("lbfgs_termination", last_termination_.empty() ? "running" : last_termination_);
  S.emplace_back("weighted_cost_per_element", num(wcost));
  S.emplace_back("weighted_scale", num(wmu));
  S.emplace_back("initial_trace_error", num(initial_G_));
  S.emplace_back("initial_weighted_cost_per_element", num(initial_cost_));
  S.emplace_back("noise_model", problem_.variance.size() != 0
                                    ? "poisson (weights 1/variance, variance averaged over +-" +
                                          std::to_string(settings_.variance_smoothing_bins) +
                                          " energy bins and +-1 delay)"
                                    : "none (no variances: uniform weights)");
  S.emplace_back("spectrum_constraint", settings_.spectrum_constraint);
  S.emplace_back("ir_lowpass_weight", num(settings_.ir_lowpass_weight));
  for (const std::string& k : options_.settings.given)
    S.emplace_back("extra." + k, options_.settings.text(k));
  for (std::size_t l = 0; l < f.num_lines(); ++l) {
    // Joint lines (read back by retrieval/analysis/multi_line_fit.cpp; full precision).
    std::ostringstream d, g, c;
    d.precision(12);
    g.precision(12);
    c.precision(12);
    d << units::au_to_as(f.line_delay_au(best_x_.data(), l));
    g << f.line_strength(best_x_.data(), l);
    c << f.line_counts_ratio(best_x_.data(), l);
    const std::string k = "joint_line." + std::to_string(l) + ".";
    S.emplace_back(k + "name", f.line(l).name);
    S.emplace_back(k + "delay_as", d.str());
    S.emplace_back(k + "strength", g.str());
    S.emplace_back(k + "counts_ratio", c.str());
    if (l < polish_.size()) {
      S.emplace_back(k + "delay_before_polish_as", num(polish_[l].start_as));
      // A sigma only where the cost is a chi^2 (weights 1 / variance).
      if (problem_.variance.size() != 0)
        S.emplace_back(k + "delay_curvature_sigma_as", num(polish_[l].curvature_sigma_as));
      S.emplace_back(k + "polish_rounds", std::to_string(polish_rounds_));
    }
  }
  return r;
}

}  // namespace

std::unique_ptr<Engine> make_full_model_engine() {
  return std::make_unique<LeastSquaresEngine>(MomentumModel::kFull);
}

std::unique_ptr<Engine> make_cma_least_squares_engine() {
  return std::make_unique<LeastSquaresEngine>(MomentumModel::kCentral);
}

}  // namespace sw
