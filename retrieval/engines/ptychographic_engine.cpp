#include "retrieval/engines/ptychographic_engine.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <optional>
#include <random>
#include <string>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/cma_kernels.h"
#include "retrieval/engines/cma_problem.h"
#include "retrieval/physics/gate.h"

namespace sw {

namespace {

using cma_kernels::epie_update;

class PtychographicEngine final : public Engine {
 public:
  std::string name() const override { return "ptychographic"; }
  std::string description() const override {
    return "ePIE on the streaking trace (CMA, with interpolated momentum nodes over broad "
           "bands): XUV as object, unit-modulus phase gate as probe";
  }
  std::string reference() const override {
    return "A. M. Maiden and J. M. Rodenburg, Ultramicroscopy 109, 1256 (2009); M. Lucchini et "
           "al., Opt. Express 23, 29502 (2015)";
  }
  void prepare(const RetrievalProblem& problem, const EngineOptions& options) override {
    const PtychographicSettings& ps = validated_settings(options.settings.ptychographic, name());
    const bool lines = ps.joint_lines && !problem.extra_lines.empty();
    if (lines) {
      // The joint window's reference spectrum holds every line's counts: only its centroid
      // (of the part inside the cut support) is used.
      CmaSettings cs = ps.cma;
      if (cs.spectrum == CmaSpectrum::kAmplitude) cs.spectrum = CmaSpectrum::kCentroid;
      cma_.emplace(joint_lines_view(problem, ps.joint_lines_reach), cs, name());
    } else
      cma_.emplace(problem, ps.cma, name());
    beta_o_ = ps.beta_object;
    beta_g_ = ps.beta_gate;
    rng_.seed(options.seed);
    const std::size_t n = cma_->samples();
    eps_ = cma_->initial_xuv(options);
    // Nodes start after a one-p0 stage (see iterate()); the single gate starts it. With one
    // node there is no second stage (banded_ from the start).
    gates_ = {cma_->initial_gate(options)};
    banded_ = cma_->bands().size() == 1;
    state_ = BandState{};
    stage_switch_ = 0;
    stage_note_.clear();
    history_.clear();
    // Noise floor of the trace error (trace_error.h), for the decision to add momentum nodes.
    noise_floor_ =
        problem.variance.size() != 0
            ? noise_floor_trace_error(problem.intensity, problem.variance, &problem.weight)
            : 0.0;
    forced_bands_ = ps.cma.momentum_bands > 0;
    order_.resize(cma_->num_delays());
    for (std::size_t j = 0; j < order_.size(); ++j) order_[j] = j;
    const std::size_t nb = cma_->bands().size();
    g_.assign(nb, CVec(n, 0.0));
    psi_.assign(nb, CVec(n, 0.0));
    spec_.assign(nb, CVec(n, 0.0));
    gp_.assign(nb, nullptr);
    back_.assign(n, 0.0);
    du_.assign(n, 0.0);
    work_.assign(n, 0.0);
    scratch_.assign(cma_->scratch_size(), 0.0);
    modes_.clear();
    amp_.clear();
    delay_.clear();
    if (lines) prepare_lines(problem);
    best_eps_ = eps_;
    best_gates_ = gates_;
    best_amp_ = amp_;
    best_delay_ = delay_;
    best_ = std::numeric_limits<double>::infinity();
  }

