#include "retrieval/ptychographic_engine.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>
#include <random>

#include "retrieval/cma_problem.h"
#include "retrieval/error.h"
#include "retrieval/gate.h"

namespace sw {

namespace {

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
        {"beta_object", K::kNumber, "0.25", "ePIE step size of the XUV (object) update", 1e-6, 2,
         {}},
        {"beta_gate", K::kNumber, "1", "ePIE step size of the gate (probe) update", 0, 2, {}},
    };
    for (auto& e : cma_extra_options()) o.push_back(e);
    return o;
  }

  void prepare(const RetrievalProblem& problem, const EngineOptions& options) override {
    cma_.emplace(problem, read_cma_settings(options), name());
    beta_o_ = options.extra_double("beta_object", 0.25);
    beta_g_ = options.extra_double("beta_gate", 1.0);
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
    best_eps_ = eps_;
    best_gate_ = gate_;
    best_ = std::numeric_limits<double>::infinity();
  }

  IterationRecord iterate(int k) override {
    const CmaSettings& s = cma_->settings();
    std::shuffle(order_.begin(), order_.end(), rng_);
    const std::size_t n = cma_->samples();
    const double inv_n = 1.0 / static_cast<double>(n);
    double max_e2 = 0.0;
    for (const cdouble& e : eps_) max_e2 = std::max(max_e2, std::norm(e));
    ErrorSums sums;
    for (const std::size_t j : order_) {
      const cdouble* gp = gate_.exact_samples(j);
      if (!gp) {
        gate_.sample(j, g_.data());
        gp = g_.data();
      }
      const double* G = reinterpret_cast<const double*>(gp);
      double* E = reinterpret_cast<double*>(eps_.data());
      double* P = reinterpret_cast<double*>(psi_.data());
#pragma omp simd
      for (std::size_t q = 0; q < n; ++q) {
        const double er = E[2 * q], ei = E[2 * q + 1], gr = G[2 * q], gi = G[2 * q + 1];
        P[2 * q] = er * gr - ei * gi;
        P[2 * q + 1] = er * gi + ei * gr;
      }
      cma_->fft().time_to_freq(psi_, spec_);
      cma_->project(j, spec_.data(), sums);
      cma_->fft().freq_to_time(spec_, back_);
      // eps += bo conj(G) d / max|G|^2 (= 1);  dG = bg conj(eps) d / max|eps|^2.
      const double bo = beta_o_, cg = max_e2 > 0 ? beta_g_ / max_e2 : 0.0;
      const double* B = reinterpret_cast<const double*>(back_.data());
      double* U = reinterpret_cast<double*>(du_.data());
      double next_max = 0.0;
#pragma omp simd reduction(max : next_max)
      for (std::size_t q = 0; q < n; ++q) {
        const double dr = B[2 * q] * inv_n - P[2 * q], di = B[2 * q + 1] * inv_n - P[2 * q + 1];
        const double er = E[2 * q], ei = E[2 * q + 1], gr = G[2 * q], gi = G[2 * q + 1];
        const double nr = er + bo * (gr * dr + gi * di), ni = ei + bo * (gr * di - gi * dr);
        E[2 * q] = nr;
        E[2 * q + 1] = ni;
        U[2 * q] = cg * (er * dr + ei * di);
        U[2 * q + 1] = cg * (er * di - ei * dr);
        next_max = std::max(next_max, nr * nr + ni * ni);
      }
      max_e2 = next_max;
      gate_.update(j, du_.data());
    }
    const double G = cma_->trace_error(sums);
    if (s.spectrum_interval > 0 && k % s.spectrum_interval == 0) {
      cma_->align_spectrum(eps_, gate_, work_);
      cma_->impose_spectrum(eps_, work_);
    }
    if (s.gate_smoothing_interval > 0 && k % s.gate_smoothing_interval == 0) {
      gate_.coverage(eps_, cover_);
      gate_.smooth(cover_);
    }
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
    return r;
  }

 private:
  std::optional<CmaProblem> cma_;
  double beta_o_ = 0.25, beta_g_ = 1.0;
  std::mt19937_64 rng_;
  std::vector<std::size_t> order_;
  CVec eps_, g_, psi_, spec_, back_, du_, work_;
  std::vector<double> cover_;
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
