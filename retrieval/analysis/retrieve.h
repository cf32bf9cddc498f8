#pragma once
// The streaking-retrieval pipeline behind `streakwright retrieve` (and batch): preprocess ->
// engine (or a chain of engines) -> time-origin fix -> pulse and field metrics -> verdict ->
// Poisson-bootstrap uncertainties -> quality checks (retrieval/analysis/quality.h) ->
// AnalysisResult. Library code: no files are written here.
//
// The XUV metrics come from the in-support field (preprocess's energy support, retrieval/
// support.h; the engines keep the spectrum zero outside it). The IR wavelength reported is the
// sidecar's; the retrieved field's own period goes to ir.wavelength_nm_retrieved, with a
// warning above 2 % and the check ir_period_vs_sidecar.
//
// Engine "auto": run the fast CMA engine (ptychographic); then estimate the CMA's own error
// from the retrieved field: the phase the CMA neglects is (p - p0) * (I1(t) - I1_mid) across
// the photoelectron band, evaluated at the band's FWHM edges. When it exceeds
// `cma_phase_error_max_rad` (default 0.6 rad, our choice: the reference 150 as neon case at 5e12
// W/cm^2 sits at 0.38 rad and is retrieved within 3 % by the CMA; the broadband helium case sits at
// ~1 rad) the full-model engine refines the CMA result (DESIGN.md: "switch to the full model when
// the bandwidth is not small"). It also refines when the CMA engine stopped with its trace error
// above `cma_trace_error_max_ratio` (default 2, our choice) times the noise floor: on the
// satellite preset the CMA engines stall at 4-5 x the floor with the satellites too small,
// and the full model started from that result reaches the floor (docs/validation.md); the
// clean presets sit at 1.0-1.25 x. It also refines when the CMA's IR field fails the
// ir_field_vs_vector_potential limit (max |E| > QualityOptions::max_ir_field_ratio x omega
// max |A|: noise in A(t)); on the imperfections set that took a 25-count wide-window scan
// from +10 % to +4.6 % and CEP-jittered krypton's A0 from +24 % to +1.6 % (docs/validation.md). In
// that case the full model runs twice, from the CMA result and from its own guess (parametric IR),
// and the better fit is kept. It also refines when the scan has few counts per bin:
// PreprocessSummary::signal_peak_counts below `cma_min_signal_counts` (default 60, our choice):
// there the CMA engine's projections follow the counting noise into biased widths and chirps
// that its replicas do not show, while the full model's Poisson-weighted fit does not
// (docs/validation.md "Few counts per bin").
//
// Uncertainties: parametric bootstrap (Wang, Zeek, Trebino and Kvam, JOSA B 20, 2400 (2003),
// with Poisson resampling of the counts in place of resampling data points): each replica is
// a Poisson draw of the measured counts, preprocessed identically and, by default
// (`uncertainty` = full), analysed by the same engine chain from the same kind of start;
// `uncertainty` = warm starts the final engine from the estimate instead, `uncertainty` =
// laplace takes one Newton step from a full-model estimate per replica (retrieval/analysis/
// uncertainty.h, docs/theory.md). The replicas run concurrently on `threads` worker threads
// (retrieval/analysis/thread_pool.h). Per headline number (FWHM, GDD, A0):
//   s_stat = t_B x sample standard deviation of the B replicas, t_B the Student factor of the
//            central 68.27 % interval with B - 1 degrees of freedom (1.20 for B = 4, 1.08 for
//            B = 8; Student, Biometrika 6, 1 (1908)): a few replicas under-estimate the spread;
//   bias   = mean(replicas) - estimate (Efron and Tibshirani, An Introduction to the
//            Bootstrap, Chapman & Hall 1993, ch. 10). Corrected (value - bias, sigma_stat =
//            s_stat sqrt(1 + 1/B)) only when 2 s_stat / sqrt(B) <= |bias| <= s_stat
//            (significant against the bias estimate's own standard error, and small against
//            sigma: the correction cannot move the value by more than its sigma; with B <= 4
//            never). Otherwise, unless negligible (< s_stat / 4), the value stays and the bias
//            enters sigma (the replicas, with the noise doubled, may show an effect that is
//            systematic, not statistical);
//   s_sys  = the retrieval's own spread: the sample standard deviation of the number over the
//            chain's runs whose fits are equally good (G within QualityOptions::
//            comparable_fit_ratio of the best; a CMA run only when its phase error is within
//            the limit), 0 with one such run;
//            for the FWHM and A0 at least `method_sigma_relative` x |value| (the method's own
//            accuracy on scans it was not tuned on, see the option); for the FWHM, where the
//            window is cut inside the reference line's streaked band, in quadrature with
//            `window_cut_sigma_per_share` x the share of the line beyond the cut x |value|;
//   sigma  = sqrt(s_stat^2 + s_sys^2 + (uncorrected bias)^2), each part written under
//            bootstrap.* (and xuv.fwhm_as_sigma_statistical / _systematic).

