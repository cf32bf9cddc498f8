#pragma once
// The imperfections validation set: named synthetic scans with the imperfections of measured
// scans (issue 10, item 1), each simulated by the direct-quadrature generator (synthetic/),
// analysed by sw::retrieve with default options, and scored against the generator's truth.
// Used by the imperfections_sweep program (the whole set, tables for docs/validation.md) and by
// tests/test_imperfections_sweep.cpp (a smoke run of two cheap cases).
//
// Scoring (issue 10, "Targets"): a row is "wrong" when the retrieved FWHM or A0 misses the truth
// by more than the case's tolerance -- 5 % at >= 100 peak counts; 8 % for 280-540 eV pulses,
// scans without field-free rows and saturated scans; 10 % below 100 peak counts -- or the class
// differs from the truth's. "wrong_and_trusted" = wrong with quality.trusted true (or with no
// quality section, which the contract does not allow: counted as trusted).

#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "synthetic/scan_config.h"

namespace sw::validation {

struct ValidationCase {
  std::string name;          ///< unique id, lower case with dashes
  std::string imperfection;  ///< group: "good", "low counts", "tof", "lines", ...
  std::string description;   ///< one line: what the scan is
  synthetic::ScanConfig config;
  unsigned long long seed = 1;
  bool good = false;           ///< a clean, typical scan (false-alarm count)
  bool no_field_free = false;  ///< the delay range stays inside the IR pulse
  /// Relative tolerance of FWHM and A0 (issue 10 targets; see tolerance_for()).
  double tolerance = 0.05;
  /// The sidecar's `lines` a user would declare (e.g. the gases of a mixture); empty = none.
  std::vector<DeclaredLine> declared_lines;
};

/// The target for a case: 0.10 below 100 peak counts, else 0.08 for centre photon
/// energies of 280-540 eV, no field-free rows or a saturation level, else 0.05.
double tolerance_for(const synthetic::ScanConfig& c, bool no_field_free);

/// Every case, in a fixed order (at least 30, each a distinct scenario).
std::vector<ValidationCase> validation_cases();

/// `n` held-out cases drawn at random (seeded) over what a beamline varies -- gas, photon
/// energy, transform limit, GDD, IR wavelength, duration, intensity and CEP, counts, axes -- with
/// random imperfections (flat background, low-energy tail, delay drift and jitter, dE/E
/// resolution, hot pixels, satellites). None of them was used to choose a default: they count
/// wrong-and-trusted results and coverage on scans the code was not tuned on.
std::vector<ValidationCase> held_out_cases(int n, unsigned long long seed);

struct SweepOptions {
  int bootstrap = 4;  ///< Poisson-bootstrap replicas per retrieval (>= 0)
  /// Engine of sw::retrieve ("auto" = the default chain; or a registered engine name, for the
  /// per-engine errors of docs/validation.md).
  std::string engine = "auto";
  std::string uncertainty = "full";  ///< RetrieveOptions::uncertainty by name (full | warm)
  int jobs = 1;                      ///< cases run at the same time (threads, >= 1)
  std::string work_dir;  ///< folder for the scans written through files (TOF); "" = temp
  bool verbose = true;   ///< one line per finished case on stderr
  /// > 0: run held_out_cases(held_out, held_out_seed) instead of the named set.
  int held_out = 0;
  unsigned long long held_out_seed = 1;
  /// >= 1: every scan recorded on an energy axis this many times finer (refined_scan()).
  int energy_refine = 1;
  int energy_combine = 0;  ///< RetrieveOptions::preprocess.energy_combine (0 = auto, 1 = never)
  /// RetrieveOptions::full_model_patience (0 = retrieve's default).
  int full_model_patience = 0;
};

/// The same measurement histogrammed on `f` times finer energy bins: step / f, count x f (and
/// time-of-flight bins x f); the expected counts per bin (peak, background, tail, saturation
/// level) / f and the readout rms / sqrt(f), so that f adjacent bins sum to the original
/// statistics.
synthetic::ScanConfig refined_scan(synthetic::ScanConfig c, int f);

struct SweepRow;
/// Called (under a lock) with each row as soon as its case has finished.
using RowCallback = std::function<void(const SweepRow&)>;

struct SweepRow {
  std::string name, imperfection;
  bool good = false;
  double peak_counts = 0;
  double tolerance = 0;
  double truth_fwhm_as = 0, fwhm_as = 0, fwhm_sigma_as = 0;  ///< sigma 0 = not reported
  double truth_a0 = 0, a0 = 0;
  std::string truth_class, retrieved_class;
  bool has_quality = false, trusted = true;
  std::string failed;  ///< quality.failed joined by ';'
  std::string engine;
  std::string error;  ///< non-empty when the analysis threw (the message)
  double seconds = 0;
  double window_cut_share = 0;     ///< preprocess.window_cut_share (0 = no cut inside the band)
  std::string uncertainty_method;  ///< bootstrap.method ("" without replicas)