  IterationRecord iterate(int k) override {
    if (!modes_.empty()) return iterate_lines(k);
    std::shuffle(order_.begin(), order_.end(), rng_);
    const std::size_t n = cma_->samples();
    std::size_t lo = 0, hi = n;
    CmaProblem::support(eps_, &lo, &hi);
    double max_e2 = 0.0;
    for (std::size_t q = lo; q < hi; ++q) max_e2 = std::max(max_e2, std::norm(eps_[q]));
    ErrorSums sums;
    for (const std::size_t j : order_) {
      const std::size_t nb = gates_.size();
      // Every node's exit wave from the same eps; one projection of the (interpolated) rows;
      // then one ePIE step per node with its share of the change (one node: plain ePIE).
      for (std::size_t b = 0; b < nb; ++b) {
        gp_[b] = gates_[b].sample_product(j, eps_.data(), g_[b].data(), psi_[b].data(), lo, hi);
        cma_->fft().time_to_freq(psi_[b], spec_[b]);
      }
      if (nb == 1)
        cma_->project(j, spec_[0].data(), sums, scratch_.data());
      else
        cma_->project_bands(j, spec_, state_, sums, scratch_.data(), comb_, before_);
      for (std::size_t b = 0; b < nb; ++b) {
        cma_->fft().freq_to_time(spec_[b], back_);
        const double cg = max_e2 > 0 ? beta_g_ / max_e2 : 0.0;
        max_e2 = update_object(gp_[b], psi_[b], lo, hi, cg);
        gates_[b].update(j, du_.data(), lo, hi);
      }
    }
    const double G = cma_->trace_error(sums);
    if (banded_)
      cma_->constrain(k, eps_, gates_, work_, cover_, state_);
    else
      cma_->constrain(k, eps_, gates_[0], work_, cover_);
    keep_best(G);
    // Node gates started cold stall: each node's probe updates pull A its own way and their
    // average cancels (measured with separate bands: G stays at the flat-gate value on a
    // 38 eV neon train). The nodes therefore start from the one-p0 solution, once it has
    // stopped improving by 2 % per 10 iterations (or after kMaxOneGateIterations).
    history_.push_back(G);
    // With an automatic node count they are added only when the one-p0 fit has stalled
    // above kNodesMinRatio x the noise floor: below it the CMA's coupling error is under the
    // noise (measured at 100 peak counts on neon-150as: nodes took G from 1.05 to 1.02 x the
    // floor but moved A0 by -2 %, three times its bootstrap sigma; docs/validation.md).
    if (!banded_ && stage_note_.empty()) {
      const std::size_t h = history_.size();
      if ((h > 10 && history_[h - 11] - G < 0.02 * G) || h >= kMaxOneGateIterations) {
        if (!forced_bands_ && noise_floor_ > 0 && G <= kNodesMinRatio * noise_floor_) {
          stage_note_ = "not used: the one-p0 fit stalled at G = " + format_g(G) +
                        " <= " + format_g(kNodesMinRatio) + " x the noise floor " +
                        format_g(noise_floor_) + " (iteration " + std::to_string(k) + ")";
        } else {
          gates_ = cma_->band_gates(eps_, gates_[0], state_);
          banded_ = true;
          stage_switch_ = k;
        }
      }
    }
    return record(G);
  }

  Reconstruction finalize() override {
    const bool lines = !modes_.empty();
    Reconstruction r =
        lines ? cma_->reconstruct_lines(best_eps_, best_gates_, modes_, best_amp_, best_delay_)
              : cma_->reconstruct(best_eps_, best_gates_, state_.final_momentum);
    r.momentum_nodes = lines ? 1 : static_cast<int>(best_gates_.size());
    r.settings.emplace_back("momentum_nodes_used", std::to_string(r.momentum_nodes));
    if (lines)
      r.settings.emplace_back("momentum_bands_from_iteration",
                              "never (the lines are fitted jointly: one central momentum each)");
    else if (cma_->bands().size() > 1)
      r.settings.emplace_back(
          "momentum_bands_from_iteration",
          stage_switch_ > 0
              ? std::to_string(stage_switch_ + 1) +
                    (best_gates_.size() == 1 ? " (best estimate from the one-p0 stage)" : "") +
                    (state_.final_momentum ? ", final-momentum frame"
                                           : ", initial-momentum frame") +
                    " (max |A| " + format_g(state_.streaking_shift_au) + " a.u. at the switch)"
          : !stage_note_.empty() ? stage_note_
                                 : std::string("never (the run ended in the one-p0 stage)"));
    r.settings.emplace_back("beta_object", std::to_string(beta_o_));
    r.settings.emplace_back("beta_gate", std::to_string(beta_g_));
    r.settings.emplace_back("delay_order", "random permutation per iteration (seeded)");
    r.settings.emplace_back("threads", "1 (the delays are updated in turn)");
    return r;
  }