#include <array>
#include <functional>
#include <string>
#include <vector>

#include "retrieval/analysis/classifier.h"
#include "retrieval/analysis/line_delays.h"
#include "retrieval/analysis/quality.h"
#include "retrieval/analysis/uncertainty.h"
#include "retrieval/core/option_spec.h"
#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"
#include "retrieval/engines/engine.h"
#include "retrieval/preprocess/preprocess.h"

namespace sw {

/// Options of the streaking retrieval. Each field is described once, in describe() below
/// (bounds, unit, help, CLI flag, batch config key; retrieval/core/option_spec.h): validate(), the
/// flags of `retrieve` and `batch`, the batch config file, the settings.* echo in result.json
/// and the batch option strings are all walks of that description.
struct RetrieveOptions {
  /// "auto", or a registered engine name (make_engine lists them).
  std::string engine = "auto";
  /// Iterations of the (first) engine; 0 = the engine's default (EngineOptions).
  int iterations = 0;
  /// Bootstrap replicas for the uncertainties (>= 0; 0 = no sigmas, with a warning).
  int bootstrap = 8;
  /// Seed of the random delay order and the bootstrap draws.
  unsigned long long seed = 1;
  /// Worker threads of the analysis (>= 0; 0 = the machine's hardware threads): the bootstrap
  /// replicas run concurrently, one per thread (retrieval/analysis/thread_pool.h), and so do
  /// the estimate's two independent full-model runs (the satellite starts of both signs; the
  /// starts from the CMA result and from the full model's own guess). The replicas of the full
  /// chain (`uncertainty` full, or laplace's check) start during the estimate: with `auto`,
  /// their CMA runs on the other threads beside the estimate's CMA run (kept when that run
  /// ends with the momentum-node count they were started with, else dropped and made again
  /// later); while its single full-model run from the CMA result has one thread, on the
  /// others; and more (up to twice the threads in all) in the task list of its satellite
  /// starts, each up to its own full-model result. Every engine runs single-threaded and every
  /// replica draws from its index alone, so the results are bit-identical for any value.
  int threads = 0;
  /// How the bootstrap replicas start (retrieval/analysis/uncertainty.h): kFull = the whole engine
  /// chain from scratch (default), kWarm = the final engine from the estimate, kLaplace = one
  /// Newton step per replica from a full-model estimate (else kFull).
  UncertaintyMethod uncertainty = UncertaintyMethod::kFull;
  /// kLaplace: replicas of the full chain (kFull's replicas 0 .. K-1, at most `bootstrap`) that
  /// test the linearised sigmas of the FWHM and the IR peak A0 before they are reported
  /// (check_sigma, retrieval/analysis/uncertainty.h); when either fails, the full bootstrap runs
  /// (reusing these K) and result.json's bootstrap.method says why. 0 = no check. Default 2 (our
  /// choice, each costing one replica of the full bootstrap; they run on the worker threads beside
  /// the linearised replicas). Measured on the validation set
  /// (docs/validation.md, with the settle window of 5): a linearised sigma 3.8x too small (a
  /// time-of-flight scan, 14.7 as against the full bootstrap's 56.5 as) failed at chi2 = 38
  /// (31.8 with the window of 2); a second minimum that one of
  /// four full replicas fell into (a 3-burst train, 174 as against 203 as) is seen only when
  /// that replica is among the K (K = 2: probability 1 - (3/4)^2 = 0.44; it was not).
  int laplace_check_replicas = 2;
  /// kWarm: a replica stops when |G_k - G_{k-warm_patience}| / G_k is below
  /// max(relative_tolerance, noise_floor_relative_tolerance) of EngineOptions (>= 1). Default 5
  /// iterations (our choice): from the converged estimate the replica only follows the linear
  /// response to its extra noise. On the sat2-ne validation scan (full model, 4 replicas) the
  /// analysis took 23.6 s CPU with 20 (the cold-start patience), 13.2 s with 5, and 17-19 s
  /// with the full chain (docs/performance.md).
  int warm_patience = 5;
  /// Every full-model run of the chain (from the CMA result, from its own guess, the satellite
  /// starts, the joint lines, each replica): EngineOptions::patience, the engine iterations
  /// (FullModelSettings::lbfgs_per_iteration = 10 L-BFGS iterations each) over which G must
  /// settle -- at the noise floor, relative change < noise_floor_relative_tolerance; above it,
  /// < relative_tolerance -- before the run stops (>= 1). Default 2 (our choice; 20 at first, the
  /// patience of the CMA engines, whose iteration is one pass over the delays, then 5): started
  /// from a CMA result the full model reaches the floor within 1-2 iterations and then only moves
  /// G by ~1e-5 of itself while following the counting noise, so the window is spent for nothing
  /// (docs/performance.md "Fewer evaluations" and "Round 11": 5 -> 2 took the helium analysis from
  /// 34.5 to 24.4 s CPU; on the eight validation files no change beyond their noise, paired
  /// |error|/sigma +0.03 +- 0.04, within 2 sigma 91 -> 90 of 96, wrong 12 -> 11, wrong and
  /// trusted 0, trusted 54 -> 52; docs/validation.md "A shorter settle window"). The window is
  /// echoed as settings.full_model_patience: 5 in a result.json made before. 1 is not the
  /// default: on the 40-count scan of tests/test_retrieve.cpp a run from the CMA result then
  /// stops 1.1 % (0.8 sigma) short of its settled FWHM, a bias every replica repeats
  /// (docs/validation.md "The settle window of one iteration").
  int full_model_patience = 2;
  /// auto: largest CMA phase error (rad) tolerated before the full model refines.
  double cma_phase_error_max_rad = 0.6;
  /// auto: largest G / G_noise (trace error over its noise floor) accepted from the CMA
  /// engine before the full model refines (> 1). A CMA result well above the floor has not
  /// explained the data -- a local minimum (multi-burst pulses) or a CMA-limited case.
  double cma_trace_error_max_ratio = 2.0;
  /// auto: fewest counts per delay row in the strongest analysed bin
  /// (PreprocessSummary::signal_peak_counts) at which a CMA result is kept; below it the full
  /// model refines. Default 60 (our choice, from docs/validation.md "Few counts per bin"): on the
  /// validation scans below ~60 the CMA engine's projections are biased by the counting noise
  /// (FWHM -9 % to +9 %, GDD shrunk by 40 %) beyond its replicas' spread, where the full model,
  /// a least-squares fit weighted by the Poisson variances, stays within 1-5 %. 0 = off.
  double cma_min_signal_counts = 60.0;
  /// Verdict thresholds (DESIGN.md defaults, common practice, no published standard), for
  /// every analysis.
  SatelliteThresholds satellite_ratio;
  /// auto: when the full model ran and its burst has no satellite above
  /// satellite_ratio.isolated_max, run it twice more from that burst with satellites of
  /// `satellite_start_ratio` at -+T/2 (each field sign; retrieval/physics/satellite_seed.h) and
  /// keep a start that fits better; an equally good start enters the systematic spread (s_sys
  /// above) of the headline numbers and of the satellite ratio (so class_margin_sigma sees a
  /// class the data cannot decide).
  bool satellite_start = true;
  /// Intensity ratio of the seeded satellites (in (0, 1); 0.2, between the isolated and the
  /// satellites thresholds: our choice).
  double satellite_start_ratio = 0.2;
  /// A satellite start is kept only when its trace error G is below the first result's by more
  /// than satellite_start_margin / sqrt(N) of it (N = the analysed delays x energies; >= 0).
  /// Counting noise alone scatters G by about 1 / sqrt(2 N) of itself (G is the square root of a
  /// sum of N weighted squares), so 1 asks for ~1.4 of that scatter: a start that ends in the
  /// first result's minimum (G lower by ~1e-4, both at the noise floor) is then not adopted
  /// (replica_satellite_margin below already spares the replicas its restart). Default 0: keep
  /// any start with a lower G.
  /// Not 1, because on the validation set such a start also acts as a restart that moves a
  /// flat, low-count estimate (low40-ar-wide: FWHM +8.6 % with margin 0, +10.1 % with 1, beyond
  /// its 10 % tolerance and trusted; docs/validation.md "The satellite start's margin").
  double satellite_start_margin = 0.0;
  /// Each bootstrap replica (uncertainty full, and the laplace check's) repeats an adopted
  /// satellite start from its own result only when that start lowered the estimate's G by more
  /// than replica_satellite_margin / sqrt(N) of it (>= 0; 0: whenever a start was adopted).
  /// Below that the adopted start and the first result are two equally good fits (G within the
  /// counting noise), and their spread is already in the systematic part of the headline sigma
  /// (comparable_fit_ratio, retrieve.h above; a first result outside that ratio, possible only
  /// for a large margin or a scan of a few dozen cells, makes the replicas repeat the start): a
  /// restart in every replica would add the same spread again at the cost of one more full-model
  /// run per replica (half the CPU of the default analysis of helium-70as, docs/performance.md
  /// "Round 13"). The headline value is not affected, only its sigma. With the joint lines (whose
  /// sigma holds no such spread) every replica repeats an adopted start. Default 1
  /// (docs/validation.md "The replicas' satellite start").
  double replica_satellite_margin = 1.0;
  /// Wall-time budget for the whole analysis (s).
  double max_seconds = 900.0;
  /// Relative systematic uncertainty of the retrieval method itself, a floor on s_sys of the
  /// FWHM and of A0 (>= 0; 0 = off). Default 0.01: the rms error of the "good scans" block of
  /// the imperfections validation set (docs/validation.md: 1.1 % in FWHM, 1.0 % in A0 over six
  /// clean scans of five gases; a counting-noise sigma alone left four of them outside 2 sigma).
  /// The other 31 cases of that set were not used to choose it.
  double method_sigma_relative = 0.01;
  /// Where the reference-line window is cut at a neighbour inside the reference's streaked band
  /// (PreprocessSummary::window_cut_share = c, the share of the reference's counts beyond the
  /// cut), the FWHM's systematic sigma gains k c |FWHM| in quadrature, k this option (>= 0;
  /// 0 = off). Default 1 (our choice): the unmeasured share of the line bounds the relative
  /// change of its width. Measured (docs/validation.md "A cut inside the streaked band"): the
  /// FWHM error of such scans is +-0.9 to +4.9 % at shares 0.03-0.07 and up to +2.9 % at
  /// 0.014-0.02, against 1 % floors before; it is written as xuv.fwhm_as_sigma_window_cut.
  double window_cut_sigma_per_share = 1.0;
  PreprocessOptions preprocess;
  /// Limits of the quality checks (retrieval/analysis/quality.h).
  QualityOptions quality;
  /// Relative delays of the other photoelectron lines (retrieval/analysis/line_delays.h); run when
  /// preprocessing found two or more lines; its seed follows `seed`.
  LineDelayOptions line_delays;
  /// The engines' own settings, typed (retrieval/engines/engine_options.h; the name=value text
  /// form goes through apply_engine_option_text with `engine`). Every engine run of the analysis
  /// gets them. Without a measured field-free spectrum, spectrum_constraint becomes centroid
  /// unless it is given (EngineSettings::given); the bootstrap's ptychographic runs use the
  /// estimate's momentum nodes unless momentum_bands is given.
  EngineSettings engine_settings;

