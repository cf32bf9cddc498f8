#pragma once
// Configuration of one synthetic scan: what XUV and IR fields, which target, which energy and
// delay axes, which detector and stage imperfections. Plain structs with in-class defaults and
// validate() (empty string when valid, otherwise a sentence naming the field by its dotted
// config key, its value and the constraint). Boundary units (eV, fs, as, nm, W/cm^2) are in the
// field names; generate_scan() converts to atomic units through retrieval/core/units.h.
//
// The defaults describe the reference scenario of the project: a transform-limited 150 as pulse
// at 95 eV ionising neon, streaked by a 5 fs, 800 nm, 5e12 W/cm^2 pulse, 121 delays over
// -6..6 fs, 300 energies of 0.25 eV from 40 eV, scaled to 500 peak counts with Poisson noise.
//
// Config files (cli/simulate_config.h) use the same names as dotted keys, e.g.
// `xuv.gaussian.center_eV`, `noise.peak_counts`, `delay_fs.first` or `delay_fs: [..]`;
// synthetic/config_fields.h enumerates every key once for the loader and the truth record.

#include <string>
#include <vector>

#include "retrieval/core/trace.h"
#include "retrieval/physics/dipole.h"
#include "retrieval/physics/ir_field.h"
#include "retrieval/physics/xuv_builders.h"

namespace sw::synthetic {

/// Which builder of retrieval/physics/xuv_builders.h makes the XUV field.
enum class XuvKind {
  kGaussian,    ///< one Gaussian-spectrum pulse (GaussianXuvPulse)
  kTrain,       ///< attosecond pulse train, odd-harmonic comb (XuvTrain)
  kSatellites,  ///< main burst with satellites at -+T/2 (XuvWithSatellites)
  kTabulated,   ///< spectrum from a table of photon energy, intensity, phase
};
const char* to_string(XuvKind k);
bool parse_xuv_kind(const std::string& s, XuvKind* out);

/// A tabulated XUV spectrum (make_tabulated_xuv): columns of equal length, photon energies
/// strictly ascending (eV), spectral intensity >= 0 (any unit), spectral phase (rad, unwrapped).
struct TabulatedSpectrum {
  double carrier_eV = 95.0;                ///< reference photon energy of the envelope (> 0)
  std::vector<double> photon_energy_eV;    ///< >= 2 values, strictly ascending
  std::vector<double> spectral_intensity;  ///< same length, >= 0
  std::vector<double> spectral_phase_rad;  ///< same length
};

/// The XUV description: `kind` selects which of the parameter structs is used; the others are
/// kept (and recorded) but ignored.
struct XuvConfig {
  XuvKind kind = XuvKind::kGaussian;
  GaussianXuvPulse gaussian;     ///< used when kind == kGaussian
  XuvTrain train;                ///< used when kind == kTrain
  XuvWithSatellites satellites;  ///< used when kind == kSatellites
  TabulatedSpectrum tabulated;   ///< used when kind == kTabulated

  /// The Gaussian burst underlying kGaussian/kTrain/kSatellites (nullptr for kTabulated).
  const GaussianXuvPulse* burst() const;
  std::string validate() const;  ///< names fields as "xuv.<struct>.<field>"
};

/// Presence of the IR streaking field.
enum class IrKind {
  kGaussian,  ///< sw::GaussianIrPulse (retrieval/physics/ir_field.h)
  kNone,      ///< no IR: field-free photoelectron spectra (XUV-only scans)
};
const char* to_string(IrKind k);
bool parse_ir_kind(const std::string& s, IrKind* out);

struct IrConfig {
  IrKind kind = IrKind::kGaussian;
  /// The IR pulse. Defaults of the reference scenario: 800 nm, 5 fs, 5e12 W/cm^2, cosine CEP,
  /// centred on the IR reference time t_IR = 0.
  GaussianIrPulse pulse{800.0, 5.0, 5e12, 0.0, 0.0, 0.0};
  std::string validate() const;  ///< names fields as "ir.<field>"
};

/// A uniform axis {first, step, count} in boundary units.
struct AxisSpec {
  double first = 0.0;  ///< first value
  double step = 1.0;   ///< > 0
  int count = 1;       ///< >= 1
  double value(int i) const { return first + step * i; }
};

/// Scan geometry. Delay tau = t_XUV - t_IR (DESIGN.md); rows are acquired in ascending delay
/// order (this matters for the stage-drift model of NoiseConfig).
struct ScanGeometry {
  /// Photoelectron kinetic energy axis (eV): first > 0, step > 0. Default 40 eV + 0.25 eV x 300.
  AxisSpec energy_eV{40.0, 0.25, 300};
  /// Uniform delay axis (fs), used when delay_values_fs is empty. Default -6..6 fs in 0.1 fs.
  AxisSpec delay_fs{-6.0, 0.1, 121};
  /// Explicit delays (fs), strictly ascending, non-uniform allowed; overrides delay_fs when
  /// non-empty. Config key `delay_fs: [..]` (or `delay_fs.values`).
  std::vector<double> delay_values_fs;

