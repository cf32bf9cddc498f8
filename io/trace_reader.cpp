#include "io/trace_reader.h"

#include <algorithm>
#include <cmath>
#include <sstream>

#include "io/trace_reader_internal.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"

namespace sw {
namespace {

// The reader's own internals (trace_reader_internal.h).
using reader_detail::calibrate_tof_axis;
using reader_detail::descending;
using reader_detail::harmonic_fit_ionization_energy_eV;
using reader_detail::json;
using reader_detail::load_image;
using reader_detail::load_sidecar;
using reader_detail::read_tof_calibration_block;
using reader_detail::Sidecar;
using reader_detail::TofFitRequest;
using reader_detail::type_name;
namespace ranges = reader_detail::ranges;

/// Values in [lo, hi], consecutive steps of at least min_step, span at most max_span (0 = any).
void check_axis_range(const Sidecar& sc, const std::string& key, const std::vector<double>& v,
                      double lo, double hi, double min_step, double max_span, const char* unit) {
  for (std::size_t i = 0; i < v.size(); ++i)
    if (!(v[i] >= lo && v[i] <= hi))
      sc.fail(key, "has the value " + format_g(v[i]) + " " + unit + " at index " +
                       std::to_string(i) + "; expected values in [" + format_g(lo) + ", " +
                       format_g(hi) + "] " + unit);
  for (std::size_t i = 1; i < v.size(); ++i)
    if (std::abs(v[i] - v[i - 1]) < min_step)
      sc.fail(key, "has a step of " + format_g(std::abs(v[i] - v[i - 1])) + " " + unit +
                       " at index " + std::to_string(i) + "; expected steps of at least " +
                       format_g(min_step) + " " + unit);
  if (max_span > 0 && v.size() >= 2 && std::abs(v.back() - v.front()) > max_span)
    sc.fail(key, "spans " + format_g(std::abs(v.back() - v.front())) + " " + unit +
                     "; expected at most " + format_g(max_span) + " " + unit +
                     " (docs/file_formats.md, Limits)");
}

/// Echoes an unknown key into meta.extra_json unless it is too deep or too large to be useful
/// in result.json (then a warning says it was dropped). Depth is measured without recursion.
void echo_extra(const Sidecar& sc, const std::string& key, const json& value, TraceMeta* meta,
                std::vector<std::string>* warnings) {
  int depth = 0;
  std::vector<std::pair<const json*, int>> stack{{&value, 1}};
  while (!stack.empty()) {
    const auto [v, d] = stack.back();
    stack.pop_back();
    if (v->is_structured()) {
      depth = std::max(depth, d);
      if (depth > limits::kMaxEchoDepth) break;
      for (const auto& c : *v) stack.push_back({&c, d + 1});
    }
  }
  const std::string shown_key = escape_excerpt(key, 64);
  if (depth > limits::kMaxEchoDepth) {
    if (warnings)
      warnings->push_back("sidecar '" + printable_path(sc.path()) + "': the unknown key '" +
                          shown_key + "' nests deeper than " +
                          std::to_string(limits::kMaxEchoDepth) +
                          " levels and is not echoed into the result");
    return;
  }
  std::string text = value.dump(-1, ' ', false, json::error_handler_t::replace);
  if (text.size() > limits::kMaxEchoBytes || key.size() > 256 || !is_valid_utf8(key)) {
    if (warnings)
      warnings->push_back("sidecar '" + printable_path(sc.path()) + "': the unknown key '" +
                          shown_key + "' is longer than " + std::to_string(limits::kMaxEchoBytes) +
                          " bytes of JSON (or its name is not short UTF-8) and is not echoed "
                          "into the result");
    return;
  }
  meta->extra_json[key] = std::move(text);
}

}  // namespace

const std::vector<std::string>& known_sidecar_keys() {
  static const std::vector<std::string> keys = {"streakwright",
                                                "image",
                                                "layout",
                                                "energy_eV",
                                                "tof_ns",
                                                "calibration",
                                                "delay_fs",
                                                "delay_um",
                                                "kind",
                                                "gas",
                                                "ir_wavelength_nm",
                                                "scale",
                                                "background",
                                                "energy_resolution_eV",
                                                "notes",
                                                "energy_window_eV",
                                                "saturation_counts",
                                                "lines"};
  return keys;
}

Trace read_trace(const std::string& sidecar_path, std::vector<std::string>* warnings_out,
                 const TraceReadOverrides& overrides, const TraceReadPolicy& policy) {
  std::vector<std::string> collected;  // -> meta.read_warnings (and warnings_out)
  std::vector<std::string>* const warnings = &collected;
  // result.json is UTF-8 JSON and records the input path: refuse what it cannot hold.
  if (!is_valid_utf8(sidecar_path))
    throw input_error("sidecar '" + printable_path(sidecar_path) +
                      "': the file name is not valid UTF-8, which result.json cannot record; "
                      "expected a UTF-8 file name (rename the file)");
  const Sidecar sc(sidecar_path, load_sidecar(sidecar_path));
  const std::string where = printable_path(sidecar_path);

  // --- required keys -----------------------------------------------------------------------
  sc.require("streakwright", "the format version, \"streakwright\": 1");
  {
    const json& v = sc.at("streakwright");
    if (!v.is_number() || v.get<double>() != 1.0)
      sc.fail("streakwright", (v.is_number() ? "is version " + format_g(v.get<double>()) +
                                                   ", which this reader does not support"
                                             : std::string("is ") + type_name(v)) +
                                  "; expected 1");
  }
  sc.require("image", "the data file name, e.g. \"image\": \"scan.png\" (relative to the sidecar)");
  const std::string image = sc.string(sc.at("image"), "image");
  if (image.empty()) sc.fail("image", "is empty; expected the data file name");
  if (!is_valid_utf8(image) || image.find('\0') != std::string::npos)
    sc.fail("image", "is not a valid UTF-8 file name; expected a UTF-8 path");
  sc.require("layout", "\"delay_rows\" or \"energy_rows\"");
  const std::string layout = sc.string(sc.at("layout"), "layout");
  if (layout != "delay_rows" && layout != "energy_rows")
    sc.fail("layout", "is '" + layout + "'; expected one of: delay_rows, energy_rows");
  const bool energy_rows = layout == "energy_rows";

  const bool tof = sc.has("tof_ns");
  if (tof && sc.has("energy_eV"))
    sc.fail("tof_ns",
            "is given together with energy_eV; expected one energy axis: energy_eV or "
            "tof_ns with a calibration block");
  if (!tof)
    sc.require("energy_eV",
               "the energy axis (eV) as {first, step, count} or an array (or "
               "tof_ns with a calibration block)");
  const bool stage = sc.has("delay_um");
  if (stage && sc.has("delay_fs"))
    sc.fail("delay_um", "is given together with delay_fs; expected one delay axis");
  if (!stage)
    sc.require("delay_fs",
               "the delay axis (fs) as {first, step, count} or an array (or "
               "delay_um, the stage travel in micrometres)");

  // --- axes --------------------------------------------------------------------------------
  const std::string energy_key = tof ? "tof_ns" : "energy_eV";
  const std::string delay_key = stage ? "delay_um" : "delay_fs";
  std::vector<double> energy_axis = sc.axis(energy_key);
  std::vector<double> delay_axis = sc.axis(delay_key);
  if (energy_axis.size() * delay_axis.size() > limits::kMaxSamples)
    sc.fail(delay_key, "declares " + std::to_string(delay_axis.size()) + " delays x " +
                           std::to_string(energy_axis.size()) + " energies, above the limit of " +
                           std::to_string(limits::kMaxSamples) +
                           " samples (docs/file_formats.md, Limits)");
  // Physical ranges: the engines derive their time and energy grids from these axes.
  if (tof)
    check_axis_range(sc, energy_key, energy_axis, -ranges::kMaxTofNs, ranges::kMaxTofNs,
                     ranges::kMinTofStepNs, 0.0, "ns");
  else
    check_axis_range(sc, energy_key, energy_axis, ranges::kMinEnergyEV, ranges::kMaxEnergyEV,
                     ranges::kMinEnergyStepEV, 0.0, "eV");
  {
    const double to_fs = stage ? units::stage_travel_um_to_fs(1.0) : 1.0;
    check_axis_range(sc, delay_key, delay_axis, -ranges::kMaxAbsDelayFs / to_fs,
                     ranges::kMaxAbsDelayFs / to_fs, ranges::kMinDelayStepFs / to_fs,
                     ranges::kMaxDelaySpanFs / to_fs, stage ? "um" : "fs");
  }
  TofCalibration cal;
  TofFitRequest fit_request;
  if (tof) {
    read_tof_calibration_block(sc, cal, fit_request);
  } else if (sc.has("calibration") && warnings) {
    warnings->push_back("sidecar '" + where +
                        "': 'calibration' is only used with a tof_ns axis; "
                        "it is kept as an extra key and not applied");
  }

  // --- meta --------------------------------------------------------------------------------
  Trace trace;
  TraceMeta& meta = trace.meta;
  meta.source = sidecar_path;
  meta.image = image;
  if (sc.has("kind")) {
    const std::string k = sc.string(sc.at("kind"), "kind");
    if (!parse_trace_kind(k, &meta.kind))
      sc.fail("kind", "is '" + k +
                          "'; expected one of: streaking, rabbitt, xuv_only (or leave "
                          "it out)");
  }
  if (sc.has("gas")) meta.gas = sc.string(sc.at("gas"), "gas");
  if (sc.has("ir_wavelength_nm")) {
    meta.ir_wavelength_nm = sc.number(sc.at("ir_wavelength_nm"), "ir_wavelength_nm");
    if (!(meta.ir_wavelength_nm >= ranges::kMinIrWavelengthNm &&
          meta.ir_wavelength_nm <= ranges::kMaxIrWavelengthNm))
      sc.fail("ir_wavelength_nm", "is " + format_g(meta.ir_wavelength_nm) +
                                      "; expected a wavelength in [" +
                                      format_g(ranges::kMinIrWavelengthNm) + ", " +
                                      format_g(ranges::kMaxIrWavelengthNm) + "] nm");
  }
  if (overrides.gas) meta.gas = *overrides.gas;
  if (overrides.ir_wavelength_nm) {
    const double w = *overrides.ir_wavelength_nm;
    if (!(w >= ranges::kMinIrWavelengthNm && w <= ranges::kMaxIrWavelengthNm))
      throw input_error("the IR wavelength override for '" + where + "' is " + format_g(w) +
                        " nm; expected a wavelength in [" + format_g(ranges::kMinIrWavelengthNm) +
                        ", " + format_g(ranges::kMaxIrWavelengthNm) + "] nm");
    meta.ir_wavelength_nm = w;
  }
  if (overrides.kind) meta.kind = *overrides.kind;
  double fit_ip_eV = 0.0;
  if (fit_request.fit) fit_ip_eV = harmonic_fit_ionization_energy_eV(sc, meta);
  if (sc.has("scale")) {
    meta.scale = sc.number(sc.at("scale"), "scale");
    if (!(meta.scale > 0))
      sc.fail("scale", "is " + format_g(meta.scale) + "; expected counts per image unit > 0");
    if (!(meta.scale >= ranges::kMinScale && meta.scale <= ranges::kMaxScale))
      sc.fail("scale", "is " + format_g(meta.scale) + "; expected counts per image unit in [" +
                           format_g(ranges::kMinScale) + ", " + format_g(ranges::kMaxScale) + "]");
  }
  if (sc.has("background")) {
    const json& b = sc.at("background");
    if (b.is_string()) {
      if (b.get<std::string>() != "auto")
        sc.fail("background", "is '" + b.get<std::string>() +
                                  "'; expected a number of counts per bin >= 0 or \"auto\"");
      meta.background_auto = true;
    } else {
      const double v = sc.number(b, "background");
      if (v < 0 || v > ranges::kMaxCounts)
        sc.fail("background", "is " + format_g(v) + "; expected counts per bin in [0, " +
                                  format_g(ranges::kMaxCounts) + "] or \"auto\"");
      meta.background = v;
    }
  }
  if (sc.has("energy_resolution_eV")) {
    const double v = sc.number(sc.at("energy_resolution_eV"), "energy_resolution_eV");
    if (v < 0 || v > ranges::kMaxResolutionEV)
      sc.fail("energy_resolution_eV", "is " + format_g(v) + "; expected a FWHM in [0, " +
                                          format_g(ranges::kMaxResolutionEV) + "] eV");
    meta.energy_resolution_eV = v;
  }
  if (sc.has("notes")) {
    const json& n = sc.at("notes");
    if (n.is_array()) {
      for (std::size_t i = 0; i < n.size(); ++i)
        meta.notes += (i ? "\n" : "") + sc.string(n[i], "notes[" + std::to_string(i) + "]");
    } else {
      meta.notes = sc.string(n, "notes");
    }
  }
  if (sc.has("energy_window_eV")) {
    const json& w = sc.at("energy_window_eV");
    if (!w.is_array() || w.size() != 2)
      sc.fail("energy_window_eV", std::string("is ") + type_name(w) +
                                      "; expected [lo, hi] in eV (photoelectron kinetic energy)");
    const double lo = sc.number(w[0], "energy_window_eV[0]");
    const double hi = sc.number(w[1], "energy_window_eV[1]");
    if (!(lo < hi))
      sc.fail("energy_window_eV",
              "is [" + format_g(lo) + ", " + format_g(hi) + "]; expected lo < hi (eV)");
    meta.energy_window_eV = {lo, hi};
  }
  if (sc.has("saturation_counts")) {
    const double v = sc.number(sc.at("saturation_counts"), "saturation_counts");
    if (!(v > 0))
      sc.fail("saturation_counts", "is " + format_g(v) + "; expected counts per bin > 0");
    meta.saturation_counts = v;
  }
  if (sc.has("lines")) {
    const json& ls = sc.at("lines");
    if (!ls.is_array())
      sc.fail("lines", std::string("is ") + type_name(ls) +
                           "; expected an array of {\"name\", \"ionization_energy_eV\"}");
    if (ls.size() > limits::kMaxDeclaredLines)
      sc.fail("lines", "lists " + std::to_string(ls.size()) + " lines, above the limit of " +
                           std::to_string(limits::kMaxDeclaredLines) +
                           "; list only the lines of the scan's gases on its energy axis");
    for (std::size_t i = 0; i < ls.size(); ++i) {
      const std::string f = "lines[" + std::to_string(i) + "]";
      const json& l = ls[i];
      if (!l.is_object())
        sc.fail(f, std::string("is ") + type_name(l) +
                       "; expected {\"name\": ..., \"ionization_energy_eV\": number or \"auto\"}");
      DeclaredLine d;
      if (!l.contains("name"))
        sc.fail(f + ".name", "is missing; expected the line's name, e.g. \"2s\"");
      d.name = sc.string(l.at("name"), f + ".name");
      if (d.name.empty() || d.name.size() > 32)
        sc.fail(f + ".name",
                "has " + std::to_string(d.name.size()) + " characters; expected 1 to 32");
      if (l.contains("gas")) d.gas = sc.string(l.at("gas"), f + ".gas");
      if (!l.contains("ionization_energy_eV"))
        sc.fail(f + ".ionization_energy_eV",
                "is missing; expected a binding energy in eV or \"auto\"");
      const json& ie = l.at("ionization_energy_eV");
      if (ie.is_string()) {
        if (ie.get<std::string>() != "auto")
          sc.fail(f + ".ionization_energy_eV",
                  "is a string other than \"auto\"; expected eV or \"auto\"");
      } else {
        const double v = sc.number(ie, f + ".ionization_energy_eV");
        if (!(v > 0))
          sc.fail(f + ".ionization_energy_eV", "is " + format_g(v) + "; expected > 0 eV");
        d.ionization_energy_eV = v;
      }
      if (l.contains("relative_strength")) {
        const double v = sc.number(l.at("relative_strength"), f + ".relative_strength");
        if (!(v > 0)) sc.fail(f + ".relative_strength", "is " + format_g(v) + "; expected > 0");
        d.relative_strength = v;
      }
      meta.lines.push_back(d);
    }
  }
  const auto& known = known_sidecar_keys();
  for (auto it = sc.root().begin(); it != sc.root().end(); ++it)
    if (std::find(known.begin(), known.end(), it.key()) == known.end() ||
        (it.key() == "calibration" && !tof))
      echo_extra(sc, it.key(), it.value(), &meta, warnings);

  // --- data --------------------------------------------------------------------------------
  std::string shown;
  Eigen::MatrixXd m = load_image(sc, image, warnings, &shown, policy);
  if (m.rows() == 0 || m.cols() == 0)
    sc.fail("image", "the data file '" + shown + "' is empty; expected a matrix of counts");
  const Eigen::Index n_energy = energy_rows ? m.rows() : m.cols();
  const Eigen::Index n_delay = energy_rows ? m.cols() : m.rows();
  const std::string edim = energy_rows ? "rows" : "columns";
  const std::string ddim = energy_rows ? "columns" : "rows";
  auto check_count = [&](const std::string& key, std::size_t have, Eigen::Index want,
                         const std::string& dim, const char* what) {
    if (static_cast<Eigen::Index>(have) != want)
      sc.fail(key, "has " + std::to_string(have) + " values but the data file '" + shown +
                       "' has " + std::to_string(want) + " " + dim + " (layout " + layout + ": " +
                       what + " along the " + dim + "); expected the counts to match");
  };
  check_count(energy_key, energy_axis.size(), n_energy, edim,
              energy_key == "tof_ns" ? "flight times" : "energies");
  check_count(delay_key, delay_axis.size(), n_delay, ddim, "delays");
  for (Eigen::Index i = 0; i < m.rows(); ++i)
    for (Eigen::Index j = 0; j < m.cols(); ++j) {
      const double c = m(i, j);
      if (!std::isfinite(c) || c < 0) {
        std::ostringstream s;
        s << "the data file '" << shown << "' has "
          << (std::isnan(c)   ? "NaN"
              : std::isinf(c) ? "an infinite value"
                              : "a negative value (" + format_g(c) + ")")
          << " at row " << i << ", column " << j << " (0-based); expected finite counts >= 0";
        sc.fail("image", s.str());
      }
    }
  if (m.maxCoeff() == 0)
    sc.fail("image", "every value of the data file '" + shown +
                         "' is zero; expected a scan "
                         "with counts");
  // The analyses square and sum counts: keep the largest scaled count where that stays finite
  // and normal (no overflow to inf, no underflow to denormals and 0).
  if (const double peak = m.maxCoeff() * meta.scale;
      !(peak >= ranges::kMinPeakCounts && peak <= ranges::kMaxCounts))
    sc.fail("image", "the largest count of '" + shown + "' times scale is " + format_g(peak) +
                         "; expected it in [" + format_g(ranges::kMinPeakCounts) + ", " +
                         format_g(ranges::kMaxCounts) +
                         "] counts (set 'scale' to the counts per image unit)");
  if (meta.scale != 1.0) m *= meta.scale;

  // Rows = delays, columns = energies (or flight times).
  Eigen::MatrixXd counts = energy_rows ? Eigen::MatrixXd(m.transpose()) : std::move(m);
  if (descending(delay_axis)) {
    std::reverse(delay_axis.begin(), delay_axis.end());
    counts = counts.colwise().reverse().eval();
  }
  if (tof) {
    calibrate_tof_axis(sc, fit_request, cal, fit_ip_eV, warnings, meta, energy_axis, counts);
  } else if (descending(energy_axis)) {
    std::reverse(energy_axis.begin(), energy_axis.end());
    counts = counts.rowwise().reverse().eval();
  }
  trace.energy_au.resize(energy_axis.size());
  for (std::size_t j = 0; j < energy_axis.size(); ++j)
    trace.energy_au[j] = units::eV_to_au(energy_axis[j]);
  trace.delay_au.resize(delay_axis.size());
  for (std::size_t i = 0; i < delay_axis.size(); ++i)
    trace.delay_au[i] =
        units::fs_to_au(stage ? units::stage_travel_um_to_fs(delay_axis[i]) : delay_axis[i]);
  trace.counts = std::move(counts);
  trace.validate(sidecar_path);
  if (warnings_out) warnings_out->insert(warnings_out->end(), collected.begin(), collected.end());
  trace.meta.read_warnings = std::move(collected);
  return trace;
}

}  // namespace sw
