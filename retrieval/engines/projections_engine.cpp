#include "retrieval/engines/projections_engine.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>

#include <omp.h>

#include "retrieval/core/error.h"
#include "retrieval/core/hot_loop.h"
#include "retrieval/engines/cma_problem.h"
#include "retrieval/physics/gate.h"

namespace sw {

namespace {

enum class GpMode { kPcgpa, kLsgpa };

// A uniform delay axis whose step is an integer multiple of the grid step (the matched grid of
// PCGPA); the gate table is anchored on the first delay, so uniform steps of r dt are shifts.
bool matched_grid(const std::vector<double>& tau, double dt) {
  if (tau.size() < 2) return false;
  const double step = (tau.back() - tau.front()) / static_cast<double>(tau.size() - 1);
  const double r = std::round(step / dt);
  if (r < 1 || std::abs(step - r * dt) > 1e-6 * dt) return false;
  for (std::size_t j = 1; j < tau.size(); ++j)
    if (std::abs(tau[j] - tau[j - 1] - step) > 1e-6 * dt) return false;
  return true;
}

// X <- X / N (the projected exit wave), num += conj(G) X, den += |G|^2.
SW_HOT_LOOP void accumulate_object(const double* G, double* X, double* num, double* den,
                                   std::size_t n, double inv_n) {
#pragma omp simd
  for (std::size_t q = 0; q < n; ++q) {
    const double xr = X[2 * q] * inv_n, xi = X[2 * q + 1] * inv_n;
    const double gr = G[2 * q], gi = G[2 * q + 1];
    X[2 * q] = xr;
    X[2 * q + 1] = xi;
    num[2 * q] += gr * xr + gi * xi;
    num[2 * q + 1] += gr * xi - gi * xr;
    den[q] += gr * gr + gi * gi;
  }
}

// U = conj(E) X on [lo, hi).
SW_HOT_LOOP void conj_product(const double* E, const double* X, double* U, std::size_t lo,
                              std::size_t hi) {
#pragma omp simd
  for (std::size_t q = lo; q < hi; ++q) {
    const double er = E[2 * q], ei = E[2 * q + 1], xr = X[2 * q], xi = X[2 * q + 1];
    U[2 * q] = er * xr + ei * xi;
    U[2 * q + 1] = er * xi - ei * xr;
  }
}

class ProjectionsEngine final : public Engine {
 public:
  std::string name() const override { return "projections"; }
  std::string description() const override {
    return "generalized projections (PCGPA on a matched delay grid, else LSGPA), CMA";
  }
  std::string reference() const override {
    return "D. J. Kane, IEEE J. Sel. Top. Quantum Electron. 4, 278 (1998); Y. Mairesse and F. "
           "Quere, Phys. Rev. A 71, 011401(R) (2005); P. Gagnon, E. Goulielmakis and V. S. "
           "Yakovlev, Appl. Phys. B 92, 25 (2008)";
  }
  void prepare(const RetrievalProblem& problem, const EngineOptions& options) override {
    const ProjectionsSettings& ps = validated_settings(options.settings.projections, name());
    cma_.emplace(problem, ps.cma, name());
    const std::string& mode = ps.mode;
    const bool matched = matched_grid(problem.delay_au, problem.grid.dt());
    if (mode == "pcgpa" && !matched)
      throw usage_error(
          "projections: mode = pcgpa needs a matched grid (a uniform delay axis whose step is an "
          "integer multiple of the XUV grid step " +
          std::to_string(problem.grid.dt()) + " a.u.); use mode = lsgpa or auto");
    mode_ = mode == "lsgpa" || (mode == "auto" && !matched) ? GpMode::kLsgpa : GpMode::kPcgpa;
    threads_ = std::max(1, options.threads);
    omega_ = ps.gate_relaxation;
    const std::size_t n = cma_->samples(), nd = cma_->num_delays();
    eps_ = cma_->initial_xuv(options);
    gate_ = cma_->initial_gate(options);
    const std::size_t M = gate_.size();
    exit_.assign(nd * n, 0.0);
    per_thread_.resize(static_cast<std::size_t>(threads_));
    for (auto& t : per_thread_) {
      for (CVec* v : {&t.g, &t.psi, &t.spec, &t.u, &t.num}) v->assign(n, 0.0);
      t.den.assign(n, 0.0);
      t.acc.assign(M, 0.0);
      t.scratch.assign(cma_->scratch_size(), 0.0);
    }
    work_.assign(n, 0.0);
    best_eps_ = eps_;
    best_gate_ = gate_;
    best_ = std::numeric_limits<double>::infinity();
  }