 private:
  // Joint lines (LineMode, cma_problem.h): one incoherent exit-wave mode per line, the mixed-state
  // ePIE of P. Thibault and A. Menzel, Nature 494, 68 (2013). Mode 0 is the reference line
  // (probe G_0), mode 1 + l line l (probe P_l = a_l exp(i D_l s) G_l(s + tau + t_l), a_l =
  // sqrt(s_l)). Per delay: every mode's exit wave from the same eps, one joint projection
  // (project_modes), then per mode the ePIE steps with the object normalised by
  // max sum_k |P_k|^2 = 1 + sum_l s_l:
  //   eps += beta_object conj(P_k) d_k / (1 + sum_l s_l),
  //   G_k += beta_gate conj(a_k exp(i D_k s) eps) d_k / (a_k^2 max|eps|^2)   (a_0 = 1, D_0 = 0).
  // Each line's amplitude takes one Gauss-Newton step per sweep on its exit waves, from the sums
  // over the delays of the sweep (psi the mode before the projection, d = psi' - psi):
  //   a_l <- a_l (1 + sum Re(conj(psi) d) / sum |psi|^2)   (factor kept in [0.5, 2]).
  // After the sweep the gates are tied to one A(t) (reconcile_line_gates, weights 1 and s_l),
  // the spectral constraints act on the reference gate, each line's delay takes the step of its
  // least-squares profile (CmaProblem::line_delay_step: the parabola through t_l and
  // t_l +- kProfileStepAs, at most kMaxDelayStepAs), and the line gates are rebuilt from the
  // reference's A at their own central momenta and the new delays. (A Gauss-Newton step on the
  // exit waves, d psi / d t_l = i phi' psi, moved t_l by only ~3 % of its error per sweep: the
  // projection corrects moduli, and a delay error shows mostly in phases.)
  void prepare_lines(const RetrievalProblem& problem) {
    modes_ = cma_->line_modes();
    for (const ExtraLine& e : problem.extra_lines) {
      amp_.push_back(std::sqrt(std::max(e.strength, kMinStrength)));
      delay_.push_back(e.delay_au);
    }
    banded_ = true;  // one gate per line instead of momentum nodes: no second stage
    const std::size_t nm = 1 + modes_.size(), n = cma_->samples();
    g_.assign(nm, CVec(n, 0.0));
    psi_.assign(nm, CVec(n, 0.0));
    spec_.assign(nm, CVec(n, 0.0));
    gp_.assign(nm, nullptr);
    probe_.assign(n, 0.0);
    gn_.assign(2 * modes_.size(), 0.0);
    rebuild_line_gates();
  }

  // Line gates from the reference gate's A (which this also smooths) at the current delays;
  // with `search`, each line's delay first takes its least-squares profile step
  // (CmaProblem::line_delay_step) against the model of the other modes.
  void rebuild_line_gates(bool search = false) {
    std::vector<PhaseGate> line_gates(gates_.begin() + 1, gates_.end());
    gates_.resize(1);
    const std::vector<double> A = cma_->reconcile_line_gates(eps_, gates_, {}, {}, cover_);
    if (search && line_gates.size() == modes_.size()) {
      gates_.insert(gates_.end(), line_gates.begin(), line_gates.end());
      const std::vector<Eigen::MatrixXd> M = cma_->line_model_traces(eps_, gates_, modes_, amp_);
      Eigen::MatrixXd all = M[0];
      for (std::size_t l = 1; l < M.size(); ++l) all += M[l];
      const double h = kProfileStepAs * units::as_to_au(1.0);
      const double max_step = kMaxDelayStepAs * units::as_to_au(1.0);
      for (std::size_t l = 0; l < modes_.size(); ++l)
        delay_[l] = cma_->line_delay_step(eps_, A, gates_[0], modes_[l], all - M[l + 1], delay_[l],
                                          h, max_step);
      gates_.resize(1);
    }
    for (std::size_t l = 0; l < modes_.size(); ++l)
      gates_.push_back(cma_->line_gate(A, gates_[0], modes_[l].p0_au, delay_[l]));
  }

