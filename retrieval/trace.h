#pragma once
// A photoelectron-energy-versus-delay scan: the one data type shared by loaded and synthetic
// scans (DESIGN.md "Trace file contract"). Axes are kept in atomic units inside the engine;
// io/ converts from the sidecar's eV/fs and back.

#include <map>
#include <optional>
#include <string>
#include <vector>

#include <Eigen/Core>

namespace sw {

/// What kind of scan the sidecar says this is (a hint; analyses may decide for themselves).
enum class TraceKind { kUnknown, kStreaking, kRabbitt, kXuvOnly };
const char* to_string(TraceKind k);
/// Parses "streaking", "rabbitt", "xuv_only" or "" (unknown); returns false on anything else.
bool parse_trace_kind(const std::string& s, TraceKind* out);

/// Everything the sidecar says about a scan besides its axes and counts.
struct TraceMeta {
  std::string source;                 ///< sidecar path the trace was read from ("" if synthetic)
  std::string image;                  ///< data file named by the sidecar
  std::string gas;                    ///< target gas symbol ("Ne", "Ar", ...), "" if unknown
  double ir_wavelength_nm = 0.0;      ///< IR central wavelength; 0 = not given
  TraceKind kind = TraceKind::kUnknown;
  double scale = 1.0;                 ///< counts per image unit (already applied to counts)
  std::optional<double> background;   ///< counts per bin given by the sidecar
  bool background_auto = false;       ///< sidecar asked for "auto" background estimation
  std::optional<double> energy_resolution_eV;  ///< spectrometer FWHM resolution
  std::string notes;                  ///< free-form notes
  /// Sidecar keys the contract does not define: key -> JSON text of the value, echoed into
  /// result.json untouched.
  std::map<std::string, std::string> extra_json;
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
