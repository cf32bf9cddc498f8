#include "io/trace_writer.h"

#include <algorithm>
#include <cctype>
#include <cmath>
#include <filesystem>

#include <nlohmann/json.hpp>
#include <opencv2/core.hpp>
#include <opencv2/imgcodecs.hpp>

#include "io/atomic_file.h"
#include "io/csv.h"
#include "io/result_io.h"
#include "io/trace_reader.h"
#include "retrieval/core/enum_names.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"

namespace sw {
namespace {

using ojson = nlohmann::ordered_json;
namespace fs = std::filesystem;

std::string lower(std::string s) {
  std::transform(s.begin(), s.end(), s.begin(),
                 [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
  return s;
}

/// {first, step, count} when uniform to 1e-9 of the step, else the explicit array.
ojson axis_json(const std::vector<double>& v, bool force_explicit) {
  const std::size_t n = v.size();
  if (!force_explicit && n >= 2) {
    const double step = (v[n - 1] - v[0]) / static_cast<double>(n - 1);
    bool uniform = step != 0;
    for (std::size_t i = 0; uniform && i < n; ++i)
      uniform = std::abs(v[i] - (v[0] + step * static_cast<double>(i))) <= 1e-9 * std::abs(step);
    if (uniform) return ojson{{"first", v[0]}, {"step", step}, {"count", n}};
  }
  ojson a = ojson::array();
  for (double x : v) a.push_back(x);
  return a;
}

// --- YAML emission through cv::FileStorage ----------------------------------------------

void emit_yaml(cv::FileStorage& out, const ojson& v) {
  switch (v.type()) {
    case ojson::value_t::object:
      out << "{";
      for (auto it = v.begin(); it != v.end(); ++it) {
        out << it.key();
        emit_yaml(out, it.value());
      }
      out << "}";
      break;
    case ojson::value_t::array:
      out << "[";
      for (const auto& e : v) emit_yaml(out, e);
      out << "]";
      break;
    case ojson::value_t::string:
      out << v.get<std::string>();
      break;
    case ojson::value_t::boolean:
      out << (v.get<bool>() ? 1 : 0);
      break;
    case ojson::value_t::number_integer:
    case ojson::value_t::number_unsigned: {
      const long long i = v.get<long long>();
      if (i >= INT32_MIN && i <= INT32_MAX)
        out << static_cast<int>(i);
      else
        out << static_cast<double>(i);
      break;
    }
    case ojson::value_t::number_float:
      out << v.get<double>();
      break;
    default:
      out << std::string();
      break;  // null: FileStorage has no null
  }
}

std::string yaml_text(const ojson& root, const std::string& where) {
  try {
    cv::FileStorage out(
        where, cv::FileStorage::WRITE | cv::FileStorage::MEMORY | cv::FileStorage::FORMAT_YAML);
    for (auto it = root.begin(); it != root.end(); ++it) {
      out << it.key();
      emit_yaml(out, it.value());
    }
    return out.releaseAndGetString();
  } catch (const cv::Exception& e) {
    throw input_error("cannot write the YAML sidecar '" + where + "': " + e.err +
                      " (OpenCV YAML keys may only contain letters, digits, '-', '_' and spaces; "
                      "write a .json sidecar instead)");
  }
}

}  // namespace

const char* to_string(TraceLayout l) {
  return l == TraceLayout::kEnergyRows ? "energy_rows" : "delay_rows";
}

std::string truth_path_for(const std::string& sidecar_path) {
  const fs::path p(sidecar_path);
  return (p.parent_path() / (p.stem().string() + ".truth.json")).string();
}

TraceFiles write_trace(const Trace& trace, const std::string& sidecar_path, TraceFormat fmt,
                       const TraceWriteOptions& options) {
  const fs::path sidecar(sidecar_path);
  const std::string ext = lower(sidecar.extension().string());
  const bool yaml = ext == ".yaml" || ext == ".yml";
  if (ext != ".json" && !yaml)
    throw input_error("cannot write the trace sidecar '" + sidecar_path + "': extension '" + ext +
                      "'; expected NAME.json, NAME.yaml or NAME.yml");
  trace.validate("trace to be written to '" + sidecar_path + "'");
  if (trace.counts.size() == 0)
    throw input_error("cannot write the trace '" + sidecar_path + "': it has no data");

  // Flight-time recording: columns reordered by ascending flight time.
  Eigen::MatrixXd cols = trace.counts;
  std::vector<double> tof_sorted;
  if (options.tof) {
    const TraceTofAxis& ta = *options.tof;
    const std::size_t n = ta.tof_ns.size();
    if (n != static_cast<std::size_t>(trace.counts.cols()) || n < 2)
      throw input_error("cannot write the trace '" + sidecar_path + "': the flight-time axis has " +
                        std::to_string(n) + " values for " + std::to_string(trace.counts.cols()) +
                        " columns; expected one flight time per column (at least 2)");
    if (!std::isfinite(ta.length_m) || !(ta.length_m > 0) || !std::isfinite(ta.t0_ns) ||
        !std::isfinite(ta.energy_offset_eV))
      throw input_error("cannot write the trace '" + sidecar_path +
                        "': the time-of-flight calibration needs length_m > 0 and finite t0_ns "
                        "and energy_offset_eV");
    std::vector<std::size_t> order(n);
    for (std::size_t k = 0; k < n; ++k) order[k] = k;
    std::sort(order.begin(), order.end(),
              [&](std::size_t a, std::size_t b) { return ta.tof_ns[a] < ta.tof_ns[b]; });
    for (std::size_t k = 0; k < n; ++k) {
      if (!std::isfinite(ta.tof_ns[order[k]]) || !(ta.tof_ns[order[k]] > ta.t0_ns) ||
          (k > 0 && !(ta.tof_ns[order[k]] > ta.tof_ns[order[k - 1]])))
        throw input_error("cannot write the trace '" + sidecar_path +
                          "': flight times must be finite, distinct and after t0_ns");
      cols.col(static_cast<Eigen::Index>(k)) =
          trace.counts.col(static_cast<Eigen::Index>(order[k]));
      tof_sorted.push_back(ta.tof_ns[order[k]]);
    }
  }
  const bool energy_rows = options.layout == TraceLayout::kEnergyRows;
  const Eigen::MatrixXd m = energy_rows ? Eigen::MatrixXd(cols.transpose()) : cols;
  const std::string image_name = sidecar.stem().string() + (fmt == TraceFormat::kPng16  ? ".png"
                                                            : fmt == TraceFormat::kTiff ? ".tiff"
                                                                                        : ".csv");
  TraceFiles files;
  files.sidecar = sidecar_path;
  files.image = (sidecar.parent_path() / image_name).string();

  double scale = 1.0;
  switch (fmt) {
    case TraceFormat::kPng16: {
      const double max = m.maxCoeff();
      const bool integral = max <= 65535.0 && (m.array() == m.array().round()).all();
      if (!integral) scale = max / 65535.0;
      if (!(scale > 0)) scale = 1.0;
      cv::Mat img(static_cast<int>(m.rows()), static_cast<int>(m.cols()), CV_16UC1);
      for (int i = 0; i < img.rows; ++i) {
        auto* row = img.ptr<std::uint16_t>(i);
        for (int j = 0; j < img.cols; ++j)
          row[j] =
              static_cast<std::uint16_t>(std::clamp(std::round(m(i, j) / scale), 0.0, 65535.0));
      }
      imwrite_atomic(files.image, img, {cv::IMWRITE_PNG_COMPRESSION, 6});
      break;
    }
    case TraceFormat::kTiff: {
      cv::Mat img(static_cast<int>(m.rows()), static_cast<int>(m.cols()), CV_32FC1);
      for (int i = 0; i < img.rows; ++i) {
        auto* row = img.ptr<float>(i);
        for (int j = 0; j < img.cols; ++j) row[j] = static_cast<float>(m(i, j));
      }
      imwrite_atomic(files.image, img);
      break;
    }
    case TraceFormat::kCsv:
      write_file_atomic(files.image, format_csv_matrix(m));
      break;
  }

  const TraceMeta& meta = trace.meta;
  auto finite = [&](double v, const char* field) {
    if (!std::isfinite(v))
      throw numeric_error("cannot write the trace sidecar '" + sidecar_path + "': meta field '" +
                          field + "' is not finite");
  };
  finite(meta.ir_wavelength_nm, "ir_wavelength_nm");
  if (meta.background) finite(*meta.background, "background");
  if (meta.energy_resolution_eV) finite(*meta.energy_resolution_eV, "energy_resolution_eV");
  for (double w : meta.energy_window_eV) finite(w, "energy_window_eV");
  if (meta.saturation_counts) finite(*meta.saturation_counts, "saturation_counts");
  for (const DeclaredLine& d : meta.lines) {
    if (d.ionization_energy_eV) finite(*d.ionization_energy_eV, "lines[].ionization_energy_eV");
    if (d.relative_strength) finite(*d.relative_strength, "lines[].relative_strength");
  }
  ojson sc;
  sc["streakwright"] = 1;
  sc["image"] = image_name;
  sc["layout"] = to_string(options.layout);
  std::vector<double> e(trace.energy_au.size()), d(trace.delay_au.size());
  for (std::size_t j = 0; j < e.size(); ++j) e[j] = units::au_to_eV(trace.energy_au[j]);
  for (std::size_t i = 0; i < d.size(); ++i) d[i] = units::au_to_fs(trace.delay_au[i]);
  if (options.tof) {
    sc["tof_ns"] = axis_json(tof_sorted, options.explicit_axes);
    sc["calibration"] = ojson{{"length_m", options.tof->length_m},
                              {"t0_ns", options.tof->t0_ns},
                              {"energy_offset_eV", options.tof->energy_offset_eV}};
  } else {
    sc["energy_eV"] = axis_json(e, options.explicit_axes);
  }
  sc["delay_fs"] = axis_json(d, options.explicit_axes);
  if (meta.kind != TraceKind::kUnknown) sc["kind"] = to_string(meta.kind);
  if (!meta.gas.empty()) sc["gas"] = meta.gas;
  if (meta.ir_wavelength_nm > 0) sc["ir_wavelength_nm"] = meta.ir_wavelength_nm;
  sc["scale"] = scale;
  if (meta.background_auto)
    sc["background"] = "auto";
  else if (meta.background)
    sc["background"] = *meta.background;
  if (meta.energy_resolution_eV) sc["energy_resolution_eV"] = *meta.energy_resolution_eV;
  if (meta.energy_window_eV.size() == 2) sc["energy_window_eV"] = meta.energy_window_eV;
  if (meta.saturation_counts) sc["saturation_counts"] = *meta.saturation_counts;
  if (!meta.lines.empty()) {
    ojson ls = ojson::array();
    for (const DeclaredLine& line : meta.lines) {
      ojson l{{"name", line.name}};
      if (line.ionization_energy_eV)
        l["ionization_energy_eV"] = *line.ionization_energy_eV;
      else
        l["ionization_energy_eV"] = "auto";
      if (line.relative_strength) l["relative_strength"] = *line.relative_strength;
      if (!line.gas.empty()) l["gas"] = line.gas;
      ls.push_back(l);
    }
    sc["lines"] = ls;
  }
  if (!meta.notes.empty()) sc["notes"] = meta.notes;
  const auto& known = known_sidecar_keys();
  for (const auto& [key, text] : meta.extra_json) {
    // Never let an extra shadow or contradict a key the reader interprets.
    if (sc.contains(key) || (key == "calibration" && options.tof) ||
        (key != "calibration" && std::find(known.begin(), known.end(), key) != known.end()))
      continue;
    try {
      sc[key] = ojson::parse(text);
    } catch (const ojson::parse_error&) {
      sc[key] = text;
    }
  }

  if (options.truth) {
    files.truth = truth_path_for(sidecar_path);
    write_result_json(files.truth, *options.truth);
  }
  write_file_atomic(sidecar_path, yaml ? yaml_text(sc, sidecar_path) : sc.dump(2) + "\n");
  return files;
}

}  // namespace sw
