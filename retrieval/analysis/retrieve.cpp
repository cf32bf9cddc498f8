#include "retrieval/analysis/retrieve.h"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <functional>
#include <future>
#include <memory>
#include <mutex>
#include <numeric>
#include <optional>
#include <sstream>

#include "retrieval/analysis/classifier.h"
#include "retrieval/analysis/multi_line_fit.h"
#include "retrieval/analysis/quality.h"
#include "retrieval/analysis/thread_pool.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/statistics.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/full_model_laplace.h"
#include "retrieval/engines/ptychographic_engine.h"
#include "retrieval/physics/pulse_metrics.h"
#include "retrieval/physics/satellite_seed.h"

namespace sw {

std::string RetrieveOptions::validate() const {
  if (std::string e = validate_described(*this); !e.empty()) return e;
  std::ostringstream s;
  if (!(satellite_ratio.isolated_max < satellite_ratio.satellites_max))
    s << "satellite thresholds " << satellite_ratio.isolated_max << ", "
      << satellite_ratio.satellites_max << ": need 0 < isolated < satellites <= 1";
  else if (auto e1 = preprocess.validate(); !e1.empty())
    s << "preprocess." << e1;
  else if (auto e2 = quality.validate(); !e2.empty())
    s << "quality." << e2;
  else if (auto e3 = line_delays.validate(); !e3.empty())
    s << "line_delays." << e3;
  return s.str();
}

double envelope_fwhm(const std::vector<double>& x, double dt) {
  const std::size_t n0 = x.size();
  if (n0 < 8) return 0.0;
  const std::size_t n = good_fft_size(2 * n0);
  CVec a(n, 0.0), s(n);
  for (std::size_t i = 0; i < n0; ++i) a[i] = x[i];
  const Fft fft(n);
  fft.freq_to_time(a, s);  // any sign: keep one half of the spectrum -> analytic signal
  for (std::size_t k = 1; k < n; ++k) {
    if (k < n / 2)
      s[k] *= 2.0;
    else if (k > n / 2)
      s[k] = 0.0;
  }
  fft.time_to_freq(s, a);
  std::vector<double> t(n0), env(n0);
  for (std::size_t i = 0; i < n0; ++i) {
    t[i] = static_cast<double>(i) * dt;
    env[i] = std::norm(a[i]) / static_cast<double>(n) / static_cast<double>(n);
  }
  return fwhm(t, env);
}

PulseMetrics pulse_metrics(const Reconstruction& r, double ir_omega_au, double lo, double hi) {
  PulseMetrics m;
  const bool band = hi > lo;
  if (band) m.energy_outside_support = spectral_energy_outside(r.xuv, lo, hi);
  const XuvField x = band ? within_band(r.xuv, lo, hi) : r.xuv;
  m.xuv.fwhm_as = units::au_to_as(intensity_fwhm(x));
  m.xuv.transform_limited_fwhm_as = units::au_to_as(transform_limited_fwhm(x));
  {
    const std::vector<double> t = x.grid().times(), I = x.intensity();
    m.xuv.rms_duration_as = units::au_to_as(rms_width(t, I));
  }
  const SpectralPhaseFit fit = fit_spectral_phase(x);
  m.xuv.gdd_as2 = units::au_to_as2(fit.gdd);
  m.xuv.tod_as3 = units::au_to_as3(fit.tod);
  m.xuv.center_photon_energy_eV = units::au_to_eV(fit.center_photon_energy);
  m.xuv.bandwidth_fwhm_eV = units::au_to_eV(fit.bandwidth_fwhm);
  const BurstStructure b = burst_structure(x, units::period_au(ir_omega_au));
  m.satellite_intensity_ratio = b.satellite_intensity_ratio;
  m.main_burst_energy_fraction = b.main_burst_energy_fraction;
  m.comparable_bursts = b.comparable_bursts;

  const IrField& ir = r.ir;
  if (ir.size() >= 8) {
    m.ir.peak_vector_potential_au = ir.peak_vector_potential();
    m.ir.peak_intensity_Wcm2 = units::peak_field_au_to_intensity(ir.peak_electric_field());
    // Wavelength from the peak of the power spectrum of E(t) = -dA/dt (zero-padded 8x, peak
    // searched between 0.3 and 3 x the sidecar's IR frequency and refined by a parabola through log
    // |E~|^2): unlike counting zero crossings of A(t), noise wiggles in a low-count retrieval do
    // not shorten it.
    {
      const std::vector<double> Ef = ir.electric_field();
      const std::size_t n0 = Ef.size();
      const std::size_t nf = good_fft_size(8 * n0);
      CVec in(nf, 0.0), spec(nf);
      for (std::size_t i = 0; i < n0; ++i) in[i] = Ef[i];
      Fft(nf).time_to_freq(in, spec);
      // Search between 0.3 and 3 times the sidecar's frequency: wide enough to see a field
      // locked onto 2 omega, narrow enough to ignore the noise of a low-count retrieval.
      const double dwf = units::kTwoPi / (static_cast<double>(nf) * ir.dt());
      const std::size_t k_lo =
          std::max<std::size_t>(1, static_cast<std::size_t>(0.3 * ir_omega_au / dwf));
      const std::size_t k_hi =
          std::min<std::size_t>(nf / 2 - 1, static_cast<std::size_t>(3.0 * ir_omega_au / dwf) + 1);
      std::size_t kmax = k_lo;
      for (std::size_t k = k_lo; k <= k_hi; ++k)
        if (std::norm(spec[k]) > std::norm(spec[kmax])) kmax = k;
      double k = static_cast<double>(kmax);
      if (kmax > 1 && kmax + 1 < nf / 2) {
        const double a = std::log(std::norm(spec[kmax - 1]) + 1e-300),
                     b0 = std::log(std::norm(spec[kmax]) + 1e-300),
                     c = std::log(std::norm(spec[kmax + 1]) + 1e-300);
        const double den = a - 2 * b0 + c;
        if (den < 0) k += std::clamp(0.5 * (a - c) / den, -0.5, 0.5);
      }
      const double w = dwf * k;
      if (w > 0 && ir.peak_vector_potential() > 0)
        m.ir.wavelength_nm = units::omega_au_to_wavelength_nm(w);
    }
    const std::vector<double> E = ir.electric_field();
    const double f = envelope_fwhm(E, ir.dt());
    if (f > 0) m.ir.fwhm_fs = units::au_to_fs(f);
  }
  return m;
}

void fix_time_origin(Reconstruction& r) {
  const std::vector<double> t = r.xuv.grid().times(), I = r.xuv.intensity();
  double num = 0, den = 0;
  for (std::size_t i = 0; i < t.size(); ++i) {
    num += t[i] * I[i];
    den += I[i];
  }
  if (!(den > 0)) return;
  const double sc = num / den;
  if (std::abs(sc) < 1e-9) return;
  // eps'(s) = eps(s + sc): multiply the spectrum by exp(-i w sc).
  const TimeGrid& g = r.xuv.grid();
  CVec spec = r.xuv.spectrum();
  for (std::size_t j = 0; j < spec.size(); ++j)
    spec[j] *= std::polar(1.0, -g.omega_centered(j) * sc);
  r.xuv = XuvField::from_spectrum(g, r.xuv.carrier_au(), spec);
  if (r.ir.size() >= 5) r.ir = IrField(r.ir.t0() - sc, r.ir.dt(), r.ir.vector_potential());
}

double cma_phase_error(const IrField& ir, double p0, double lo, double hi, double t_first,
                       double t_last) {
  double mn = 1e300, mx = -1e300;
  const int n = 2000;
  for (int i = 0; i <= n; ++i) {
    const double I1 = ir.at(t_first + (t_last - t_first) * i / n).I1;
    mn = std::min(mn, I1);
    mx = std::max(mx, I1);
  }
  const double dp =
      std::max(std::abs(units::momentum_au(hi) - p0), std::abs(p0 - units::momentum_au(lo)));
  return dp * 0.5 * (mx - mn);
}

namespace {

double stddev(const std::vector<double>& v) {
  if (v.size() < 2) return 0.0;
  const double m = std::accumulate(v.begin(), v.end(), 0.0) / static_cast<double>(v.size());
  double s = 0;
  for (double x : v) s += (x - m) * (x - m);
  return std::sqrt(s / static_cast<double>(v.size() - 1));
}

// The four numbers a replica contributes: FWHM (as), GDD (as^2), peak A (a.u.), satellite ratio.
std::array<double, 4> replica_metrics(const PulseMetrics& bm) {
  return {*bm.xuv.fwhm_as, *bm.xuv.gdd_as2, bm.ir.peak_vector_potential_au.value_or(0.0),
          bm.satellite_intensity_ratio};
}

// Linearised replicas of a full-model estimate (retrieval/engines/full_model_laplace.h), one
// per call of run(b) from any worker thread, `done` after each. A replica's numbers are the
// estimate's plus the move of the linearised replica from the linearisation point (so that the
// re-encoding does not read as a bias), centred on the estimate by finish(): the replicas have
// zero mean to first order, and their mean move (second order, and with a few replicas mostly
// noise) is no estimate of the retrieval's bias, so bootstrap_estimate's bias rule must not act
// on it. The LaplaceReplicas are built by the first run() (replica 0's solve builds the
// preconditioner the others use); a run(b) that comes while that is under way waits for it.
struct LaplaceSamples {
  std::vector<std::array<double, 4>> samples;
  std::string failure;  // empty: every replica made
  int cg_iterations_max = 0;
};
class LaplaceSampler {
 public:
  LaplaceSampler(const RetrievalProblem& pr, const EngineOptions& eo, const Reconstruction& rec,
                 const PulseMetrics& m, double lo, double hi, const RetrieveOptions& opt,
                 std::function<void()> done)
      : pr_(pr),
        eo_(eo),
        rec_(rec),
        lo_(lo),
        hi_(hi),
        seed_(opt.seed),
        done_(std::move(done)),
        m0_(replica_metrics(m)),
        reps_(static_cast<std::size_t>(opt.bootstrap)) {
    samples_.assign(reps_.size(), m0_);
  }

