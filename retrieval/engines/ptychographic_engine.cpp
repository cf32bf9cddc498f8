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
#include "retrieval/core/hot_loop.h"
#include "retrieval/engines/cma_problem.h"
#include "retrieval/physics/gate.h"

namespace sw {

namespace {

// The ePIE updates of one delay, d = psi' - psi = back / N - psi:
//   eps += bo conj(G) d / max|G|^2 (= 1) on every sample;
//   U = cg conj(eps) d (cg = beta_gate / max|eps|^2, eps before this update) on [lo, hi).
// Returns max |E|^2 over [lo, hi) after the update (the next step's object normalisation).
SW_HOT_LOOP double epie_update(const double* G, const double* B, const double* P, double* E,
                               double* U, std::size_t n, std::size_t lo, std::size_t hi, double bo,
                               double cg) {
  double max_e2 = 0.0;
  const double inv_n = 1.0 / static_cast<double>(n);
#pragma omp simd
  for (std::size_t q = 0; q < lo; ++q) {
    const double dr = B[2 * q] * inv_n - P[2 * q], di = B[2 * q + 1] * inv_n - P[2 * q + 1];
    const double gr = G[2 * q], gi = G[2 * q + 1];
    E[2 * q] += bo * (gr * dr + gi * di);
    E[2 * q + 1] += bo * (gr * di - gi * dr);
  }
#pragma omp simd reduction(max : max_e2)
  for (std::size_t q = lo; q < hi; ++q) {
    const double dr = B[2 * q] * inv_n - P[2 * q], di = B[2 * q + 1] * inv_n - P[2 * q + 1];
    const double er = E[2 * q], ei = E[2 * q + 1], gr = G[2 * q], gi = G[2 * q + 1];
    const double nr = er + bo * (gr * dr + gi * di), ni = ei + bo * (gr * di - gi * dr);
    E[2 * q] = nr;
    E[2 * q + 1] = ni;
    U[2 * q] = cg * (er * dr + ei * di);
    U[2 * q + 1] = cg * (er * di - ei * dr);
    max_e2 = std::max(max_e2, nr * nr + ni * ni);
  }
#pragma omp simd
  for (std::size_t q = hi; q < n; ++q) {
    const double dr = B[2 * q] * inv_n - P[2 * q], di = B[2 * q + 1] * inv_n - P[2 * q + 1];
    const double gr = G[2 * q], gi = G[2 * q + 1];
    E[2 * q] += bo * (gr * dr + gi * di);
    E[2 * q + 1] += bo * (gr * di - gi * dr);
  }
  return max_e2;
}

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
    best_eps_ = eps_;
    best_gates_ = gates_;
    best_ = std::numeric_limits<double>::infinity();
  }

  IterationRecord iterate(int k) override {
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
    if (G < best_) {
      best_ = G;
      best_eps_ = eps_;
      best_gates_ = gates_;
    }
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
    IterationRecord r;
    r.trace_error = G;
    r.step_size = beta_o_;
    return r;
  }

  Reconstruction finalize() override {
    Reconstruction r = cma_->reconstruct(best_eps_, best_gates_, state_.final_momentum);
    r.momentum_nodes = static_cast<int>(best_gates_.size());
    r.settings.emplace_back("momentum_nodes_used", std::to_string(best_gates_.size()));
    if (cma_->bands().size() > 1)
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
};

}  // namespace

std::unique_ptr<Engine> make_ptychographic_engine() {
  return std::make_unique<PtychographicEngine>();
}

}  // namespace sw