  /// The delay axis in fs (explicit list or the uniform axis).
  std::vector<double> delays_fs() const;
  /// The energy axis in eV.
  std::vector<double> energies_eV() const;
};

/// Spectrometer resolution model.
enum class ResolutionKind {
  kNone,      ///< ideal spectrometer
  kConstant,  ///< Gaussian of constant FWHM dE = resolution_fwhm_eV
  kRelative,  ///< Gaussian of FWHM dE = resolution_relative * W (time-of-flight-like)
};
const char* to_string(ResolutionKind k);
bool parse_resolution_kind(const std::string& s, ResolutionKind* out);

/// Detector, stage and laser imperfections. Applied by generate_scan() in this order:
///   per row (before the amplitude is evaluated, synthetic/fluctuations.h):
///     actual delay = nominal + jitter + linear drift + random-walk drift,
///     IR intensity x (1 + relative fluctuation), CEP + jitter;
///   then on the noise-free energy density p|a|^2 (synthetic/noise.h), in this order:
///     1 energy resolution (Gaussian convolution, counts conserved),
///     2 peak scaling (the largest element becomes peak_counts),
///     3 background (constant + exponential tail from its onset in kinetic energy, counts per
///       bin),
///     4 Poisson counting (expected value -> integer draw),
///     5 Gaussian readout noise,
///     6 hot pixels,
///     7 saturation (clip at saturation_counts) and clipping of negative values to 0.
/// With time-of-flight recording (ScanConfig::tof) the counts move to flight-time bins after
/// step 1; the peak scaling, the constant background (now per time bin), the noise and the
/// hot pixels act on the time bins, and the exponential tail (counts per energy bin of the
/// energy axis) is moved to the time bins like the signal.
/// Each random effect draws from its own sub-stream (synthetic/random_streams.h), so switching
/// one effect on or off never changes the realisation of another.
struct NoiseConfig {
  ResolutionKind resolution = ResolutionKind::kNone;  ///< spectrometer model
  double resolution_fwhm_eV = 0.0;                    ///< kConstant: FWHM (eV, > 0 when used)
  double resolution_relative = 0.0;                   ///< kRelative: FWHM / W (> 0 when used, < 1)
  double peak_counts = 500.0;      ///< expected counts of the largest signal bin (> 0)
  double background_counts = 0.0;  ///< constant background, expected counts per bin (>= 0)
  /// Energy-dependent background B(W) = background_exp_counts * exp(-W / background_exp_decay_eV)
  /// (W = kinetic energy, eV): the low-energy electron tail; counts per bin at W = 0 (>= 0).
  double background_exp_counts = 0.0;
  double background_exp_decay_eV = 10.0;  ///< decay energy of that tail (> 0)
  /// Onset of the tail (eV, >= 0): B_tail(W) = background_exp_counts *
  /// exp(-(W - onset) / decay) for W >= onset and 0 below it (IR-only above-threshold electrons
  /// start above the lowest recorded energy); background_exp_counts is then the level at the
  /// onset. The tail is the same in every delay row.
  double background_exp_onset_eV = 0.0;
  bool poisson = true;              ///< replace expected counts by Poisson draws
  double readout_rms_counts = 0.0;  ///< Gaussian readout noise, rms counts per bin (>= 0)
  double saturation_counts = 0.0;   ///< clip level of the detector (0 = no saturation)
  /// Hot pixels: this many isolated pixels (no two in one 3 x 3 neighbourhood) read
  /// factor x max(1, mean of their 8 neighbours' counts), the factor uniform in
  /// [hot_pixel_factor_min, hot_pixel_factor_max]; after readout noise, before the clip (>= 0).
  int hot_pixels = 0;
  double hot_pixel_factor_min = 20.0;   ///< smallest factor over the local counts (>= 2)
  double hot_pixel_factor_max = 200.0;  ///< largest factor (>= hot_pixel_factor_min)
  double delay_jitter_rms_fs = 0.0;     ///< independent delay error per row, rms (fs, >= 0)
  double delay_drift_fs_per_row = 0.0;  ///< linear stage drift per acquired row (fs, any sign)
  double delay_walk_rms_fs = 0.0;   ///< random-walk drift: rms of each row's increment (fs, >= 0)
  double ir_intensity_rms = 0.0;    ///< relative rms of the IR peak intensity per row, [0, 1)
  double cep_jitter_rms_rad = 0.0;  ///< rms of the IR CEP per row (rad, >= 0)