  void run(int b) {
    std::call_once(built_, [&] {
      LaplaceOptions lopt;
      lopt.seed = seed_;
      lap_ = std::make_unique<const LaplaceReplicas>(pr_, eo_, rec_, lopt);
      if (lap_->ok())
        mc_ = replica_metrics(pulse_metrics(lap_->centre(), pr_.ir_omega_au, lo_, hi_));
    });
    LaplaceReplica& rb = reps_[static_cast<std::size_t>(b)];
    // After a failure the full bootstrap will run: replicas not yet started are skipped.
    if (!lap_->ok() || failed_) {
      rb.failure = "skipped";
      return;
    }
    rb = lap_->replica(b);
    if (rb.ok) {
      const std::array<double, 4> mb =
          replica_metrics(pulse_metrics(rb.fields, pr_.ir_omega_au, lo_, hi_));
      for (std::size_t k = 0; k < 4; ++k)
        samples_[static_cast<std::size_t>(b)][k] = m0_[k] + (mb[k] - mc_[k]);
    } else {
      failed_ = true;
    }
    done_();
  }

  // After every run(b): the samples, or the reason they cannot be used (the construction's
  // failure, else that of the lowest failed replica, which does not depend on the thread count:
  // a replica's failure is a property of its own draw, and every replica below the first
  // failure by index has started before it).
  LaplaceSamples finish() {
    LaplaceSamples out;
    if (!lap_) {
      out.failure = "no replica ran";
      return out;
    }
    out.failure = lap_->failure();
    if (!lap_->ok()) return out;
    for (const LaplaceReplica& rb : reps_) {  // the first by index is never a skipped one
      if (!rb.ok && out.failure.empty()) out.failure = "replica: " + rb.failure;
      out.cg_iterations_max = std::max(out.cg_iterations_max, rb.cg_iterations);
    }
    if (!out.failure.empty()) return out;
    const auto B = static_cast<double>(samples_.size());
    for (std::size_t k = 0; k < 4; ++k) {
      double mean = 0.0;
      for (const auto& x : samples_) mean += (x[k] - m0_[k]) / B;
      for (auto& x : samples_) x[k] -= mean;
    }
    out.samples = std::move(samples_);
    return out;
  }

 private:
  const RetrievalProblem& pr_;
  const EngineOptions eo_;  // a copy: the caller passes a temporary
  const Reconstruction& rec_;
  const double lo_, hi_;
  const unsigned long long seed_;
  const std::function<void()> done_;
  const std::array<double, 4> m0_;
  std::array<double, 4> mc_{};
  std::once_flag built_;
  std::unique_ptr<const LaplaceReplicas> lap_;
  std::vector<LaplaceReplica> reps_;
  std::vector<std::array<double, 4>> samples_;
  std::atomic<bool> failed_{false};
};

// One bootstrap replica of the full chain: the Poisson draw of the scan, its problem (preprocessed
// like the scan), its engine options and, once made, its single-line result before any satellite
// start.
struct ReplicaDraw {
  Trace trace;
  PreprocessSummary summary;
  RetrievalProblem problem;
  EngineOptions options;
  std::optional<Reconstruction> cma;  // its CMA run, when made beside the estimate's (CmaAhead)
  std::optional<Reconstruction> single;
};

// Replicas of the full chain made before the bootstrap stage, up to their single-line result
// (it depends on nothing the estimate decides after its first full-model run): ahead, on
// threads of their own while that run has one thread (start_ahead), and beside the estimate's
// satellite starts in their task list (put). Each replica writes its own slot from its own
// seed: the numbers are those of a replica made later. A failure ahead is kept and raises
// `abandon` (the analysis will fail: every engine run of the estimate then stops at its next
// iteration); take() and rethrow_failure() rethrow it. The destructor waits for the replicas.
class ReplicaStarts {
 public:
  ReplicaStarts(int count, std::atomic<bool>* abandon)
      : abandon_(abandon), slots_(static_cast<std::size_t>(std::max(count, 0))) {}
  ReplicaStarts(const ReplicaStarts&) = delete;
  ReplicaStarts& operator=(const ReplicaStarts&) = delete;
  ~ReplicaStarts() {
    if (ahead_done_.valid()) ahead_done_.wait();
  }

  int count() const { return static_cast<int>(slots_.size()); }
  int ahead() const { return ahead_; }
  // make(b) for b in [0, n) on n threads of their own, at once (n <= 0: nothing; once).
  void start_ahead(int n, std::function<ReplicaDraw(int)> make) {
    n = std::min(n, count());
    if (n <= 0 || ahead_done_.valid()) return;
    ahead_ = n;
    ahead_done_ =
        std::async(std::launch::async, [this, n, make = std::move(make)] {
          try {
            parallel_for(n, n, [&](int b) { slots_[static_cast<std::size_t>(b)] = make(b); });
          } catch (...) {
            abandon_->store(true);
            throw;
          }
        }).share();
  }
  // Replica b in [ahead(), count()), made by the caller (one thread per slot).
  void put(int b, ReplicaDraw d) { slots_[static_cast<std::size_t>(b)] = std::move(d); }
  // Replica b if it was made (waits for those made ahead; rethrows their failure); each b once.
  std::optional<ReplicaDraw> take(int b) {
    if (b < 0 || b >= count()) return std::nullopt;
    if (b < ahead_) std::shared_future<void>(ahead_done_).get();
    std::optional<ReplicaDraw> d = std::move(slots_[static_cast<std::size_t>(b)]);
    slots_[static_cast<std::size_t>(b)].reset();
    return d;
  }
  void rethrow_failure() const {
    if (abandon_->load() && ahead_done_.valid()) std::shared_future<void>(ahead_done_).get();
  }
  // Waits for those made ahead and empties every slot.
  void drop() {
    if (ahead_done_.valid()) ahead_done_.wait();
    for (auto& s : slots_) s.reset();
  }

