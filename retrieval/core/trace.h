#pragma once
// A photoelectron-energy-versus-delay scan: the one data type shared by loaded and synthetic
// scans (DESIGN.md "Trace file contract"). Axes are kept in atomic units inside the engine;
// io/ converts from the sidecar's eV/fs and back.

#include <map>
#include <optional>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "retrieval/core/result.h"

namespace sw {

/// What kind of scan the sidecar says this is (a hint; analyses may decide for themselves).
enum class TraceKind { kUnknown, kStreaking, kRabbitt, kXuvOnly };
const char* to_string(TraceKind k);
/// Parses "streaking", "rabbitt", "xuv_only" or "" (unknown); returns false on anything else.
bool parse_trace_kind(const std::string& s, TraceKind* out);

/// File format of a trace's data image (io/trace_writer.h writes it, the simulator's config
/// names it): 16-bit PNG, TIFF or CSV.
enum class TraceFormat { kPng16, kTiff, kCsv };
/// "png16", "tiff", "csv".
const char* to_string(TraceFormat f);
/// Parses the names above; returns false on anything else.
bool parse_trace_format(const std::string& s, TraceFormat* out);

/// A photoelectron line declared by the sidecar's `lines` key (DESIGN.md trace contract).
struct DeclaredLine {
  std::string name;  ///< e.g. "2s"; matched against the gas table
  /// Binding energy (eV); nullopt = "auto" (the gas table's value for `name`).
  std::optional<double> ionization_energy_eV;
  std::optional<double> relative_strength;  ///< optional, as declared (> 0)
  std::string gas;                          ///< gas of the line ("" = the sidecar's gas)
};

/// Everything the sidecar says about a scan besides its axes and counts.
struct TraceMeta {
  std::string source;             ///< sidecar path the trace was read from ("" if synthetic)
  std::string image;              ///< data file named by the sidecar
  std::string gas;                ///< target gas symbol ("Ne", "Ar", ...), "" if unknown
  double ir_wavelength_nm = 0.0;  ///< IR central wavelength; 0 = not given
  TraceKind kind = TraceKind::kUnknown;
  double scale = 1.0;                ///< counts per image unit (already applied to counts)
  std::optional<double> background;  ///< counts per bin given by the sidecar
  bool background_auto = false;      ///< sidecar asked for "auto" background estimation
  std::optional<double> energy_resolution_eV;  ///< spectrometer FWHM resolution
  std::string notes;                           ///< free-form notes
  /// Analysis band of photoelectron kinetic energy [lo, hi] (eV, finite, lo < hi) from the
  /// sidecar's energy_window_eV; empty = chosen by preprocessing (retrieval/preprocess/lines.h).
  std::vector<double> energy_window_eV;
  /// Detector saturation level in counts per bin (after `scale`); nullopt = detect plateaus.
  std::optional<double> saturation_counts;
  /// Lines declared by the sidecar (`lines`); empty = detected from the gas and photon energy.
  std::vector<DeclaredLine> lines;
  /// Sidecar keys the contract does not define: key -> JSON text of the value, echoed into
  /// result.json untouched.
  std::map<std::string, std::string> extra_json;
  /// How the energy axis was obtained from a time-of-flight axis (empty for a scan recorded
  /// on an energy axis, and for synthetic scans): the calibration actually applied, as
  /// records under dotted keys "calibration.*" that every analysis copies into result.extra
  /// (so result.json carries them). Filled by io/trace_reader_tof.cpp:
  ///   calibration.source             "sidecar" (fixed numbers) or "fit: harmonics" (fitted
  ///                                  from the harmonic peaks, io/tof_fit.h)
  ///   calibration.length_m, .t0_ns, .energy_offset_eV   the values used (m, ns, eV)
  ///   calibration.energy_step_eV, .counts_outside_fraction   output bin width; share of the
  ///                                  counts that fell outside the energy window
  /// and with a fit, in addition: the 1-sigma uncertainties (.length_m_sigma, .t0_ns_sigma,
  /// .energy_offset_eV_sigma when E_offset was fitted), the initial guess (calibration.initial.*)
  /// and calibration.fit.* (gas, Ip and hbar omega used, harmonic step, number of peaks, rms
  /// residual in eV, per-peak orders, flight times and residuals in eV and ns, the fit's
  /// message). "calibration.warning" (a string) is present when the fit's rms residual exceeds
  /// the spectrometer resolution (energy_resolution_eV, else the output energy step); the
  /// analyses also add it to the result's warnings.
  std::vector<Param> calibration;
  /// Warnings the reader gave about the input (8-bit image, counts outside the calibration
  /// window, a poor calibration fit, ...; filled by io/trace_reader.h); every analysis copies
  /// them into its result.
  std::vector<std::string> read_warnings;
};

struct Trace {
  /// Photoelectron kinetic energy W of each column (a.u.), strictly ascending.
  std::vector<double> energy_au;
  /// Delay tau = t_XUV - t_IR of each row (a.u.), strictly ascending (may be non-uniform).
  std::vector<double> delay_au;
  /// counts(i, j): counts at delay i, energy bin j (per bin, scale applied). Rows = delays.
  Eigen::MatrixXd counts;
  TraceMeta meta;

  std::size_t num_delays() const { return delay_au.size(); }
  std::size_t num_energies() const { return energy_au.size(); }
  /// Throws sw::Error (kInput) naming `where` if axes and counts disagree, an axis is not
  /// strictly ascending, or a count is negative or not finite.
  void validate(const std::string& where) const;
};

}  // namespace sw