  IterationRecord iterate_lines(int k) {
    std::shuffle(order_.begin(), order_.end(), rng_);
    const std::size_t n = cma_->samples(), nm = gates_.size();
    std::size_t lo = 0, hi = n;
    CmaProblem::support(eps_, &lo, &hi);
    double max_e2 = 0.0;
    for (std::size_t q = lo; q < hi; ++q) max_e2 = std::max(max_e2, std::norm(eps_[q]));
    double probe_power = 1.0;
    for (double a : amp_) probe_power += a * a;
    const double bo = beta_o_ / probe_power;
    std::fill(gn_.begin(), gn_.end(), 0.0);
    const double inv_n = 1.0 / static_cast<double>(n);
    ErrorSums sums;
    for (const std::size_t j : order_) {
      for (std::size_t m = 0; m < nm; ++m) {
        gp_[m] = gates_[m].sample_product(j, eps_.data(), g_[m].data(), psi_[m].data(), lo, hi);
        if (m > 0) {
          const CVec& mod = modes_[m - 1].modulation;
          const double a = amp_[m - 1];
          for (std::size_t q = 0; q < n; ++q) psi_[m][q] *= a * mod[q];
        }
        cma_->fft().time_to_freq(psi_[m], spec_[m]);
      }
      cma_->project_modes(j, spec_, nm, sums, scratch_.data());
      for (std::size_t m = 0; m < nm; ++m) {
        cma_->fft().freq_to_time(spec_[m], back_);
        double cg = max_e2 > 0 ? beta_g_ / max_e2 : 0.0;
        const cdouble* probe = gp_[m];
        if (m > 0) {
          const std::size_t l = m - 1;
          const CVec& mod = modes_[l].modulation;
          const cdouble* g = gp_[m];
          const CVec& psi = psi_[m];
          double* acc = &gn_[2 * l];
          for (std::size_t q = lo; q < hi; ++q) {
            acc[0] += std::real(std::conj(psi[q]) * (back_[q] * inv_n - psi[q]));
            acc[1] += std::norm(psi[q]);
          }
          for (std::size_t q = 0; q < n; ++q) probe_[q] = amp_[l] * mod[q] * g[q];
          probe = probe_.data();
          cg /= amp_[l];
        }
        max_e2 = epie_update(
            reinterpret_cast<const double*>(probe), reinterpret_cast<const double*>(back_.data()),
            reinterpret_cast<const double*>(psi_[m].data()), reinterpret_cast<double*>(eps_.data()),
            reinterpret_cast<double*>(du_.data()), n, lo, hi, bo, cg);
        if (m > 0) {
          const CVec& mod = modes_[m - 1].modulation;
          for (std::size_t q = lo; q < hi; ++q) du_[q] *= std::conj(mod[q]);
        }
        gates_[m].update(j, du_.data(), lo, hi);
      }
    }
    const double G = cma_->trace_error(sums);
    // The lines' amplitudes (one Gauss-Newton step each, bounded).
    for (std::size_t l = 0; l < modes_.size(); ++l) {
      const double* acc = &gn_[2 * l];
      if (acc[1] > 0) amp_[l] *= std::clamp(1.0 + acc[0] / acc[1], 0.5, 2.0);
      amp_[l] = std::max(amp_[l], std::sqrt(kMinStrength));
    }
    // One A(t) for every gate, the spectral constraints on the reference gate, the line gates
    // from its A.
    std::vector<double> strength(amp_.size());
    for (std::size_t l = 0; l < amp_.size(); ++l) strength[l] = amp_[l] * amp_[l];
    (void)cma_->reconcile_line_gates(eps_, gates_, modes_, strength, cover_);
    cma_->constrain(k, eps_, gates_[0], work_, cover_);
    rebuild_line_gates(true);
    keep_best(G);
    return record(G);
  }