  IterationRecord iterate(int k) override {
    const std::size_t n = cma_->samples(), nd = cma_->num_delays();
    const std::size_t M = gate_.size();
    const double inv_n = 1.0 / static_cast<double>(n);
    ErrorSums total;
    std::size_t lo = 0, hi = n;
    CmaProblem::support(eps_, &lo, &hi);
    // 1. Projected exit waves psi'_j and the eps numerator sum_j conj(G_j) psi'_j.
#pragma omp parallel num_threads(threads_) if (threads_ > 1)
    {
      Work& w = per_thread_[static_cast<std::size_t>(omp_get_thread_num())];
      std::fill(w.num.begin(), w.num.end(), 0.0);
      std::fill(w.den.begin(), w.den.end(), 0.0);
      ErrorSums sums;
#pragma omp for schedule(static)
      for (std::size_t j = 0; j < nd; ++j) {
        const cdouble* gp = gate_.sample_product(j, eps_.data(), w.g.data(), w.psi.data(), lo, hi);
        cma_->fft().time_to_freq(w.psi, w.spec);
        cma_->project(j, w.spec.data(), sums, w.scratch.data());
        cdouble* out = exit_.data() + j * n;
        cma_->fft().freq_to_time(w.spec.data(), out);
        accumulate_object(reinterpret_cast<const double*>(gp), reinterpret_cast<double*>(out),
                          reinterpret_cast<double*>(w.num.data()), w.den.data(), n, inv_n);
      }
#pragma omp critical
      total.add(sums);
    }
    // 2. eps update.
    CVec& num = per_thread_[0].num;
    std::vector<double>& den = per_thread_[0].den;
    for (std::size_t t = 1; t < per_thread_.size(); ++t)
      for (std::size_t q = 0; q < n; ++q) {
        num[q] += per_thread_[t].num[q];
        den[q] += per_thread_[t].den[q];
      }
    if (mode_ == GpMode::kPcgpa) eps_old_ = eps_;
    if (mode_ == GpMode::kLsgpa) {
      for (std::size_t q = 0; q < n; ++q) eps_[q] = den[q] > 0 ? num[q] / den[q] : 0.0;
    } else {
      // Power-method step eps <- O conj(G), divided by the number of delays (which keeps the
      // measured scale; with |G| = 1 this equals the least-squares eps on a matched grid).
      const double c = 1.0 / static_cast<double>(nd);
      for (std::size_t q = 0; q < n; ++q) eps_[q] = num[q] * c;
    }
    // 3. Gate: phase of sum_j conj(eps) psi'_j scattered onto the table (transpose weights).
    //    PCGPA takes the previous eps (simultaneous power step); LSGPA the new one.
    const CVec& e = mode_ == GpMode::kLsgpa ? eps_ : eps_old_;
    CmaProblem::support(e, &lo, &hi);
#pragma omp parallel num_threads(threads_) if (threads_ > 1)
    {
      Work& w = per_thread_[static_cast<std::size_t>(omp_get_thread_num())];
      std::fill(w.acc.begin(), w.acc.end(), 0.0);
      const double* Ev = reinterpret_cast<const double*>(e.data());
      double* U = reinterpret_cast<double*>(w.u.data());
#pragma omp for schedule(static)
      for (std::size_t j = 0; j < nd; ++j) {
        const double* X = reinterpret_cast<const double*>(exit_.data() + j * n);
        conj_product(Ev, X, U, lo, hi);
        gate_.scatter(j, w.u.data(), w.acc.data(), lo, hi);
      }
    }
    CVec& acc = per_thread_[0].acc;
    for (std::size_t t = 1; t < per_thread_.size(); ++t)
      for (std::size_t m = 0; m < M; ++m) acc[m] += per_thread_[t].acc[m];
    // Unit-modulus least-squares gate per node: the phase of acc (nodes no delay constrains,
    // acc ~ 0, keep their value through a small admixture of the old gate), over-relaxed:
    // G <- unit(G + omega (G_ls - G)).
    double amax2 = 0.0;
    for (const cdouble& a : acc) amax2 = std::max(amax2, std::norm(a));
    const double keep = 1e-6 * std::sqrt(amax2);
    CVec& T = gate_.table();
    for (std::size_t m = 0; m < M; ++m) acc[m] += keep * T[m];
    normalize_to_unit(acc.data(), M);
    for (std::size_t m = 0; m < M; ++m) T[m] += omega_ * (acc[m] - T[m]);
    gate_.normalize();

    const double G = cma_->trace_error(total);
    cma_->constrain(k, eps_, gate_, work_, cover_);
    if (G < best_) {
      best_ = G;
      best_eps_ = eps_;
      best_gate_ = gate_;
    }
    IterationRecord r;
    r.trace_error = G;
    r.step_size = 1.0;
    return r;
  }

  Reconstruction finalize() override {
    Reconstruction r = cma_->reconstruct(best_eps_, best_gate_);
    r.settings.emplace_back("mode", mode_ == GpMode::kPcgpa ? "pcgpa" : "lsgpa");
    r.settings.emplace_back("threads", std::to_string(threads_));
    r.settings.emplace_back("gate_relaxation", std::to_string(omega_));
    return r;
  }

 private:
  struct Work {
    CVec g, psi, spec, u, num, acc;
    std::vector<double> den, scratch;
  };
  std::optional<CmaProblem> cma_;
  GpMode mode_ = GpMode::kLsgpa;
  double omega_ = ProjectionsSettings{}.gate_relaxation;
  int threads_ = 1;
  CVec eps_, eps_old_, exit_, work_;
  std::vector<Work> per_thread_;
  std::vector<double> cover_;
  PhaseGate gate_;
  CVec best_eps_;
  PhaseGate best_gate_;
  double best_ = 0.0;
};

}  // namespace

std::unique_ptr<Engine> make_projections_engine() { return std::make_unique<ProjectionsEngine>(); }

}  // namespace sw
