#pragma once
// Writing a scan in the trace file contract (DESIGN.md), so that read_trace() reads it back:
// a data file NAME.png / NAME.tiff / NAME.csv next to the sidecar NAME.json (or NAME.yaml /
// NAME.yml: the sidecar's extension picks JSON or YAML), plus optionally the truth record
// NAME.truth.json of a synthetic scan.
//
// Formats:
//  - png16: 16-bit grey PNG (ISO/IEC 15948). Image value = round(counts / scale). When every
//    count is an integer <= 65535 the scale is 1 (lossless); otherwise scale = max / 65535 so
//    the maximum fits, and the round trip error is at most scale / 2 per bin. The scale is
//    stored in the sidecar ("scale": counts per image unit).
//  - tiff: 32-bit IEEE float grey TIFF (TIFF 6.0 + SampleFormat 3), scale 1; relative
//    round-trip error <= 2^-24.
//  - csv: comma-separated text with 17 significant digits (exact round trip), scale 1.
// Axes are written as {first, step, count} when uniform to 1e-9 relative (of the step), else
// as explicit arrays; energies in eV, delays in fs. Meta (gas, ir_wavelength_nm, kind,
// background, energy_resolution_eV, notes) and meta.extra_json are echoed.
// Every file is written atomically (io/atomic_file.h); the data file is written before the
// sidecar, so a sidecar never names a missing image.

#include <optional>
#include <string>
#include <vector>

#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"

namespace sw {

/// Orientation of the data image in the file.
enum class TraceLayout { kDelayRows, kEnergyRows };
/// "delay_rows", "energy_rows".
const char* to_string(TraceLayout l);

/// A flight-time axis to write instead of the energy axis: the trace's columns are counts per
/// flight-time bin (one tof_ns value per column, in column order), as the synthetic generator
/// records them (synthetic/tof_recording.h). The sidecar gets `tof_ns` (ascending; the columns
/// are reordered to match) and the `calibration` block {length_m, t0_ns, energy_offset_eV}
/// that io/trace_reader_tof.cpp reads (io/tof_calibration.h); the trace's energy axis is not
/// written.
struct TraceTofAxis {
  std::vector<double> tof_ns;     ///< flight time (ns) of each column, distinct, > t0_ns
  double length_m = 0.0;          ///< drift length (m, > 0)
  double t0_ns = 0.0;             ///< time zero (ns)
  double energy_offset_eV = 0.0;  ///< energy offset (eV)
};

struct TraceWriteOptions {
  /// Orientation of the written image (the sidecar's "layout").
  TraceLayout layout = TraceLayout::kDelayRows;
  /// Always write axes as explicit arrays, even when uniform.
  bool explicit_axes = false;
  /// When set, the truth record is written to truth_path_for(sidecar) via write_result_json.
  const AnalysisResult* truth = nullptr;
  /// When set, write the flight-time axis and calibration instead of energy_eV (see above).
  std::optional<TraceTofAxis> tof = std::nullopt;
};

/// Paths actually written.
struct TraceFiles {
  std::string sidecar;  ///< the sidecar path as given
  std::string image;    ///< the data file (same folder, NAME + extension of the format)
  std::string truth;    ///< NAME.truth.json, "" when no truth was written
};

/// The truth record path for a sidecar: "dir/NAME.json" -> "dir/NAME.truth.json".
std::string truth_path_for(const std::string& sidecar_path);

/// Writes `trace` (validated first) as described above. Throws sw::Error(kInput) when the
/// sidecar extension is not .json/.yaml/.yml, the folder is not writable, or the trace is
/// invalid; sw::Error(kNumeric) if a value cannot be written (non-finite).
TraceFiles write_trace(const Trace& trace, const std::string& sidecar_path, TraceFormat fmt,
                       const TraceWriteOptions& options = {});

}  // namespace sw