 private:
  std::atomic<bool>* abandon_;
  std::vector<std::optional<ReplicaDraw>> slots_;
  int ahead_ = 0;
  std::shared_future<void> ahead_done_;
};

// The replicas' CMA runs made beside the estimate's CMA run, which has one thread. A replica's
// options pin the momentum nodes to the count the estimate's run ends with, known only when it
// ends; these runs take the count the estimate's engine would add (ptychographic_momentum_nodes)
// and are kept only when the estimate ends with it (settle): each is then the run the replica
// would make later from its own seeds (the same numbers). Otherwise they stop at their next
// iteration and are dropped. A failure (a progress callback's exception, as the Python module's
// on Ctrl-C) raises `abandon`, as one of ReplicaStarts does, and settle() rethrows it, kept or
// not. The destructor stops and waits for the runs.
class CmaAhead {
 public:
  CmaAhead(int count, std::atomic<bool>* abandon) : runs_(count, abandon) {}
  CmaAhead(const CmaAhead&) = delete;
  CmaAhead& operator=(const CmaAhead&) = delete;
  ~CmaAhead() { stop_.store(true); }  // then runs_ waits for them

  int count() const { return runs_.count(); }
  // Raised when the runs are dropped: an engine run's callback stops it.
  const std::atomic<bool>& stop() const { return stop_; }
  // make(b) for b in [0, count()) on count() threads of their own, at once (once).
  void start(std::function<ReplicaDraw(int)> make) { runs_.start_ahead(count(), std::move(make)); }
  // Keeps the runs (without waiting for them) or stops, waits for and drops them; first
  // rethrows a failure of theirs.
  void settle(bool keep) {
    runs_.rethrow_failure();
    kept_ = keep;
    if (keep) return;
    stop_.store(true);
    runs_.drop();
  }
  // Replica b's draw with its CMA run, if kept (waits for it; rethrows a failure); each b once.
  std::optional<ReplicaDraw> take(int b) { return kept_ ? runs_.take(b) : std::nullopt; }