  // The estimate of the lowest running trace error so far is the one returned.
  void keep_best(double G) {
    if (!(G < best_)) return;
    best_ = G;
    best_eps_ = eps_;
    best_gates_ = gates_;
    best_amp_ = amp_;
    best_delay_ = delay_;
  }
  IterationRecord record(double G) const {
    IterationRecord r;
    r.trace_error = G;
    r.step_size = beta_o_;
    return r;
  }

  // Returns max |eps|^2 over [lo, hi) after the update.
  double update_object(const cdouble* gp, const CVec& psi, std::size_t lo, std::size_t hi,
                       double cg) {
    return epie_update(
        reinterpret_cast<const double*>(gp), reinterpret_cast<const double*>(back_.data()),
        reinterpret_cast<const double*>(psi.data()), reinterpret_cast<double*>(eps_.data()),
        reinterpret_cast<double*>(du_.data()), cma_->samples(), lo, hi, beta_o_, cg);
  }

  std::optional<CmaProblem> cma_;
  double beta_o_ = PtychographicSettings{}.beta_object, beta_g_ = PtychographicSettings{}.beta_gate;
  std::mt19937_64 rng_;
  std::vector<std::size_t> order_;
  CVec eps_, back_, du_, work_, comb_, before_;
  std::vector<CVec> g_, psi_, spec_;  // per momentum node
  std::vector<const cdouble*> gp_;
  std::vector<double> cover_, scratch_;
  static constexpr std::size_t kMaxOneGateIterations = 100;
  static constexpr double kNodesMinRatio = 1.1;  // common practice (see iterate())
  double noise_floor_ = 0.0;
  bool forced_bands_ = false;
  std::string stage_note_;
  // One gate per momentum node (CmaProblem::bands()) once banded_, before that the one-p0 gate.
  std::vector<PhaseGate> gates_;
  bool banded_ = false;
  int stage_switch_ = 0;
  std::vector<double> history_;
  BandState state_;  // the frame is chosen once, at the switch
  CVec best_eps_;
  std::vector<PhaseGate> best_gates_;
  double best_ = 0.0;
  // Joint lines (empty: one line): the modes, amplitudes a_l = sqrt(s_l), delays t_l (a.u.), the
  // probe buffer of a line mode and the Gauss-Newton sums (4 per line).
  std::vector<LineMode> modes_;
  std::vector<double> amp_, delay_, best_amp_, best_delay_, gn_;
  CVec probe_;
  // The delay profile's trial step and the bound of one sweep's delay step (common practice: a
  // step well below the XUV's duration keeps the parabola a local model of the profile), and
  // the smallest strength kept.
  static constexpr double kMaxDelayStepAs = 10.0;
  static constexpr double kProfileStepAs = 3.0;
  static constexpr double kMinStrength = 1e-4;
};

}  // namespace

int ptychographic_momentum_nodes(const RetrievalProblem& problem,
                                 const PtychographicSettings& settings) {
  const PtychographicSettings& ps = validated_settings(settings, "ptychographic");
  if (ps.joint_lines && !problem.extra_lines.empty()) return 1;
  return static_cast<int>(CmaProblem(problem, ps.cma, "ptychographic").bands().size());
}

std::unique_ptr<Engine> make_ptychographic_engine() {
  return std::make_unique<PtychographicEngine>();
}

}  // namespace sw