  double fwhm_error() const;    ///< (retrieved - truth) / truth
  double a0_error() const;      ///< (retrieved - truth) / truth
  double pull() const;          ///< (retrieved - truth) / sigma (NaN without sigma)
  bool within(double k) const;  ///< |retrieved - truth| <= k sigma (false without sigma)
  bool wrong() const;           ///< error beyond tolerance or class wrong (or analysis failed)
  bool wrong_and_trusted() const;
};

/// Writes the named cases' scans (all when `names` is empty) as 16-bit PNG scans with their
/// sidecars into `dir` (time-of-flight cases on their flight-time axis), so that a case can be
/// analysed with the command line; returns the sidecar paths.
std::vector<std::string> write_scans(const std::vector<std::string>& names,
                                     const SweepOptions& options, const std::string& dir);

/// The cases a sweep with these options draws from: held_out_cases() when options.held_out > 0,
/// else validation_cases().
std::vector<ValidationCase> sweep_cases(const SweepOptions& options);

/// Runs the named cases (all when `names` is empty); throws sw::Error (kUsage) naming an
/// unknown case. Rows come back in the order of the cases.
std::vector<SweepRow> run_sweep(const std::vector<std::string>& names, const SweepOptions& options,
                                const RowCallback& on_row = {});

/// One CSV line of a row (no newline) and the CSV header line.
std::string sweep_csv_header();
std::string sweep_csv_line(const SweepRow& row);

/// Generates every case (no retrieval) and returns one line per case: truth FWHM, TL, class,
/// A0, the largest noise-free signal in the outer 2 % of the energy axis relative to the peak
/// (the window must hold the whole streaked spectrum), the generator's warnings and its time.
std::string check_scans(const std::vector<std::string>& names, const SweepOptions& options);

/// Rows read back from a CSV written by sweep_csv (to redo tables and figures without rerunning
/// the retrievals); throws sw::Error (kInput) naming the line on a malformed row.
std::vector<SweepRow> rows_from_csv(const std::string& text, const std::string& where);

/// Figures of a sweep into `dir`: imperfections_fwhm_error.png (FWHM error per case with its
/// 1-sigma bar, trusted and untrusted results as separate series, the target band dashed) and
/// imperfections_pull.png (error / sigma per case, +-1 and +-2 dashed).
void sweep_figures(const std::vector<SweepRow>& rows, const std::string& dir);

/// The CSV (header + one line per row) and the markdown table with the summary lines.
std::string sweep_csv(const std::vector<SweepRow>& rows);
std::string sweep_markdown(const std::vector<SweepRow>& rows);
/// Summary lines: coverage within 1 and 2 sigma (rows >= 50 peak counts with a sigma), false
/// alarms on good scans, wrong-and-trusted count.
std::string sweep_summary(const std::vector<SweepRow>& rows);

}  // namespace sw::validation