  /// The one description of the fields above that the CLI, config files and the result echo
  /// use (retrieval/core/option_spec.h). Order = order of settings.* in result.json.
  template <class Self, class V>
  static void describe(Self& self, V& v) {
    v(OptionSpec{.name = "engine",
                 .help =
                     "reconstruction engine: auto or a registered engine (see `retrieve --help`)",
                 .flag = "--engine",
                 .config_key = "engine"},
      self.engine);
    v(OptionSpec{.name = "iterations",
                 .help = "iterations of the first engine; 0 = engine default (300)",
                 .min = 0,
                 .flag = "--iterations",
                 .config_key = "iterations"},
      self.iterations);
    v(OptionSpec{.name = "bootstrap",
                 .help = "Poisson-bootstrap replicas for the uncertainties (0 = none)",
                 .min = 0,
                 .flag = "--bootstrap",
                 .config_key = "bootstrap"},
      self.bootstrap);
    v(OptionSpec{.name = "seed",
                 .help = "seed of the delay order and the bootstrap draws (batch: the base seed; "
                         "each scan derives its own)",
                 .flag = "--seed",
                 .config_key = "seed"},
      self.seed);
    v(OptionSpec{.name = "threads",
                 .help =
                     "worker threads for the bootstrap replicas (they start beside the "
                     "estimate's CMA and full-model runs) and the estimate's paired full-model "
                     "starts "
                     "(0 = the machine's cores; batch: 1 per job with --jobs > 1); results do not "
                     "depend on it",
                 .min = 0,
                 .flag = "--threads",
                 .config_key = "threads"},
      self.threads);
    v(OptionSpec{.name = "uncertainty",
                 .help = "bootstrap replicas from scratch (full), warm-started from the estimate "
                         "(warm), or one Newton step from a full-model estimate each (laplace: the "
                         "Laplace approximation, sampled); docs/theory.md",
                 .choices = "full|warm|laplace",
                 .flag = "--uncertainty",
                 .config_key = "uncertainty"},
      self.uncertainty);
    v(OptionSpec{.name = "laplace_check_replicas",
                 .help = "laplace: replicas of the full chain that test the linearised sigmas "
                         "(chi-square at 99 %; failed: the full bootstrap runs); 0 = no check",
                 .min = 0,
                 .max = 1000,
                 .flag = "--laplace-check",
                 .config_key = "laplace_check_replicas"},
      self.laplace_check_replicas);
    v(OptionSpec{.name = "warm_patience",
                 .help = "warm replicas: iterations over which G must change by < 1e-3 to stop",
                 .min = 1},
      self.warm_patience);
    v(OptionSpec{.name = "full_model_patience",
                 .help = "full-model runs: iterations (10 L-BFGS steps each) over which G must "
                         "settle to stop (5 reproduces results made before the default became 2; "
                         "1 can stop a run before its FWHM has settled, docs/validation.md)",
                 .min = 1,
                 .max = 1000,
                 .flag = "--full-model-patience",
                 .config_key = "full_model_patience"},
      self.full_model_patience);
    v(OptionSpec{.name = "cma_phase_error_max_rad",
                 .unit = "rad",
                 .help = "auto: CMA phase error above which the full model refines",
                 .min = 0,
                 .min_open = true,
                 .flag = "--cma-phase-limit",
                 .config_key = "cma_phase_limit"},
      self.cma_phase_error_max_rad);
    v(OptionSpec{.name = "cma_trace_error_max_ratio",
                 .help = "auto: CMA trace error / noise floor above which the full model refines",
                 .min = 1,
                 .min_open = true,
                 .flag = "--cma-fit-limit",
                 .config_key = "cma_fit_limit"},
      self.cma_trace_error_max_ratio);
    v(OptionSpec{.name = "cma_min_signal_counts",
                 .unit = "counts",
                 .help = "auto: counts per delay row in the strongest analysed bin below which "
                         "the full model refines the CMA result (0 = off)",
                 .min = 0,
                 .flag = "--cma-min-counts",
                 .config_key = "cma_min_counts"},
      self.cma_min_signal_counts);
    v(
        OptionSpec{
            .name = "method_sigma_relative",
            .help = "relative systematic uncertainty of the method (floor of s_sys of FWHM and A0)",
            .min = 0,
            .max = 1,
            .max_open = true,
            .batch = false},  // not settable in batch: constant there
        self.method_sigma_relative);
    v(OptionSpec{.name = "window_cut_sigma_per_share",
                 .help = "relative FWHM sigma per unit share of the reference line's counts "
                         "beyond a window cut inside its streaked band",
                 .min = 0,
                 .max = 100,
                 .batch = false},  // not settable in batch: constant there
      self.window_cut_sigma_per_share);
    v(kIsolatedMaxSpec, self.satellite_ratio.isolated_max);
    v(kSatellitesMaxSpec, self.satellite_ratio.satellites_max);
    v(OptionSpec{.name = "satellite_start",
                 .help = "auto: also start the full model from its burst with satellites at -+T/2 "
                         "(on by default)",
                 .flag = "--satellite-start,!--no-satellite-start",
                 .config_key = "satellite_start"},
      self.satellite_start);
    v(OptionSpec{.name = "satellite_start_ratio",
                 .help = "intensity ratio of the satellites of that start",
                 .min = 0,
                 .min_open = true,
                 .max = 1,
                 .max_open = true},
      self.satellite_start_ratio);
    v(OptionSpec{.name = "satellite_start_margin",
                 .help = "keep a satellite start only if its G is lower by more than this / "
                         "sqrt(delays x energies) (relative; 0 = any lower G; 1 refuses a start "
                         "that only restates the first result, docs/cli.md)",
                 .min = 0,
                 .flag = "--satellite-start-margin",
                 .config_key = "satellite_start_margin"},
      self.satellite_start_margin);
    v(OptionSpec{.name = "replica_satellite_margin",
                 .help = "bootstrap replicas repeat an adopted satellite start only if it "
                         "lowered G by more than this / sqrt(delays x energies) (0 = always)",
                 .min = 0,
                 .flag = "--replica-satellite-margin",
                 .config_key = "replica_satellite_margin"},
      self.replica_satellite_margin);
    v(OptionSpec{.name = "dipole",
                 .help = "dipole model of the photoionisation",
                 .choices = "constant|hydrogenic",
                 .flag = "--dipole",
                 .config_key = "dipole"},
      self.preprocess.dipole);
    v(OptionSpec{.name = "energy_combine",
                 .help = "energy bins summed into one before the engines: 0 = auto (an axis finer "
                         "than the XUV window needs), 1 = never, k = always k",
                 .min = 0,
                 .max = 64,
                 .flag = "--energy-combine",
                 .config_key = "energy_combine"},
      self.preprocess.energy_combine);
    v(OptionSpec{.name = "despike",
                 .help = "replace isolated hot pixels (no smoothing; on by default)",
                 .flag = "--despike,!--no-despike",
                 .config_key = "despike",
                 .echo = false},
      self.preprocess.hot_pixels.remove);
    v(OptionSpec{.name = "max_seconds",
                 .unit = "s",
                 .help = "wall-time budget of the analysis of one scan",
                 .min = 0,
                 .min_open = true,
                 .flag = "--max-seconds",
                 .config_key = "max_seconds",
                 .echo = false},
      self.max_seconds);
  }
  std::string validate() const;
};

/// Progress report: stage ("ptychographic", "full-model", "bootstrap 3/8"), iteration record.
/// Called from the replicas' worker threads too, one call at a time (retrieve() serialises them).
using RetrieveProgress = std::function<void(const std::string& stage, const IterationRecord&)>;

struct RetrieveOutput {
  AnalysisResult result;
  RetrievalProblem problem;
  PreprocessSummary preprocess;
  Reconstruction reconstruction;       ///< final (time origin fixed)
  std::vector<Reconstruction> chain;   ///< every engine run, in order
  double cma_phase_error_rad = 0.0;    ///< estimate used by auto
  double cma_trace_error_ratio = 0.0;  ///< G / G_noise of the CMA run (auto; 0 = no floor)
  std::string full_model_start;        ///< auto: where the full model's result started
  /// auto: why the full model refined ("cma phase error", "cma fit above floor", "noisy IR
  /// field", "few counts per bin", comma-separated; empty = it did not).
  std::string full_model_reason;
  /// Bootstrap replicas' headline numbers (fwhm_as, gdd_as2, A0, satellite ratio).
  std::vector<std::array<double, 4>> bootstrap_samples;
  /// First moment of each analysed line versus delay with the joint fit (reference first;
  /// empty when fewer than two lines were analysed).
  std::vector<LineCurve> line_curves;
};

/// Runs the pipeline. Throws sw::Error for bad options (kUsage) or data (kInput); a
/// non-converged engine still returns its best estimate with fit.converged = false.
RetrieveOutput retrieve(const Trace& trace, const RetrieveOptions& options,
                        const RetrieveProgress& progress = {});

/// Headline metrics of a reconstruction (used by retrieve and by tests). With a support band
/// (photon energies lo < hi, a.u.) every XUV metric comes from the in-support field
/// (within_band): noise outside the signal's band adds neither width nor a pedestal.
/// FWHM and transform limit are measured with >= 16 samples per FWHM (intensity_fwhm).
/// ir.wavelength_nm is the period of the retrieved A(t) (mean spacing of its zero crossings
/// where |A| > 0.3 A0); retrieve() reports the sidecar's wavelength and keeps this one as
/// ir.wavelength_nm_retrieved.
struct PulseMetrics {
  XuvSection xuv;
  IrSection ir;
  double satellite_intensity_ratio = 0.0;
  double main_burst_energy_fraction = 1.0;
  int comparable_bursts = 1;
  double energy_outside_support = 0.0;  ///< share of |E~|^2 outside the band (0 without one)
};
PulseMetrics pulse_metrics(const Reconstruction& r, double ir_omega_au,
                           double support_lo_photon_au = 0.0, double support_hi_photon_au = 0.0);

/// Moves the XUV so its intensity centroid is at s = 0 and the IR with it (the common time
/// shift ambiguity), so that tau = 0 means the XUV centroid coincides with IR time 0.
void fix_time_origin(Reconstruction& r);

/// The CMA's neglected phase (rad) for a retrieved IR field over a photoelectron band.
double cma_phase_error(const IrField& ir, double p0_au, double band_lo_au, double band_hi_au,
                       double t_first_au, double t_last_au);

/// Envelope FWHM (a.u.) of a real field sampled uniformly (|analytic signal|^2).
double envelope_fwhm(const std::vector<double>& samples, double dt_au);

}  // namespace sw