  std::string validate() const;  ///< names fields as "noise.<field>"
};

/// How finely the SFA integral is sampled (defaults are accurate to ~1e-6 relative).
struct NumericsConfig {
  /// Quadrature step = (Nyquist-limited step of the integrand) / oversampling (>= 1).
  double oversampling = 1.5;
  /// Quadrature nodes whose XUV envelope is below this fraction of its peak are skipped
  /// (in [0, 1e-3]).
  double node_threshold = 1e-10;
  /// The XUV envelope at the edges of the time window must be below this fraction of its peak;
  /// the window is doubled until it is (in (0, 1e-2]).
  double edge_tolerance = 1e-6;
  /// Time step of the grid on which the truth pulse metrics are evaluated, as a fraction of
  /// the transform-limited FWHM (in (0, 0.2]).
  double truth_step_fraction = 1.0 / 32.0;
  int threads = 0;               ///< OpenMP threads over delays; 0 = OpenMP default
  std::string validate() const;  ///< names fields as "numerics.<field>"
};

/// One photoelectron line of the scan. Every line is ionised by the same XUV pulse in the same
/// IR field, with its own threshold Ip: its amplitude is the SFA amplitude of DESIGN.md with
/// that Ip. Counts of different lines add incoherently (different final ionic states).
struct LineSpec {
  /// Gas of the line (symbol or name of retrieval/physics/gas.h); "" = the scan's gas. A line of
  /// another gas makes the scan a two-gas mixture.
  std::string gas;
  /// Hole orbital as in the gas table ("2p", "2s", "3p", "3s", ...); with ionization_energy_eV
  /// given, any label (used only in records).
  std::string name;
  /// Threshold of the line (eV); 0 = the gas table's value of the line `name`.
  double ionization_energy_eV = 0.0;
  /// Factor on the line's |dipole|^2 (partial cross-section times, for a line of another gas,
  /// that gas's share of the target density) relative to a line of strength 1 (> 0). The truth
  /// record reports the resulting ratio of delay-integrated counts, which differs from this
  /// factor by the p dW density of each line.
  double relative_strength = 1.0;
  /// Photoemission delay of the line (as): its amplitude is evaluated with E_X(t - delay_as),
  /// a linear spectral phase of its dipole; positive = emitted later.
  double delay_as = 0.0;
};

/// A line of a LineSpec with the table looked up.
struct ResolvedLine {
  std::string gas;                    ///< gas symbol
  std::string name;                   ///< hole orbital or label
  double ionization_energy_eV = 0.0;  ///< threshold (eV)
  double relative_strength = 1.0;     ///< |dipole|^2 factor
  double delay_as = 0.0;              ///< photoemission delay (as)
};

/// Time-of-flight recording: the scan is written on a flight-time axis instead of the energy
/// axis (io reads it back with its calibration block, io/tof_calibration.h). A field-free
/// drift of length L after the start time t0: E(t) = (m_e / 2) (L / (t - t0))^2 / e +
/// energy_offset_eV (CODATA 2018 m_e and e, retrieval/core/units.h). The flight-time bins are
/// uniform and span exactly the flight times of the energy axis' outer bin edges; the
/// noise-free counts of each energy bin are spread over the time bins by the overlap of their
/// energy intervals (counts conserved: the t^3 Jacobian of DESIGN.md "Pitfalls").
struct TofConfig {
  double length_m = 0.0;          ///< drift length L (m); 0 = record on the energy axis
  double t0_ns = 0.0;             ///< start time of the flight on the TOF clock (ns, finite)
  double energy_offset_eV = 0.0;  ///< added to the drift energy (eV, finite, < lowest edge)
  int bins = 0;                   ///< flight-time bins (>= 2); 0 = as many as energy bins
  bool enabled() const { return length_m > 0; }
};

struct ScanConfig {
  std::string name;  ///< label for notes (e.g. the preset name)
  XuvConfig xuv;
  IrConfig ir;
  std::string gas = "Ne";  ///< target symbol or name (retrieval/physics/gas.h)
  DipoleKind dipole =
      DipoleKind::kConstant;  ///< bound-free dipole model (retrieval/physics/dipole.h)
  /// Momentum (a.u.) where the hydrogenic dipole is normalised to 1; 0 = the central momentum
  /// sqrt(2 (Omega0 - Ip)). Ignored by the constant dipole. (>= 0)
  double dipole_reference_momentum_au = 0.0;
  ScanGeometry geometry;
  TraceKind kind = TraceKind::kStreaking;  ///< kind hint written to the sidecar
  /// Photoelectron lines; empty = the gas's outer-valence line alone (strength 1, no delay).
  /// The first line is the reference of the truth record's relative strengths and delays.
  std::vector<LineSpec> lines;
  TofConfig tof;  ///< time-of-flight recording (off by default)
  NoiseConfig noise;
  NumericsConfig numerics;
  TraceFormat output_format = TraceFormat::kPng16;

  /// Empty string when valid; otherwise names the field (dotted config key), its value and
  /// the constraint. Checks every sub-struct and their consistency (e.g. a streaking scan
  /// needs an IR field).
  std::string validate() const;

  /// The lines with the gas table looked up (the default line when `lines` is empty). Throws
  /// sw::Error (kInput) naming lines[i] when a gas or line name is unknown.
  std::vector<ResolvedLine> resolved_lines() const;
};

}  // namespace sw::synthetic
