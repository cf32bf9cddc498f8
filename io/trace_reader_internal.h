#pragma once
// Internals shared by the trace reader's files: trace_reader.cpp (read_trace: required keys, axes,
// meta, counts), trace_sidecar.cpp (sidecar text -> one JSON tree, the field readers),
// trace_data_file.cpp (the data-file decoders) and trace_reader_tof.cpp (the calibration of a
// time-of-flight axis). Not part of the reader's interface (trace_reader.h).

#include <optional>
#include <string>
#include <vector>

#include <Eigen/Core>
#include <nlohmann/json.hpp>

#include "io/input_guard.h"
#include "io/tof_calibration.h"
#include "io/trace_reader.h"
#include "retrieval/core/error.h"

namespace sw::reader_detail {

using json = nlohmann::json;

std::string lower(std::string s);
/// "a number", "an array" ... for messages.
const char* type_name(const json& v);

/// Reads and parses a sidecar (JSON or YAML) into one JSON tree, with the size, nesting,
/// UTF-8 and duplicate-key checks; throws sw::Error(kInput) naming the file.
json load_sidecar(const std::string& path);

/// The parsed sidecar with its field readers; fail() names the file and the field.
class Sidecar {
 public:
  Sidecar(std::string path, json root) : path_(std::move(path)), root_(std::move(root)) {}
  const std::string& path() const { return path_; }
  const json& root() const { return root_; }
  bool has(const std::string& key) const { return root_.contains(key); }
  const json& at(const std::string& key) const { return root_.at(key); }

  [[noreturn]] void fail(const std::string& field, const std::string& message) const {
    throw input_error("sidecar '" + printable_path(path_) + "', field '" + field + "': " + message);
  }

  double number(const json& v, const std::string& field) const;
  /// true/false (JSON), or the words / 0 and 1 that cv::FileStorage gives for YAML booleans.
  bool boolean(const json& v, const std::string& field) const;
  std::string string(const json& v, const std::string& field) const;
  void require(const std::string& key, const std::string& expected) const;
  /// An axis: {first, step, count} or an explicit array. Strictly monotonic.
  std::vector<double> axis(const std::string& key) const;

 private:
  std::string path_;
  json root_;
};

inline bool descending(const std::vector<double>& v) { return v.size() >= 2 && v[1] < v[0]; }

/// Physical ranges of sidecar numbers (docs/file_formats.md "Limits"): wide enough for any
/// attosecond streaking or RABBITT experiment, narrow enough that derived grids stay small.
namespace ranges {
constexpr double kMinEnergyEV = -100.0;         ///< kinetic energy axis, lower end (eV)
constexpr double kMaxEnergyEV = 10000.0;        ///< kinetic energy axis, upper end (eV)
constexpr double kMinEnergyStepEV = 1e-4;       ///< smallest energy step (eV)
constexpr double kMaxTofNs = 1e7;               ///< |flight time| (ns)
constexpr double kMinTofStepNs = 1e-6;          ///< smallest flight-time step (ns)
constexpr double kMaxAbsDelayFs = 1e6;          ///< |delay| (fs), stage offsets included
constexpr double kMaxDelaySpanFs = 2000.0;      ///< last minus first delay (fs)
constexpr double kMinDelayStepFs = 1e-3;        ///< smallest delay step (fs)
constexpr double kMinIrWavelengthNm = 100.0;    ///< IR (driving) wavelength, lower end (nm)
constexpr double kMaxIrWavelengthNm = 20000.0;  ///< upper end (nm): mid-infrared drivers
constexpr double kMinScale = 1e-30;             ///< counts per image unit
constexpr double kMaxScale = 1e30;
constexpr double kMaxCounts = 1e15;         ///< largest scaled count / background per bin
constexpr double kMinPeakCounts = 1e-12;    ///< smallest allowed largest scaled count
constexpr double kMaxResolutionEV = 100.0;  ///< energy_resolution_eV (FWHM)
}  // namespace ranges

// --- data file (trace_data_file.cpp) ---------------------------------------------------------

/// The matrix of the data file `image` names (PNG, TIFF, CSV or an HDF5 dataset), confined to
/// the sidecar's folder tree unless the policy allows otherwise; decoder remarks go to
/// `warnings`, the name shown in messages to `shown_name`.
Eigen::MatrixXd load_image(const Sidecar& sc, const std::string& image,
                           std::vector<std::string>* warnings, std::string* shown_name,
                           const TraceReadPolicy& policy);

// --- time-of-flight axis (trace_reader_tof.cpp) ----------------------------------------------

/// What the calibration block asks of the harmonic fit ("fit": "harmonics").
struct TofFitRequest {
  bool fit = false;
  std::optional<int> harmonic_step;
  std::optional<bool> fit_energy_offset;
  std::optional<double> min_peak_fraction;
};

/// Reads and checks the 'calibration' block of a tof_ns axis into `cal` and `fit_request`.
void read_tof_calibration_block(const Sidecar& sc, TofCalibration& cal, TofFitRequest& fit_request);
/// Ip (eV) of meta.gas for calibration.fit = "harmonics"; fails naming gas or ir_wavelength_nm
/// when the fit cannot assign harmonic energies.
double harmonic_fit_ionization_energy_eV(const Sidecar& sc, const TraceMeta& meta);
/// Converts counts (rows = delays, columns = flight times at energy_axis) onto an energy axis
/// with the sidecar's calibration, fitted to the harmonic peaks first when asked; records the
/// calibration in meta.calibration and replaces energy_axis and counts.
void calibrate_tof_axis(const Sidecar& sc, const TofFitRequest& fit_request, TofCalibration cal,
                        double fit_ip_eV, std::vector<std::string>* warnings, TraceMeta& meta,
                        std::vector<double>& energy_axis, Eigen::MatrixXd& counts);

}  // namespace sw::reader_detail
