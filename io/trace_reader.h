#pragma once
// Reading a scan from disk: the sidecar + data image of DESIGN.md "The trace file contract".
//
// Sidecar: NAME.json (JSON, RFC 8259) or NAME.yaml / NAME.yml (YAML, OpenCV FileStorage
// dialect), read with cv::FileStorage. Keys:
//   streakwright        required, must be 1 (format version)
//   image               required; path relative to the sidecar's folder, inside its folder
//                       tree unless TraceReadPolicy allows more, of
//                       - a PNG (ISO/IEC 15948) of 16 bits per sample, one channel;
//                       - a TIFF (TIFF 6.0) of 16- or 32-bit integer or 32/64-bit float samples;
//                       - an 8-bit PNG/TIFF is accepted with a warning (256 levels limit the
//                         dynamic range; cameras in 8-bit mode exist);
//                       - a CSV matrix of numbers (see io/csv.h);
//                       - an HDF5 dataset "FILE.h5:/group/dataset" (2-D numeric), when the
//                         build has HDF5 (STREAKWRIGHT_HAVE_HDF5).
//                       Colour or grey+alpha images are an error ("expected a single-channel
//                       image").
//   layout              required; "delay_rows" (image row = delay) or "energy_rows"
//                       (image row = energy); the Trace always has rows = delays.
//   energy_eV           photoelectron kinetic energy axis (eV), or instead
//   tof_ns + calibration  time-of-flight axis (ns) with {length_m, t0_ns, energy_offset_eV}
//                       (optional energy_count, energy_min_eV, energy_max_eV), converted to a
//                       uniform energy axis conserving counts (io/tof_calibration.h).
//                       With "fit": "harmonics" in the block, length_m, t0_ns and
//                       energy_offset_eV are the initial guess of a fit of the calibration to
//                       the harmonic peaks q hbar omega - Ip of the delay-summed TOF spectrum
//                       (io/tof_fit.h; needs gas and ir_wavelength_nm). Optional fit keys:
//                         harmonic_step      1 (harmonics and sidebands) or 2 (odd harmonics);
//                                            default 1 for kind rabbitt, else 2
//                         fit_energy_offset  true: fit E_offset too (default false)
//                         min_peak_fraction  peak detection threshold, (0, 1) (default 0.05)
//                       The calibration used (and the fit's peaks and residuals) is recorded
//                       in meta.calibration (retrieval/core/trace.h).
//   delay_fs            delay axis tau = t_XUV - t_IR (fs), or instead
//   delay_um            delay-stage (mirror) travel x in micrometres, tau = 2 x / c
//                       (1 um = 6.671 fs; retro-reflecting stage, double pass).
//                       An axis is {first, step, count} or an explicit array of values; it
//                       must be strictly monotonic; a descending axis is flipped to ascending
//                       together with the data; count must match the image.
//   kind                optional hint: streaking | rabbitt | xuv_only
//   gas, ir_wavelength_nm, scale (counts per image unit, > 0, applied to the counts),
//   background (counts per bin >= 0, or "auto"), energy_resolution_eV (>= 0), notes (string)
//   anything else       kept verbatim as JSON text in meta.extra_json (echoed into results).
//
// The reader converts eV/fs to atomic units via retrieval/core/units.h, sets meta.source to the
// sidecar path as given and meta.image to the "image" value as written in the sidecar, and
// ends with Trace::validate(sidecar path). No background is subtracted here.
//
// Every defect of the files gives sw::Error(kInput) whose message names the file, the field
// and what was expected (missing/invalid sidecar, missing key, wrong version, missing or
// unreadable image, depth/channels, layout, axis count mismatch with both numbers, non-
// monotonic axis, NaN/inf/negative counts with their position, empty or all-zero image,
// unknown kind, non-numeric CSV cell with line/column). Inputs are opened read-only.

#include <optional>
#include <string>
#include <vector>

#include "retrieval/core/trace.h"

namespace sw {

/// Values given outside the sidecar (batch manifest, config file, command line) that replace
/// the sidecar's on reading, so that a time-of-flight fit uses the gas, wavelength and kind
/// the analysis will use. nullopt = the sidecar's value.
struct TraceReadOverrides {
  std::optional<std::string> gas;          ///< replaces "gas"
  std::optional<double> ir_wavelength_nm;  ///< replaces "ir_wavelength_nm" (nm, > 0)
  std::optional<TraceKind> kind;           ///< replaces "kind"
};

/// Where data files may lie (docs/file_formats.md "Data path"). The data path of a sidecar is
/// resolved relative to the sidecar's folder; after resolving "..", and symbolic links, it must
/// lie inside that folder's tree or inside one of `allowed_roots` (a batch's input roots),
/// unless `allow_outside_data` (the command-line option --allow-outside-data) is set. A file
/// outside the allowed tree is never quoted in messages.
struct TraceReadPolicy {
  std::vector<std::string> allowed_roots;  ///< extra folders data files may lie in
  bool allow_outside_data = false;         ///< true: any readable regular file
};

/// Reads the scan described by the sidecar at `sidecar_path` (see above). Non-fatal remarks
/// (8-bit image, time-of-flight counts dropped outside the energy window, a fitted
/// calibration whose residual exceeds the resolution, ...) are kept in meta.read_warnings
/// and also appended to `warnings` when it is given. `overrides` are applied to meta before
/// anything uses them.
///
/// Hardening (io/input_guard.h, docs/file_formats.md "Limits"): only regular files are read
/// (FIFOs, devices and folders are refused by type before opening), sidecars are limited in
/// size and nesting depth (checked by a non-recursive pre-scan before any parser runs),
/// duplicate keys are an error, every number of the sidecar is range-checked, declared axis
/// sizes and image dimensions (read from the PNG/TIFF header before decoding) are checked
/// against the limits before anything is allocated, multi-page TIFFs are refused, and an
/// unknown key too deep or too large to echo is dropped with a warning.
Trace read_trace(const std::string& sidecar_path, std::vector<std::string>* warnings = nullptr,
                 const TraceReadOverrides& overrides = {}, const TraceReadPolicy& policy = {});

/// The sidecar keys the reader interprets itself (everything else goes to meta.extra_json).
const std::vector<std::string>& known_sidecar_keys();

}  // namespace sw