 private:
  std::atomic<bool> stop_{false};  // (before runs_: it outlives their wait)
  ReplicaStarts runs_;
  bool kept_ = false;
};

}  // namespace

RetrieveOutput retrieve(const Trace& trace, const RetrieveOptions& opt,
                        const RetrieveProgress& progress) {
  if (const std::string e = opt.validate(); !e.empty()) throw usage_error("retrieve: " + e);
  const auto t_start = std::chrono::steady_clock::now();
  RetrieveOutput out;
  out.problem = preprocess(trace, opt.preprocess, &out.preprocess);
  // The joint-lines problem and every replica are summed like the scan itself (step 4a's k is
  // chosen once, on the measured counts): a replica's doubled counting noise would otherwise
  // read as structure at every lag, and the joint window must share the single problem's step.
  PreprocessOptions same_bins = opt.preprocess;
  same_bins.energy_combine = static_cast<int>(out.preprocess.energy_bins_combined);
  check_line_names(out.preprocess.lines, opt.line_delays,
                   trace.meta.gas);  // before any engine runs
  const RetrievalProblem& pr = out.problem;

  // One engine run on one problem, progress reported under `stage`, time origin fixed. The
  // replicas call it from worker threads: progress reports go out one at a time.
  std::mutex progress_mutex;
  // Raised when a replica started ahead has failed (ReplicaStarts): the analysis will fail,
  // so every engine run stops at its next iteration.
  std::atomic<bool> abandon{false};
  // `stop`, when given, stops the run too (CmaAhead's dropped runs).
  auto run_on = [&](const RetrievalProblem& problem, const std::string& name,
                    const EngineOptions& o, const std::string& stage,
                    const std::atomic<bool>* stop = nullptr) {
    auto engine = make_engine(name);
    std::vector<IterationCallback> cbs{[&](const IterationRecord&) {
      return abandon.load() || (stop && stop->load()) ? CallbackResult::kStop
                                                      : CallbackResult::kContinue;
    }};
    if (progress)
      cbs.push_back([&](const IterationRecord& r) {
        const std::lock_guard<std::mutex> lock(progress_mutex);
        progress(stage, r);
        return CallbackResult::kContinue;
      });
    Reconstruction rec = run_engine(*engine, problem, o, cbs);
    fix_time_origin(rec);
    return rec;
  };
  auto run = [&](const std::string& name, const EngineOptions& o) {
    return run_on(pr, name, o, name);
  };
  EngineOptions eo;
  if (opt.iterations > 0) eo.max_iterations = opt.iterations;
  eo.seed = opt.seed;
  eo.threads = 1;  // engines single-threaded: the replicas use the threads (bit-identical results)
  eo.settings = opt.engine_settings;
  // A streaking-broadened spectrum must not be imposed as the amplitude (DESIGN.md: |E_X| is
  // constrained to the measured field-free spectrum; without one, only its centroid is used).
  if (!out.preprocess.field_free_measured && !eo.settings.is_given("spectrum_constraint"))
    eo.settings.set_spectrum_constraint(CmaSpectrum::kCentroid);
  eo.max_seconds = opt.max_seconds;
  // A full-model run of the chain: the default iteration limit when the first engine's was
  // changed by --iterations, and its own patience (RetrieveOptions::full_model_patience).
  auto full_model_options = [&](EngineOptions o) {
    o.max_iterations = opt.iterations > 0 ? opt.iterations : EngineOptions().max_iterations;
    o.patience = opt.full_model_patience;
    return o;
  };

  // Metrics from the in-support field (photon energy = kinetic energy + Ip).
  auto band_of = [](const RetrievalProblem& p) {
    const bool has = p.support_hi_au > p.support_lo_au;
    return std::pair{has ? p.support_lo_au + p.ionization_energy_au : 0.0,
                     has ? p.support_hi_au + p.ionization_energy_au : 0.0};
  };
  const auto [band_lo, band_hi] = band_of(pr);
  // The satellite hypothesis (retrieval/physics/satellite_seed.h): the full model from `base` with
  // satellites at -+T/2 of the given sign.
  auto satellite_run = [&](const RetrievalProblem& problem, const Reconstruction& base, double sign,
                           const EngineOptions& o, const std::string& stage) {
    EngineOptions so = o;
    so.initial_xuv =
        with_satellites(base.xuv, units::kPi / pr.ir_omega_au, opt.satellite_start_ratio, sign);
    so.initial_ir = base.ir;
    return run_on(problem, "full-model", so, stage);
  };
  // Two independent runs of the estimate's chain side by side on the worker threads (each run
  // single-threaded, so every number is the same for any thread count).
  auto run_both = [&](const std::function<void()>& a, const std::function<void()>& b) {
    parallel_for(2, resolve_threads(opt.threads), [&](int i) { i == 0 ? a() : b(); });
  };
  // The replicas' engine options: the estimate's, and the ptychographic runs use the momentum
  // nodes exactly when the estimate's did (the engine adds them only when the one-p0 fit stalls
  // above the noise floor, and a replica's doubled noise would otherwise decide differently and
  // bias the correction).
  // (replica_options_for: those options when the estimate's CMA run ends with `nodes`.)
  auto replica_options_for = [&](int nodes) {
    EngineOptions o = eo;
    if (!o.settings.is_given("momentum_bands") && nodes > 0) o.settings.set_momentum_bands(nodes);
    return o;
  };
  auto replica_base_options = [&] {
    const auto ptycho =
        std::find_if(out.chain.begin(), out.chain.end(),
                     [](const Reconstruction& c) { return c.engine == "ptychographic"; });
    return replica_options_for(ptycho != out.chain.end() ? ptycho->momentum_nodes : 0);
  };
  // Replica b's draw (seeds from its index alone).
  auto replica_draw = [&](int b, const EngineOptions& base) {
    ReplicaDraw d;
    d.trace = poisson_resample(trace, replica_seed(opt.seed, b));
    d.problem = preprocess(d.trace, same_bins, &d.summary);
    d.options = base;
    d.options.seed = opt.seed + 7919ULL * static_cast<unsigned long long>(b + 1);
    return d;
  };
  // Its single-line result by the full model, from its own CMA result or from the model's own
  // guess (as the estimate's chain made its own).
  auto replica_single = [&](ReplicaDraw& d, bool from_cma, const std::string& stage) {
    EngineOptions fo = full_model_options(d.options);
    if (from_cma) {
      const Reconstruction c =
          d.cma ? std::move(*d.cma) : run_on(d.problem, "ptychographic", d.options, stage);
      fo.initial_xuv = c.xuv;
      fo.initial_ir = c.ir;
    }
    d.single = run_on(d.problem, "full-model", fo, stage);
  };
  // The replicas of the full chain the uncertainty will run (kFull: all; kLaplace: its check's
  // K; kWarm: none) and their progress stage.
  const int laplace_k =
      opt.bootstrap >= 2 ? std::min(opt.laplace_check_replicas, opt.bootstrap) : 0;
  const int chain_replicas = opt.uncertainty == UncertaintyMethod::kFull      ? opt.bootstrap
                             : opt.uncertainty == UncertaintyMethod::kLaplace ? laplace_k
                                                                              : 0;
  auto replica_stage = [&](int b) {
    return opt.uncertainty == UncertaintyMethod::kLaplace
               ? "laplace check " + std::to_string(b + 1) + "/" + std::to_string(laplace_k)
               : "bootstrap " + std::to_string(b + 1) + "/" + std::to_string(opt.bootstrap);
  };
  // The replicas' CMA runs beside the estimate's (on the other threads; declared after
  // everything they use: the destructor waits for them).
  CmaAhead cma_ahead(
      opt.engine == "auto" ? std::min(chain_replicas, resolve_threads(opt.threads) - 1) : 0,
      &abandon);
  // Replica b's draw: the one made with its CMA run beside the estimate's, if kept.
  auto draw_of = [&](int b, const EngineOptions& base) {
    std::optional<ReplicaDraw> d = cma_ahead.take(b);
    return d ? std::move(*d) : replica_draw(b, base);
  };
  // Replica b up to its single-line result, as the chain of the estimate makes it (auto with the
  // full model: from the replica's CMA result, or from the full model's own guess).
  auto make_start = [&](const EngineOptions& base, int b, bool from_cma) {
    ReplicaDraw d = draw_of(b, base);
    replica_single(d, from_cma, replica_stage(b));
    return d;
  };
  // At most twice the threads (each holds its draw and problem until the bootstrap stage: the
  // memory stays that of a few replicas for any --bootstrap). Declared after everything its
  // replicas use: its destructor waits for those made ahead.
  ReplicaStarts starts(std::min(chain_replicas, 2 * resolve_threads(opt.threads)), &abandon);
  double satellite_sign = 0.0;  // the sign of an adopted satellite start (0: none)
  // The replicas repeat that start (RetrieveOptions::replica_satellite_margin).
  bool replica_satellite = false;
  std::string final_engine = opt.engine;
  bool full_model_from_cma = false;  // auto: the full model's result started from the CMA's
  if (opt.engine == "auto") {
    // The replicas' CMA runs beside this one, on the node count it would add (when that count
    // cannot be had, e.g. for settings the run itself will refuse, none).
    int nodes_ahead = 0;
    if (cma_ahead.count() > 0) {
      try {
        nodes_ahead = ptychographic_momentum_nodes(pr, eo.settings.ptychographic);
      } catch (const std::exception&) {
        nodes_ahead = 0;
      }
    }
    const EngineOptions ahead_options = replica_options_for(nodes_ahead);
    if (nodes_ahead > 0)
      cma_ahead.start([&, base = ahead_options](int b) {  // (a copy: the runs outlive this block)
        ReplicaDraw d = replica_draw(b, base);
        d.cma = run_on(d.problem, "ptychographic", d.options, replica_stage(b), &cma_ahead.stop());
        return d;
      });
    out.chain.push_back(run("ptychographic", eo));
    // Kept when the replicas' options are those they were started with (they differ in the
    // pinned node count alone).
    cma_ahead.settle(replica_base_options().settings.ptychographic.cma.momentum_bands ==
                     ahead_options.settings.ptychographic.cma.momentum_bands);
    const Reconstruction& first = out.chain.back();
    // Band edges: centroid +- FWHM/2 of the photoelectron spectrum.
    const double Wc = units::eV_to_au(out.preprocess.centroid_energy_eV);
    const double hw = 0.5 * units::eV_to_au(out.preprocess.bandwidth_fwhm_eV);
    const double s_half = 0.5 * pr.grid.window();
    out.cma_phase_error_rad =
        cma_phase_error(first.ir, pr.central_momentum_au, Wc - hw, Wc + hw,
                        pr.delay_au.front() - s_half, pr.delay_au.back() + s_half);
    final_engine = "ptychographic";
    const double floor = first.noise_floor_trace_error;
    out.cma_trace_error_ratio = floor > 0 ? first.trace_error / floor : 0.0;
    const bool cma_limited = out.cma_phase_error_rad > opt.cma_phase_error_max_rad;
    const bool not_fitted = out.cma_trace_error_ratio > opt.cma_trace_error_max_ratio;
    // A CMA field whose E(t) is far steeper than omega A(t) carries noise, not the IR (the
    // quality check ir_field_vs_vector_potential would fail it): the full model refines it.
    const double a_peak = first.ir.peak_vector_potential();
    const bool noisy_field =
        a_peak > 0 && pr.ir_omega_au > 0 &&
        first.ir.peak_electric_field() / (pr.ir_omega_au * a_peak) > opt.quality.max_ir_field_ratio;
    // Few counts per bin: the CMA engine's result is biased by the counting noise (retrieve.h).
    const bool few_counts = out.preprocess.signal_peak_counts < opt.cma_min_signal_counts;
    for (const auto& [why, on] :
         {std::pair{"cma phase error", cma_limited}, std::pair{"cma fit above floor", not_fitted},
          std::pair{"noisy IR field", noisy_field}, std::pair{"few counts per bin", few_counts}})
      if (on)
        out.full_model_reason += (out.full_model_reason.empty() ? "" : ", ") + std::string(why);
    if (!out.full_model_reason.empty()) {  // one of the four rules fired
      EngineOptions fo = full_model_options(eo);
      fo.initial_xuv = first.xuv;
      fo.initial_ir = first.ir;
      out.full_model_start = "the CMA result";
      full_model_from_cma = true;
      final_engine = "full-model";
      if (!not_fitted) {
        // The run has the thread to itself: the other threads start the replicas of the full
        // chain meanwhile (a replica's single-line chain is the estimate's, decided above).
        starts.start_ahead(
            resolve_threads(opt.threads) - 1,
            [&, base = replica_base_options()](int b) { return make_start(base, b, true); });
        out.chain.push_back(run("full-model", fo));
        starts.rethrow_failure();  // before the satellite starts: the analysis fails anyway
      } else {
        // The CMA result may sit in a local minimum (multi-burst pulses): also start the full
        // model from its own guess (parametric IR) and keep the better fit. The two runs are
        // independent: they share the worker threads.
        out.chain.resize(out.chain.size() + 2);
        const EngineOptions co = full_model_options(eo);
        const std::size_t n = out.chain.size();
        run_both([&] { out.chain[n - 2] = run("full-model", fo); },
                 [&] { out.chain[n - 1] = run("full-model", co); });
        out.full_model_start = "its own guess (better G than from the CMA result)";
        full_model_from_cma = false;
        if (out.chain[n - 2].trace_error < out.chain[n - 1].trace_error) {
          full_model_from_cma = true;
          std::swap(out.chain[n - 2], out.chain[n - 1]);  // the chain ends with the result used
          out.full_model_start = "the CMA result (better G than from its own guess)";
        }
      }
      const Reconstruction base = out.chain.back();
      // (the shift is circular on the grid: only when the copies at -+T/2 lie inside its window)
      if (opt.satellite_start && pr.ir_omega_au > 0 &&
          units::period_au(pr.ir_omega_au) < pr.grid.window() &&
          pulse_metrics(base, pr.ir_omega_au, band_lo, band_hi).satellite_intensity_ratio <
              opt.satellite_ratio.isolated_max) {
        // Both signs, run side by side; they go into the chain before the result (the chain
        // ends with it), the sign - first.
        out.chain.pop_back();
        const std::size_t s0 = out.chain.size();
        out.chain.resize(s0 + 2);
        // The replicas not made ahead start in the same task list (their single-line chain is
        // decided; the satellite decision below only adds a run to each), so that no thread
        // waits for the longer of the two starts.
        const int made_ahead = starts.ahead();
        parallel_for(2 + starts.count() - made_ahead, resolve_threads(opt.threads),
                     [&, rbase = replica_base_options()](int t) {
                       if (t == 0)
                         out.chain[s0] =
                             satellite_run(pr, base, -1.0, fo, "full-model (satellite start -)");
                       else if (t == 1)
                         out.chain[s0 + 1] =
                             satellite_run(pr, base, 1.0, fo, "full-model (satellite start +)");
                       else
                         starts.put(made_ahead + t - 2,
                                    make_start(rbase, made_ahead + t - 2, full_model_from_cma));
                     });
        // A start is kept only when it fits better than G's own counting-noise scatter allows
        // (RetrieveOptions::satellite_start_margin); both stay in the chain (the systematic
        // spread of equally good runs).
        std::size_t best = out.chain.size();
        const double cells = std::max(1.0, static_cast<double>(pr.intensity.size()));
        double best_g = base.trace_error * (1.0 - opt.satellite_start_margin / std::sqrt(cells));
        for (std::size_t i : {s0, s0 + 1}) {
          if (out.chain[i].trace_error < best_g) {
            best_g = out.chain[i].trace_error;
            best = i;
            satellite_sign = i == s0 ? -1.0 : 1.0;
          }
        }
        out.chain.push_back(base);
        if (best < out.chain.size() - 1) {
          std::swap(out.chain[best], out.chain.back());
          // The replicas may skip the start only when the first result is among the equally
          // good runs whose spread s_sys holds (within comparable_fit_ratio of the best G; with
          // the default margin always, beyond ~36 cells).
          const double gain = 1.0 - best_g / base.trace_error;  // > 0
          replica_satellite = gain > opt.replica_satellite_margin / std::sqrt(cells) ||
                              !(base.trace_error <= opt.quality.comparable_fit_ratio * best_g);
          out.full_model_start =
              std::string("the satellite hypothesis (satellites at -+T/2, sign ") +
              (satellite_sign > 0 ? "+" : "-") + "; G lower by " + format_g(gain, 2) +
              " of itself than without; " +
              (replica_satellite ? "the replicas repeat it)"
                                 : "within the counting noise: the replicas do not repeat it)");
        }
      }
    }
  } else {
    out.chain.push_back(run(opt.engine, opt.engine == "full-model" ? full_model_options(eo) : eo));
  }
  starts.rethrow_failure();
  out.reconstruction = out.chain.back();
  // Several photoelectron lines (retrieval/analysis/multi_line_fit.h): centre-of-energy delays,
  // then the joint fit of the analysed lines from the single-line result; its pulse is the
  // headline.
  const std::string single_engine = final_engine;
  const std::size_t single_runs = out.chain.size();
  JointLineStep lines_step;
  const EngineRunner runner = [&](const RetrievalProblem& p, const std::string& name,
                                  const EngineOptions& o,
                                  const std::string& stage) { return run_on(p, name, o, stage); };
  const EngineOptions jeo = full_model_options(eo);
  if (out.preprocess.lines.size() >= 2 && trace.meta.kind != TraceKind::kRabbitt &&
      !(opt.line_delays.names.size() == 1 && opt.line_delays.names[0] == "none")) {
    ClassifierOptions lc;
    lc.satellite_ratio = opt.satellite_ratio;
    if (classify(trace, lc, &out.reconstruction).pulse_class != PulseClass::kTrain) {
      LineDelayOptions lo = opt.line_delays;
      lo.seed = opt.seed;
      lines_step = joint_line_estimate(trace, same_bins, lo, pr, out.preprocess, out.reconstruction,
                                       jeo, runner, &eo);
      if (lines_step.used) {
        lines_step.replicas.resize(static_cast<std::size_t>(opt.bootstrap));
        out.chain.push_back(lines_step.reconstruction);
        out.reconstruction = lines_step.reconstruction;
        out.problem = lines_step.joint.problem;  // pr (a reference to it) from here on
        out.preprocess.window_lo_eV = lines_step.joint.summary.window_lo_eV;
        out.preprocess.window_hi_eV = lines_step.joint.summary.window_hi_eV;
        out.preprocess.window_source = "joint lines";
        out.preprocess.grid_size = lines_step.joint.summary.grid_size;
        out.preprocess.grid_dt_as = lines_step.joint.summary.grid_dt_as;
        final_engine = "full-model";
      }
    }
  }
  starts.rethrow_failure();
  // Runs fitted to the headline's problem (the joint fit alone when it ran).
  const std::size_t first_same = lines_step.used ? single_runs : 0;
  const Reconstruction& rec = out.reconstruction;
  const PulseMetrics m = pulse_metrics(rec, pr.ir_omega_au, band_lo, band_hi);
  // The CMA's own error for every CMA run of the chain (auto computed it for the first).
  const double s_half = 0.5 * pr.grid.window();
  auto cma_error_of = [&](const Reconstruction& c) {
    const double Wc = units::eV_to_au(out.preprocess.centroid_energy_eV);
    const double hw = 0.5 * units::eV_to_au(out.preprocess.bandwidth_fwhm_eV);
    return cma_phase_error(c.ir, pr.central_momentum_au, Wc - hw, Wc + hw,
                           pr.delay_au.front() - s_half, pr.delay_au.back() + s_half);
  };
  // The chain's runs whose fits are equally good (retrieve.h): their spread is the retrieval's
  // own systematic uncertainty.
  double best_g = rec.trace_error;
  for (std::size_t ci = first_same; ci < out.chain.size(); ++ci)
    best_g = std::min(best_g, out.chain[ci].trace_error);
  std::vector<PulseMetrics> comparable;
  for (std::size_t ci = first_same; ci < out.chain.size(); ++ci) {
    const Reconstruction& c = out.chain[ci];
    if (!(c.trace_error <= opt.quality.comparable_fit_ratio * best_g)) continue;
    if (c.model != "full" && c.ir.size() >= 5 && cma_error_of(c) > opt.cma_phase_error_max_rad)
      continue;
    comparable.push_back(pulse_metrics(c, pr.ir_omega_au, band_lo, band_hi));
  }

  // The systematic parts of the headline sigmas (retrieve.h): the spread over the equally good
  // runs of the chain (0 with one), the method's own systematic as a floor
  // (RetrieveOptions::method_sigma_relative), and for the FWHM a window cut inside the
  // reference's streaked band (it leaves part of the line unmeasured).
  auto systematic = [&](auto get) {
    std::vector<double> vals;
    for (const auto& c : comparable)
      if (const std::optional<double> x = get(c)) vals.push_back(*x);
    return stddev(vals);
  };
  auto with_floor = [&](double sys, const std::optional<double>& value) {
    return value ? std::max(sys, opt.method_sigma_relative * std::abs(*value)) : sys;
  };
  const double cut_sigma = m.xuv.fwhm_as
                               ? opt.window_cut_sigma_per_share * out.preprocess.window_cut_share *
                                     std::abs(*m.xuv.fwhm_as)
                               : 0.0;
  const double fwhm_sys = std::hypot(
      with_floor(systematic([](const PulseMetrics& c) { return c.xuv.fwhm_as; }), m.xuv.fwhm_as),
      cut_sigma);
  const double a0_sys =
      with_floor(systematic([](const PulseMetrics& c) { return c.ir.peak_vector_potential_au; }),
                 m.ir.peak_vector_potential_au);

  // Bootstrap (uncertainty = full): each replica repeats the whole analysis on a Poisson draw
  // of the counts: the CMA engine from its own initial guess with its own delay order, the full
  // model from that replica's CMA result (or from its own guess, as the estimate did). A warm
  // start from the final estimate stopped by the noise-floor rule sits at the floor already and
  // barely moves: the spread came out 5x (CMA) to 20x (full model) too small; uncertainty = warm
  // therefore turns that rule off (retrieval/analysis/uncertainty.h).
  // (replica_base_options: the momentum nodes as the estimate's CMA run used them.)
  const EngineOptions beo = replica_base_options();
  // Replicas are independent: each on a worker thread, its seeds from its index alone, its
  // numbers into its own slot (the same results for any thread count).
  const bool warm = opt.uncertainty == UncertaintyMethod::kWarm;
  std::vector<std::array<double, 4>> samples(static_cast<std::size_t>(opt.bootstrap));
  // Replica b of the chain (kFull's, or kWarm's), its progress under `stage`.
  auto chain_replica = [&](int b, const std::string& stage) {
    std::optional<ReplicaDraw> made = starts.take(b);
    ReplicaDraw d = made ? std::move(*made) : draw_of(b, beo);
    const Trace& rep = d.trace;
    const PreprocessSummary& ps = d.summary;
    const RetrievalProblem& rp = d.problem;
    EngineOptions& bo = d.options;
    Reconstruction br;
    if (warm && !lines_step.used) {
      // retrieval/analysis/uncertainty.h: the final engine from the estimate, until it stops
      // moving.
      EngineOptions wo = single_engine == "full-model" ? full_model_options(bo) : bo;
      wo.initial_xuv = rec.xuv;
      wo.initial_ir = rec.ir;
      wo.noise_floor_factor = 0.0;
      wo.relative_tolerance = std::max(wo.relative_tolerance, wo.noise_floor_relative_tolerance);
      wo.patience = opt.warm_patience;
      br = run_on(rp, single_engine, wo, stage);
    } else if (single_engine == "full-model") {
      // The same chain as the estimate: from the replica's own CMA result, or from the full
      // model's own guess when that is where the estimate came from (unless started ahead).
      if (!d.single) replica_single(d, full_model_from_cma, stage);
      br = std::move(*d.single);
      const EngineOptions fo = full_model_options(bo);
      // (with the joint lines the satellite runs are not among the headline's equally good
      // runs, so there every replica repeats an adopted start)
      if (satellite_sign != 0 && (replica_satellite || lines_step.used)) {
        Reconstruction sr = satellite_run(rp, br, satellite_sign, fo, stage);
        if (sr.trace_error < br.trace_error) br = std::move(sr);
      }
    } else {
      // (a CMA run made beside the estimate's is this run: the chain ended with it)
      br = d.cma ? std::move(*d.cma) : run_on(rp, single_engine, bo, stage);
    }
    if (lines_step.used) {  // the joint fit on the replica, from its single-line result
      const EngineOptions jb = full_model_options(bo);
      if (auto jr =
              joint_line_replica(lines_step, b, rep, same_bins, rp, ps, br, jb, stage, runner, &bo))
        br = std::move(*jr);
    }
    const auto [rlo, rhi] = band_of(rp);
    return replica_metrics(pulse_metrics(br, pr.ir_omega_au, rlo, rhi));
  };
  // uncertainty = laplace (retrieval/engines/full_model_laplace.h), where it applies, with the
  // full-chain replicas that test its sigmas (uncertainty.h, RetrieveOptions::
  // laplace_check_replicas): replicas 0 .. K-1 of the full bootstrap, kept for it when laplace
  // fails or fails its check.
  std::string uncertainty_used = to_string(opt.uncertainty);
  bool replicas_done = false;
  int laplace_cg_iterations = 0;  // the most Hessian-vector products of one replica
  std::vector<std::array<double, 4>> check_chain;  // the check's full-chain replicas
  if (opt.uncertainty == UncertaintyMethod::kLaplace && opt.bootstrap > 0) {
    std::string why_not;
    if (single_engine != "full-model" || lines_step.used) {
      why_not = lines_step.used ? "joint lines" : "the headline is not a full-model fit";
    } else {
      std::atomic<int> finished{0};
      const auto laplace_start = std::chrono::steady_clock::now();
      auto done = [&] {
        if (!progress) return;
        IterationRecord r;
        r.iteration = ++finished;
        r.trace_error = rec.trace_error;
        r.seconds =
            std::chrono::duration<double>(std::chrono::steady_clock::now() - laplace_start).count();
        const std::lock_guard<std::mutex> lock(progress_mutex);
        progress("bootstrap (laplace) " + std::to_string(r.iteration) + "/" +
                     std::to_string(opt.bootstrap),
                 r);
      };
      const int K = laplace_k;  // the check's replicas
      check_chain.resize(static_cast<std::size_t>(K));
      LaplaceSampler sampler(pr, full_model_options(beo), rec, m, band_lo, band_hi, opt, done);
      // One task list on the worker threads: linearised replica 0 (it builds the preconditioner
      // of the others), the K check replicas (each a whole chain, the longest tasks), then the
      // other linearised replicas; so a second thread runs a check replica while replica 0's CG
      // runs. Every task writes its own slot: the same numbers for any thread count.
      parallel_for(opt.bootstrap + K, resolve_threads(opt.threads), [&](int t) {
        if (t == 0) {
          sampler.run(0);
        } else if (t <= K) {
          check_chain[static_cast<std::size_t>(t - 1)] =
              chain_replica(t - 1, "laplace check " + std::to_string(t) + "/" + std::to_string(K));
        } else {
          sampler.run(t - K);
        }
      });
      LaplaceSamples ls = sampler.finish();
      why_not = ls.failure;
      if (why_not.empty()) {
        samples = std::move(ls.samples);
        replicas_done = true;
        laplace_cg_iterations = ls.cg_iterations_max;
      }
    }
    if (!replicas_done) uncertainty_used = "full (laplace not applicable: " + why_not + ")";
  }
  // The linearised sigmas tested against the full-chain replicas.
  std::vector<std::pair<std::string, SigmaCheck>> checks;
  if (replicas_done && !check_chain.empty()) {
    const int K = static_cast<int>(check_chain.size());
    auto check = [&](const char* name, std::size_t k, const std::optional<double>& value,
                     double sys) {
      if (!value) return;
      std::vector<double> lin, full;
      for (const auto& x : samples) lin.push_back(x[k]);
      for (const auto& x : check_chain) full.push_back(x[k]);
      checks.emplace_back(name,
                          check_sigma(*value, bootstrap_estimate(*value, lin, sys).sigma, full));
    };
    check("fwhm_as", 0, m.xuv.fwhm_as, fwhm_sys);
    check("peak_vector_potential_au", 2, m.ir.peak_vector_potential_au, a0_sys);
    std::string failed;
    for (const auto& [name, c] : checks)
      if (!c.pass)
        failed += (failed.empty() ? "" : ", ") + name + " chi2 " + format_g(c.chi2, 3) + " > " +
                  format_g(c.limit, 3);
    if (!failed.empty()) {
      replicas_done = false;
      uncertainty_used = "full (laplace failed its check against " + std::to_string(K) +
                         " full-chain replicas: " + failed + ")";
    }
  }
  // Where the full bootstrap runs after all, the check's replicas are its replicas 0 .. K-1.
  const int chain_done = replicas_done ? 0 : static_cast<int>(check_chain.size());
  for (int b = 0; b < chain_done; ++b)
    samples[static_cast<std::size_t>(b)] = check_chain[static_cast<std::size_t>(b)];
  if (!replicas_done)
    parallel_for(opt.bootstrap - chain_done, resolve_threads(opt.threads), [&](int i) {
      const int b = chain_done + i;
      samples[static_cast<std::size_t>(b)] = chain_replica(
          b, "bootstrap " + std::to_string(b + 1) + "/" + std::to_string(opt.bootstrap));
    });
  std::vector<double> bf, bg, ba, bs;
  for (const auto& x : samples) {
    bf.push_back(x[0]);
    bg.push_back(x[1]);
    ba.push_back(x[2]);
    bs.push_back(x[3]);
    out.bootstrap_samples.push_back(x);
  }

  AnalysisResult& res = out.result;
  res.input = trace.meta.source;
  res.analysis = "retrieve";
  res.engine = opt.engine == "auto" ? final_engine : opt.engine;
  res.xuv = m.xuv;
  res.ir = m.ir;
  // The IR wavelength is the sidecar's: the period of a retrieved A(t) is a model output (a
  // train's field can lock onto 2 omega); the retrieved one is kept beside it and checked.
  std::optional<double> ir_mismatch;
  if (res.ir->wavelength_nm) {
    const double lr = *res.ir->wavelength_nm;
    res.extra.push_back({"ir.wavelength_nm_retrieved", lr});
    ir_mismatch = std::abs(lr / trace.meta.ir_wavelength_nm - 1.0);
    if (*ir_mismatch > 0.02) {
      std::ostringstream w;
      w.precision(4);
      w << "the retrieved vector potential oscillates with a period of " << lr
        << " nm, the sidecar says " << trace.meta.ir_wavelength_nm << " nm (" << 100 * *ir_mismatch
        << " % apart";
      if (std::abs(lr / trace.meta.ir_wavelength_nm - 0.5) < 0.05) w << ": locked onto 2 omega";
      w << "); the sidecar's wavelength is reported";
      res.warnings.push_back(w.str());
    }
  }
  res.ir->wavelength_nm = trace.meta.ir_wavelength_nm;
  // The verdict of every analysis comes from one place (retrieval/analysis/classifier.h): the
  // scan's spectral and delay evidence plus the reconstructed bursts.
  ClassifierOptions co;
  co.satellite_ratio = opt.satellite_ratio;
  VerdictSection v = classify(trace, co, &rec);
  std::optional<double> fwhm_bias_over_sigma;
  if (opt.bootstrap >= 2) {
    // retrieve.h: Student-scaled replica spread, bias corrected only when small against it,
    // otherwise added to sigma; plus the chain's systematic spread.
    const double t = student_one_sigma_factor(opt.bootstrap);
    res.extra.push_back({"bootstrap.student_factor", t});
    res.extra.push_back({"bootstrap.method", uncertainty_used});
    if (laplace_cg_iterations > 0)
      res.extra.push_back({"bootstrap.laplace_cg_iterations_max", laplace_cg_iterations});
    auto corrected = [&](const std::string& key, std::optional<double>& value,
                         std::optional<double>& sigma, const std::vector<double>& reps,
                         double sys) {
      if (!value) return;
      const BootstrapEstimate be = bootstrap_estimate(*value, reps, sys);
      res.extra.push_back({"bootstrap." + key + "_uncorrected", *value});
      res.extra.push_back({"bootstrap." + key + "_bias", be.bias});
      res.extra.push_back({"bootstrap." + key + "_bias_corrected", be.corrected});
      res.extra.push_back({"bootstrap." + key + "_sigma_statistical", be.sigma_statistical});
      res.extra.push_back({"bootstrap." + key + "_sigma_systematic", be.sigma_systematic});
      res.extra.push_back({"bootstrap." + key + "_sigma_bias", be.sigma_bias});
      value = be.value;
      sigma = be.sigma;
      if (key == "fwhm_as") {
        res.extra.push_back({"xuv.fwhm_as_sigma_statistical", be.sigma_statistical});
        res.extra.push_back(
            {"xuv.fwhm_as_sigma_systematic", std::hypot(be.sigma_systematic, be.sigma_bias)});
        if (be.spread > 0) fwhm_bias_over_sigma = std::abs(be.bias) / be.spread;
      }
    };
    if (cut_sigma > 0) res.extra.push_back({"xuv.fwhm_as_sigma_window_cut", cut_sigma});
    for (const auto& [name, c] : checks) {  // an infinite chi2 (bootstrap.method says so): none
      if (std::isfinite(c.chi2))
        res.extra.push_back({"bootstrap.laplace_check_" + name + "_chi2", c.chi2});
      res.extra.push_back({"bootstrap.laplace_check_" + name + "_limit", c.limit});
    }
    corrected("fwhm_as", res.xuv->fwhm_as, res.xuv->fwhm_as_sigma, bf, fwhm_sys);
    corrected("gdd_as2", res.xuv->gdd_as2, res.xuv->gdd_as2_sigma, bg,
              systematic([](const PulseMetrics& c) { return c.xuv.gdd_as2; }));
    corrected("peak_vector_potential_au", res.ir->peak_vector_potential_au,
              res.ir->peak_vector_potential_au_sigma, ba, a0_sys);
    // The satellite ratio decides the class and is never moved; its sigma follows the same rule
    // as the other headline numbers (replica spread, an uncorrected bias, the chain's
    // systematic spread), and a bias that would be corrected widens it as well.
    const BootstrapEstimate se = bootstrap_estimate(
        v.satellite_intensity_ratio.value_or(0.0), bs, systematic([](const PulseMetrics& c) {
          return std::optional<double>(c.satellite_intensity_ratio);
        }));
    v.satellite_intensity_ratio_sigma = std::hypot(se.sigma, se.corrected ? se.bias : 0.0);
    res.extra.push_back({"bootstrap.satellite_intensity_ratio_bias", se.bias});
    res.extra.push_back(
        {"bootstrap.satellite_intensity_ratio_sigma_statistical", se.sigma_statistical});
    res.extra.push_back(
        {"bootstrap.satellite_intensity_ratio_sigma_systematic", se.sigma_systematic});
  } else {
    res.warnings.push_back("no bootstrap replicas (--bootstrap < 2): no uncertainties reported");
  }
  if (v.pulse_class == PulseClass::kTrain && rec.model == "cma")
    res.warnings.push_back(
        "pulse train retrieved with one central momentum (momentum nodes not used): the burst "
        "phases (attochirp) are reliable, but one p0 for the whole harmonic comb distorts the "
        "harmonic amplitudes (transform-limited burst ~6 % long) and the IR peak A0 (+49 % on "
        "the argon RABBITT preset, docs/validation.md); use the ptychographic engine's momentum "
        "nodes or `rabbitt`");
  else if (v.pulse_class == PulseClass::kTrain)
    res.warnings.push_back(
        "pulse train: xuv.gdd_as2 is fitted over every bin above 5 % of the peak, including the "
        "phases between harmonics; use the harmonic phases (`rabbitt`, or the attochirp of the "
        "retrieved harmonics) for the chirp; the IR peak A0 of a weak RABBITT field came out "
        "3-6 % high on validation scans (docs/validation.md)");
  res.verdict = v;
  FitSection f;
  f.trace_error = rec.trace_error;
  long long its = 0;
  double secs = 0;
  for (const auto& c : out.chain) {
    its += static_cast<long long>(c.history.size());
    secs += c.seconds;
  }
  f.iterations = its;
  f.converged = rec.converged();
  f.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t_start).count();
  f.noise_model = rec.noise_model;  // the final engine's (Reconstruction::noise_model)
  f.termination = std::string(to_string(rec.termination)) + ": " + rec.message;
  res.fit = f;
  for (const auto& w : out.preprocess.warnings) res.warnings.push_back(w);
  if (!rec.converged()) res.warnings.push_back("the engine did not converge: " + rec.message);

