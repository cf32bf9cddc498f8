#include "retrieval/ptychographic_engine.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>
#include <random>

#include "retrieval/cma_problem.h"
#include "retrieval/error.h"
#include "retrieval/gate.h"
#include "retrieval/hot_loop.h"

namespace sw {

namespace {

// The ePIE updates of one delay, d = psi' - psi = back / N - psi:
//   eps += bo conj(G) d / max|G|^2 (= 1) on every sample;
//   U = cg conj(eps) d (cg = beta_gate / max|eps|^2, eps before this update) on [lo, hi).
SW_HOT_LOOP void epie_update(const double* G, const double* B, const double* P, double* E,
                             double* U, std::size_t n, std::size_t lo, std::size_t hi, double bo,
                             double cg) {
  const double inv_n = 1.0 / static_cast<double>(n);
#pragma omp simd
  for (std::size_t q = 0; q < lo; ++q) {
    const double dr = B[2 * q] * inv_n - P[2 * q], di = B[2 * q + 1] * inv_n - P[2 * q + 1];
    const double gr = G[2 * q], gi = G[2 * q + 1];
    E[2 * q] += bo * (gr * dr + gi * di);
    E[2 * q + 1] += bo * (gr * di - gi * dr);
  }
#pragma omp simd
  for (std::size_t q = lo; q < hi; ++q) {
    const double dr = B[2 * q] * inv_n - P[2 * q], di = B[2 * q + 1] * inv_n - P[2 * q + 1];
    const double er = E[2 * q], ei = E[2 * q + 1], gr = G[2 * q], gi = G[2 * q + 1];
    E[2 * q] = er + bo * (gr * dr + gi * di);
    E[2 * q + 1] = ei + bo * (gr * di - gi * dr);
    U[2 * q] = cg * (er * dr + ei * di);
    U[2 * q + 1] = cg * (er * di - ei * dr);
  }
#pragma omp simd
  for (std::size_t q = hi; q < n; ++q) {
    const double dr = B[2 * q] * inv_n - P[2 * q], di = B[2 * q + 1] * inv_n - P[2 * q + 1];
    const double gr = G[2 * q], gi = G[2 * q + 1];
    E[2 * q] += bo * (gr * dr + gi * di);
    E[2 * q + 1] += bo * (gr * di - gi * dr);
  }
}

class PtychographicEngine final : public Engine {
 public:
  std::string name() const override { return "ptychographic"; }
  std::string description() const override {
    return "ePIE on the streaking trace (CMA): XUV as object, unit-modulus phase gate as probe";
  }
  std::string reference() const override {
    return "A. M. Maiden and J. M. Rodenburg, Ultramicroscopy 109, 1256 (2009); M. Lucchini et "
           "al., Opt. Express 23, 29502 (2015)";
  }
  std::vector<ExtraOption> extra_options() const override {
    using K = ExtraOption::Kind;
    std::vector<ExtraOption> o = {
        {"beta_object",
         K::kNumber,
         "0.1",
         "ePIE step size of the XUV (object) update",
         1e-6,
         2,
         {}},
        {"beta_gate", K::kNumber, "1.5", "ePIE step size of the gate (probe) update", 0, 2, {}},
    };
    for (auto& e : cma_extra_options()) o.push_back(e);
    return o;
  }

  void prepare(const RetrievalProblem& problem, const EngineOptions& options) override {
    cma_.emplace(problem, read_cma_settings(options), name());
    beta_o_ = options.extra_double("beta_object", kBetaObject);
    beta_g_ = options.extra_double("beta_gate", kBetaGate);
    rng_.seed(options.seed);
    const std::size_t n = cma_->samples();
    eps_ = cma_->initial_xuv(options);
    gate_ = cma_->initial_gate(options);
    order_.resize(cma_->num_delays());
    for (std::size_t j = 0; j < order_.size(); ++j) order_[j] = j;
    g_.assign(n, 0.0);
    psi_.assign(n, 0.0);
    spec_.assign(n, 0.0);
    back_.assign(n, 0.0);
    du_.assign(n, 0.0);
    work_.assign(n, 0.0);
    scratch_.assign(cma_->scratch_size(), 0.0);
    best_eps_ = eps_;
    best_gate_ = gate_;
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
      const cdouble* gp = gate_.sample_product(j, eps_.data(), g_.data(), psi_.data(), lo, hi);
      cma_->fft().time_to_freq(psi_, spec_);
      cma_->project(j, spec_.data(), sums, scratch_.data());
      cma_->fft().freq_to_time(spec_, back_);
      update_object(gp, lo, hi, max_e2 > 0 ? beta_g_ / max_e2 : 0.0);
      gate_.update(j, du_.data(), lo, hi);
      max_e2 = 0.0;
      for (std::size_t q = lo; q < hi; ++q) max_e2 = std::max(max_e2, std::norm(eps_[q]));
    }
    const double G = cma_->trace_error(sums);
    cma_->constrain(k, eps_, gate_, work_, cover_);
    if (G < best_) {
      best_ = G;
      best_eps_ = eps_;
      best_gate_ = gate_;
    }
    IterationRecord r;
    r.trace_error = G;
    r.step_size = beta_o_;
    return r;
  }

  Reconstruction finalize() override {
    Reconstruction r = cma_->reconstruct(best_eps_, best_gate_);
    r.settings.emplace_back("beta_object", std::to_string(beta_o_));
    r.settings.emplace_back("beta_gate", std::to_string(beta_g_));
    r.settings.emplace_back("delay_order", "random permutation per iteration (seeded)");
    r.settings.emplace_back("threads", "1 (the delays are updated in turn)");
    return r;
  }

 private:
  void update_object(const cdouble* gp, std::size_t lo, std::size_t hi, double cg) {
    epie_update(reinterpret_cast<const double*>(gp), reinterpret_cast<const double*>(back_.data()),
                reinterpret_cast<const double*>(psi_.data()),
                reinterpret_cast<double*>(eps_.data()), reinterpret_cast<double*>(du_.data()),
                cma_->samples(), lo, hi, beta_o_, cg);
  }

  std::optional<CmaProblem> cma_;
  static constexpr double kBetaObject = 0.1, kBetaGate = 1.5;
  double beta_o_ = kBetaObject, beta_g_ = kBetaGate;
  std::mt19937_64 rng_;
  std::vector<std::size_t> order_;
  CVec eps_, g_, psi_, spec_, back_, du_, work_;
  std::vector<double> cover_, scratch_;
  PhaseGate gate_;
  CVec best_eps_;
  PhaseGate best_gate_;
  double best_ = 0.0;
};

}  // namespace

std::unique_ptr<Engine> make_ptychographic_engine() {
  return std::make_unique<PtychographicEngine>();
}

}  // namespace sw