  auto P = [&](const std::string& k, auto v2) { res.extra.push_back({k, v2}); };
  const PreprocessSummary& s = out.preprocess;
  append_preprocess_params(s, &res.extra);
  if (res.lines.empty()) res.lines = s.lines;
  // Relative delays of the other lines (retrieval/analysis/line_delays.h), on the whole scan; not
  // on a harmonic comb (each line is then a comb of harmonics: the sideband analysis applies).
  const bool comb = trace.meta.kind == TraceKind::kRabbitt || v.pulse_class == PulseClass::kTrain;
  if (res.lines.size() >= 2 && comb &&
      !(opt.line_delays.names.size() == 1 && opt.line_delays.names[0] == "none"))
    res.warnings.push_back(
        "line delays not measured: the scan is a pulse train (harmonic comb); the "
        "centre-of-energy method assumes one isolated line per ionic state");
  if (lines_step.centre_of_energy) {  // measured before the bootstrap (joint fit, multi_line_fit.h)
    for (const auto& w : lines_step.centre_of_energy->warnings) res.warnings.push_back(w);
    for (const auto& w : lines_step.warnings) res.warnings.push_back(w);
    joint_line_report(lines_step, opt.bootstrap, &res.lines, &res.extra, &out.line_curves);
  }
  P("fit.model", rec.model);
  P("fit.noise_floor_trace_error", rec.noise_floor_trace_error);
  P("fit.scale", rec.scale);
  if (opt.engine == "auto") {
    P("fit.cma_phase_error_rad", out.cma_phase_error_rad);
    P("fit.cma_trace_error_ratio", out.cma_trace_error_ratio);
    if (!out.full_model_start.empty()) P("fit.full_model_start", out.full_model_start);
    if (!out.full_model_reason.empty()) P("fit.full_model_reason", out.full_model_reason);
  }
  std::string chain;
  for (const auto& c : out.chain) chain += (chain.empty() ? "" : " -> ") + c.engine;
  P("fit.engine_chain", chain);
  // What the CMA run of the chain modelled (theory.md: momentum nodes, data projection).
  for (const auto& c : out.chain) {
    if (c.model != "cma" && c.model != "banded-cma") continue;
    for (const auto& [key, value] : c.settings)
      if (key == "momentum_bands" || key == "momentum_bands_from_iteration" ||
          key == "momentum_band_frame" || key == "projection")
        P("fit.cma." + key, value);
    break;
  }
  // What the headline's full-model run modelled and what it cost (docs/theory.md "Full model").
  if (out.reconstruction.model == "full")
    for (const auto& [key, value] : out.reconstruction.settings) {
      if (key == "momentum_blocks" || key == "momentum_nodes" || key == "cost_evaluations")
        P("fit.full_model." + key, std::stoll(value));
      else if (key == "node_plan")
        P("fit.full_model." + key, value);
    }
  append_settings_echo(opt, &res.extra);  // settings.* from RetrieveOptions::describe

  // Energy support (recorded once, whoever writes the preprocess block).
  auto once = [&](const std::string& k, double v2) {
    if (!find_param(res.extra, k)) P(k, v2);
  };
  if (s.support_hi_eV > s.support_lo_eV) {  // absent when no support was found
    once("preprocess.support_lo_eV", s.support_lo_eV);
    once("preprocess.support_hi_eV", s.support_hi_eV);
  }
  once("preprocess.support_peak_sigma", s.support_peak_sigma);

  // Quality section (retrieval/analysis/quality.h).
  QualitySection q;
  add_signal_checks(q, trace.counts, s.background_counts, opt.quality);
  RetrievalEvidence e;
  e.trace_error = rec.trace_error;
  e.noise_floor_trace_error = rec.noise_floor_trace_error;
  e.fwhm_as = res.xuv->fwhm_as.value_or(0.0);
  e.transform_limited_fwhm_as = res.xuv->transform_limited_fwhm_as.value_or(0.0);
  {
    const auto ne = pr.intensity.cols();
    Eigen::Index lo = 0, hi = ne - 1;
    if (pr.support_hi_au > pr.support_lo_au) {
      while (lo < ne - 1 && pr.energy_au[static_cast<std::size_t>(lo)] < pr.support_lo_au) ++lo;
      while (hi > lo && pr.energy_au[static_cast<std::size_t>(hi)] > pr.support_hi_au) --hi;
    }
    e.energy_support_share = s.support_core_share;
    e.field_free_rows = static_cast<double>(s.field_free_rows);
    // Guards the lines' delays where the centre-of-energy method gives them (the joint fit,
    // when it ran, models the neighbour's tail and reports its own).
    if (!lines_step.used && lines_step.centre_of_energy && lines_step.centre_of_energy->done) {
      e.line_delay_reduced_chi2 = lines_step.centre_of_energy->reduced_chi2;
      e.line_separation_widths = lines_step.centre_of_energy->separation_widths;
    }
    if (s.line_pattern_checked) {
      e.line_pattern_agreement = s.line_pattern_disagreement.empty() ? 1.0 : 0.0;
      e.line_pattern_detail = s.line_pattern_disagreement;
    }
    for (const UnseenLine& u : s.unseen_lines)
      if (!e.unseen_line_strength || u.upper_limit > *e.unseen_line_strength) {
        e.unseen_line_strength = u.upper_limit;
        e.unseen_line = u.gas + " " + u.name + " (expected at " + format_g(u.kinetic_energy_eV, 4) +
                        " eV" + (u.separable ? "" : ", inside the analysed line's own band") + ")";
      }
    // Class margin: the satellite ratio against the nearest threshold, in bootstrap sigmas.
    const VerdictSection& vd = *res.verdict;
    if ((vd.pulse_class == PulseClass::kIsolated ||
         vd.pulse_class == PulseClass::kIsolatedWithSatellites) &&
        vd.satellite_intensity_ratio && vd.satellite_intensity_ratio_sigma &&
        *vd.satellite_intensity_ratio_sigma > 0) {
      const double r = *vd.satellite_intensity_ratio;
      const double d = std::min(std::abs(r - opt.satellite_ratio.isolated_max),
                                std::abs(r - opt.satellite_ratio.satellites_max));
      e.class_margin_sigma = d / *vd.satellite_intensity_ratio_sigma;
    }
    if (rec.retrieved.rows() == pr.intensity.rows() && rec.retrieved.cols() == ne &&
        pr.variance.size() == pr.intensity.size()) {
      double noise = 0;
      const Eigen::VectorXd meas = pr.intensity.colwise().sum().transpose();
      const Eigen::VectorXd model = rec.retrieved.colwise().sum().transpose();
      const Eigen::VectorXd var = pr.variance.colwise().sum().transpose();
      const double mis = spectrum_mismatch(meas, model, var, lo, hi, &noise);
      e.spectrum_mismatch = mis;
      e.spectrum_mismatch_noise = noise;
    }
  }
  e.energy_outside_support = m.energy_outside_support;
  e.fwhm_as_sigma = res.xuv->fwhm_as_sigma;
  e.peak_vector_potential_au = res.ir->peak_vector_potential_au;
  e.peak_vector_potential_au_sigma = res.ir->peak_vector_potential_au_sigma;
  if (rec.model != "full" && rec.ir.size() >= 5) {
    e.cma_phase_error_rad =
        opt.engine == "auto" && out.chain.size() == 1 ? out.cma_phase_error_rad : cma_error_of(rec);
    e.cma_phase_error_max_rad = opt.cma_phase_error_max_rad;
    e.momentum_nodes = rec.model == "banded-cma";
  }
  if (rec.engine == "ptychographic" || rec.engine == "projections") {  // measured-projection CMA
    e.cma_signal_counts = out.preprocess.signal_peak_counts;
    e.cma_min_signal_counts = opt.cma_min_signal_counts;
  }
  {
    // Two full-model starts (auto, when the CMA stalled), and the CMA run against the result.
    std::vector<const Reconstruction*> full;
    const Reconstruction* cma = nullptr;
    for (std::size_t ci = 0; ci < out.chain.size(); ++ci) {
      const Reconstruction& c = out.chain[ci];
      if (c.model == "full") {
        if (ci >= first_same) full.push_back(&c);  // starts on the headline's problem
      } else if (!cma) {
        cma = &c;
      }
    }
    const double f_final = res.xuv->fwhm_as.value_or(0.0);
    auto fwhm_of = [&](const Reconstruction& c) {
      return *pulse_metrics(c, pr.ir_omega_au, band_lo, band_hi).xuv.fwhm_as;
    };
    if (full.size() >= 2 && f_final > 0) {
      const Reconstruction& a = *full[full.size() - 2];
      const Reconstruction& b = *full.back();
      e.start_disagreement = std::abs(fwhm_of(a) - fwhm_of(b)) / f_final;
      const double g_lo = std::min(a.trace_error, b.trace_error),
                   g_hi = std::max(a.trace_error, b.trace_error);
      e.starts_comparable = g_hi <= opt.quality.comparable_fit_ratio * g_lo;
    }
    if (cma && rec.model == "full" && f_final > 0)
      e.engine_disagreement = std::abs(fwhm_of(*cma) - f_final) / f_final;
  }
  e.bias_over_sigma = fwhm_bias_over_sigma;
  e.peak_counts = peak_signal_counts(trace.counts, s.background_counts);
  if (rec.ir.size() >= 8 && rec.ir.peak_vector_potential() > 0)
    e.ir_field_ratio =
        rec.ir.peak_electric_field() / (pr.ir_omega_au * rec.ir.peak_vector_potential());
  e.ir_period_mismatch = ir_mismatch;
  add_retrieval_checks(q, e, opt.quality);
  res.quality = q;
  if (!q.trusted) {
    std::string failed;
    for (const auto& c : q.checks)
      if (!c.pass && c.guards_headline) failed += (failed.empty() ? "" : ", ") + c.name;
    res.warnings.push_back("the result is not trusted: failed quality checks " + failed +
                           " (the numbers are written; see quality in result.json)");
  }
  return out;
}

}  // namespace sw
