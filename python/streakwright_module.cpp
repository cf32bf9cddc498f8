// The Python module `streakwright` (docs/python.md): scans in, results out, numpy arrays for
// every sampled quantity. Every analysis goes through the library's one shape
// (retrieval/analysis/analyses.h) and every file through the io/ writers, so a result here is the
// result the CLI writes: Result.to_dict() is result.json parsed (io/result_io.h, the one
// serializer), Result.write(folder) is the CLI's output folder (cli/output_folder.h safety:
// never over an input, swapped in only when complete).
//
// sw::Error becomes ValueError with the same message. The GIL is released while an analysis
// runs; the progress callback takes it back, checks for Ctrl-C (PyErr_CheckSignals) and calls
// the user's callback; a pending KeyboardInterrupt (or an exception of the callback) stops the
// analysis through the engines' progress path and is raised when the analysis has unwound.

#include <pybind11/numpy.h>
#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include <complex>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <variant>
#include <vector>

#include <nlohmann/json.hpp>

#include "cli/analysis.h"
#include "cli/option_checks.h"
#include "cli/output_folder.h"
#include "cli/provenance.h"
#include "cli/simulate_config.h"
#include "io/atomic_file.h"
#include "io/classify_outputs.h"
#include "io/input_guard.h"
#include "io/rabbitt_outputs.h"
#include "io/result_io.h"
#include "io/retrieval_outputs.h"
#include "io/trace_reader.h"
#include "python/described_kwargs.h"
#include "retrieval/analysis/analyses.h"
#include "retrieval/core/error.h"
#include "retrieval/core/grid.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/dipole.h"
#include "retrieval/physics/ir_field.h"
#include "retrieval/physics/pulse_metrics.h"
#include "retrieval/physics/xuv_builders.h"
#include "retrieval/preprocess/lines.h"
#include "streakwright_version.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "synthetic/sfa_quadrature.h"

namespace py = pybind11;
namespace fs = std::filesystem;

namespace sw::python {

namespace {

// ---------------------------------------------------------------------------------------------
// conversions

py::array_t<double> to_numpy(const std::vector<double>& v) {
  py::array_t<double> a(static_cast<py::ssize_t>(v.size()));
  std::copy(v.begin(), v.end(), a.mutable_data());
  return a;
}

py::array_t<std::complex<double>> to_numpy(const CVec& v) {
  py::array_t<std::complex<double>> a(static_cast<py::ssize_t>(v.size()));
  for (std::size_t i = 0; i < v.size(); ++i) a.mutable_data()[i] = v[i];
  return a;
}

// Row-major copy (rows = delays, as the trace contract has them).
py::array_t<double> to_numpy(const Eigen::MatrixXd& m) {
  py::array_t<double> a({static_cast<py::ssize_t>(m.rows()), static_cast<py::ssize_t>(m.cols())});
  auto r = a.mutable_unchecked<2>();
  for (Eigen::Index i = 0; i < m.rows(); ++i)
    for (Eigen::Index j = 0; j < m.cols(); ++j) r(i, j) = m(i, j);
  return a;
}

py::array_t<std::complex<double>> to_numpy(const Eigen::MatrixXcd& m) {
  py::array_t<std::complex<double>> a(
      {static_cast<py::ssize_t>(m.rows()), static_cast<py::ssize_t>(m.cols())});
  auto r = a.mutable_unchecked<2>();
  for (Eigen::Index i = 0; i < m.rows(); ++i)
    for (Eigen::Index j = 0; j < m.cols(); ++j) r(i, j) = m(i, j);
  return a;
}

std::vector<double> scaled(const std::vector<double>& v, double (*f)(double)) {
  std::vector<double> out(v.size());
  for (std::size_t i = 0; i < v.size(); ++i) out[i] = f(v[i]);
  return out;
}

double au_to_eV(double v) { return units::au_to_eV(v); }
double au_to_fs(double v) { return units::au_to_fs(v); }
double au_to_as(double v) { return units::au_to_as(v); }

py::object json_loads(const std::string& text) {
  return py::module_::import("json").attr("loads")(text);
}
std::string json_dumps(const py::handle& obj) {
  return py::module_::import("json").attr("dumps")(obj).cast<std::string>();
}

py::object param_value(const Param& p) {
  return std::visit([](const auto& v) -> py::object { return py::cast(v); }, p.value);
}

// ---------------------------------------------------------------------------------------------
// Scan

struct Scan {
  Trace trace;
};

py::dict scan_meta(const Scan& s) {
  const TraceMeta& m = s.trace.meta;
  py::dict d;
  d["source"] = m.source;
  d["image"] = m.image;
  d["gas"] = m.gas;
  d["ir_wavelength_nm"] = m.ir_wavelength_nm;
  d["kind"] = std::string(to_string(m.kind));
  d["scale"] = m.scale;
  d["background"] = m.background ? py::cast(*m.background) : py::none();
  d["background_auto"] = m.background_auto;
  d["energy_resolution_eV"] =
      m.energy_resolution_eV ? py::cast(*m.energy_resolution_eV) : py::none();
  d["notes"] = m.notes;
  d["energy_window_eV"] = m.energy_window_eV;
  d["saturation_counts"] = m.saturation_counts ? py::cast(*m.saturation_counts) : py::none();
  py::dict extra;
  for (const auto& [k, v] : m.extra_json) extra[py::str(k)] = json_loads(v);
  d["extra"] = extra;
  py::dict cal;
  for (const Param& p : m.calibration) cal[py::str(p.key)] = param_value(p);
  d["calibration"] = cal;
  d["read_warnings"] = m.read_warnings;
  return d;
}

std::optional<std::string> opt_string(const py::object& o) {
  if (o.is_none()) return std::nullopt;
  return o.cast<std::string>();
}
std::optional<double> opt_double(const py::object& o) {
  if (o.is_none()) return std::nullopt;
  return o.cast<double>();
}

Scan load_scan(const std::string& path, const py::object& gas, const py::object& ir_wavelength_nm,
               const py::object& kind, bool allow_outside_data) {
  TraceReadOverrides ov;
  ov.gas = opt_string(gas);
  ov.ir_wavelength_nm = opt_double(ir_wavelength_nm);
  if (auto k = opt_string(kind)) {
    TraceKind tk;
    if (!parse_trace_kind(*k, &tk))
      throw usage_error("kind '" + *k + "': expected streaking, rabbitt or xuv_only");
    ov.kind = tk;
  }
  TraceReadPolicy policy;
  policy.allow_outside_data = allow_outside_data;
  Scan s;
  py::gil_scoped_release release;
  s.trace = read_trace(path, nullptr, ov, policy);
  return s;
}

// A temporary folder removed on scope exit.
struct TempDir {
  fs::path path;
  TempDir() {
    std::string tmpl = (fs::temp_directory_path() / "streakwright-arrays-XXXXXX").string();
    if (!mkdtemp(tmpl.data()))
      throw input_error("Scan.from_arrays: cannot create a temporary folder");
    path = tmpl;
  }
  ~TempDir() {
    std::error_code ec;
    fs::remove_all(path, ec);
  }
};

std::string replace_all(std::string s, const std::string& from, const std::string& to) {
  if (from.empty()) return s;
  for (std::size_t pos = s.find(from); pos != std::string::npos;
       pos = s.find(from, pos + to.size()))
    s.replace(pos, from.size(), to);
  return s;
}

// The arrays become a scan file (CSV data, 17 significant digits: exact) and a sidecar with the
// axes and the given keys, read back by the same reader as every file: the same checks,
// conventions (e.g. a descending energy axis is reversed) and messages (the temporary folder
// in messages reads "Scan.from_arrays").
Scan scan_from_arrays(
    const py::array_t<double, py::array::c_style | py::array::forcecast>& counts,
    const py::array_t<double, py::array::c_style | py::array::forcecast>& energy_eV,
    const py::array_t<double, py::array::c_style | py::array::forcecast>& delay_fs,
    const py::object& gas, const py::object& ir_wavelength_nm, const py::kwargs& keys) {
  if (counts.ndim() != 2)
    throw usage_error("Scan.from_arrays: counts must be a 2-D array (one row per delay), got " +
                      std::to_string(counts.ndim()) + " dimension(s)");
  if (energy_eV.ndim() != 1 || delay_fs.ndim() != 1)
    throw usage_error("Scan.from_arrays: energy_eV and delay_fs must be 1-D arrays");
  const auto rows = counts.shape(0), cols = counts.shape(1);
  if (delay_fs.shape(0) != rows || energy_eV.shape(0) != cols)
    throw usage_error("Scan.from_arrays: counts has shape (" + std::to_string(rows) + ", " +
                      std::to_string(cols) + "); expected (len(delay_fs), len(energy_eV)) = (" +
                      std::to_string(delay_fs.shape(0)) + ", " +
                      std::to_string(energy_eV.shape(0)) + ")");
  nlohmann::json extra = nlohmann::json::object();
  if (!gas.is_none()) extra["gas"] = gas.cast<std::string>();
  if (!ir_wavelength_nm.is_none()) extra["ir_wavelength_nm"] = ir_wavelength_nm.cast<double>();
  for (const auto& [k, v] : keys)
    extra[k.cast<std::string>()] = nlohmann::json::parse(json_dumps(v));

  nlohmann::json sidecar_json = {
      {"streakwright", 1}, {"image", "arrays.csv"}, {"layout", "delay_rows"}};
  sidecar_json["energy_eV"] = std::vector<double>(energy_eV.data(), energy_eV.data() + cols);
  sidecar_json["delay_fs"] = std::vector<double>(delay_fs.data(), delay_fs.data() + rows);
  for (const auto& [k, v] : extra.items()) sidecar_json[k] = v;
  std::string csv;
  csv.reserve(static_cast<std::size_t>(rows * cols) * 8);
  auto c = counts.unchecked<2>();
  char buf[32];
  for (py::ssize_t i = 0; i < rows; ++i)
    for (py::ssize_t j = 0; j < cols; ++j) {
      std::snprintf(buf, sizeof buf, "%.17g", c(i, j));
      csv += buf;
      csv += j + 1 < cols ? ',' : '\n';
    }

  TempDir dir;
  const std::string sidecar = (dir.path / "arrays.json").string();
  Scan s;
  try {
    write_file_atomic((dir.path / "arrays.csv").string(), csv);
    write_file_atomic(sidecar, sidecar_json.dump(2) + "\n");
    s.trace = read_trace(sidecar, nullptr, {}, {});
  } catch (const Error& e) {
    std::string m = replace_all(e.what(), (dir.path / "arrays.csv").string(), "counts");
    m = replace_all(m, sidecar, "Scan.from_arrays");
    throw Error(e.kind(), replace_all(m, dir.path.string(), "Scan.from_arrays"));
  }
  s.trace.meta.source.clear();
  s.trace.meta.image.clear();
  return s;
}

// ---------------------------------------------------------------------------------------------
// progress, cancellation, GIL

// Shared between the callback (engine side) and the caller: the Python error that stopped the
// analysis, raised once the analysis has unwound.
struct PendingError {
  std::shared_ptr<py::error_already_set> error;
};

// The callback is held as a handle (no reference count): the analysis may copy the function
// without the GIL; the caller's argument keeps the object alive.
AnalysisProgress make_progress(const py::object& callback, PendingError& pending) {
  return
      [cb = py::handle(callback), &pending](const std::string& stage, const std::string& message) {
        py::gil_scoped_acquire gil;
        try {
          if (PyErr_CheckSignals() != 0) throw py::error_already_set();
          if (!cb.is_none()) cb(stage, message);
        } catch (py::error_already_set& e) {
          pending.error = std::make_shared<py::error_already_set>(std::move(e));
          throw Error(ErrorKind::kInternal, "interrupted");
        }
      };
}

// Runs `work` without the GIL; a Python error raised in the progress callback wins over the
// C++ exception it caused. Errors of the analysis read as the CLI reports them
// (cli::scan_error: the scan's sidecar named, kNumeric as bad input).
template <class F>
auto run_released(const py::object& callback, const Trace& scan, F&& work) {
  PendingError pending;
  const AnalysisProgress progress = make_progress(callback, pending);
  try {
    py::gil_scoped_release release;
    return work(progress);
  } catch (const Error& e) {
    if (pending.error) throw *pending.error;
    throw cli::scan_error(e, scan.meta.source);
  } catch (...) {
    if (pending.error) throw *pending.error;
    throw;
  }
}

// ---------------------------------------------------------------------------------------------
// Result

using AnyOutput = std::variant<RetrieveOutput, RabbittOutput, ClassifyOutput>;

struct Result {
  AnyOutput output;
  Trace scan;                       ///< the scan as given to the analysis
  std::vector<std::string> inputs;  ///< input files (sidecars, data files) for the folder check
  const AnalysisResult& result() const {
    return std::visit([](const auto& o) -> const AnalysisResult& { return o.result; }, output);
  }
  AnalysisResult& result() {
    return std::visit([](auto& o) -> AnalysisResult& { return o.result; }, output);
  }
};

// Provenance as the CLI records it (cli/analysis.cpp: program, version, command, input hash,
// time; the time-of-flight calibration), appended after the analysis' settings.
void add_provenance(Result& r, const std::string& command) {
  const TraceMeta& m = r.scan.meta;
  std::vector<Param> prov = cli::provenance(m.source, m.image, command);
  for (const Param& p : m.calibration) prov.push_back(p);
  AnalysisResult& res = r.result();
  if (res.input.empty()) res.input = m.source;
  for (const Param& p : prov) res.extra.push_back(p);
}

void add_inputs(Result& r, const Trace& t) {
  if (t.meta.source.empty()) return;
  r.inputs.push_back(t.meta.source);
  r.inputs.push_back(cli::sidecar_data_file(t.meta.source));
}

// Runs an analysis of `scan` without the GIL (run_released) and records its inputs (`scan`,
// then `extra_input` when given) and the provenance of `command`.
template <class F>
Result run_analysis(const py::object& progress, const Trace& scan, const std::string& command,
                    F&& analyse, const Trace* extra_input = nullptr) {
  Result r{run_released(progress, scan,
                        [&](const AnalysisProgress& p) { return AnyOutput(analyse(p)); }),
           scan,
           {}};
  add_inputs(r, scan);
  if (extra_input) add_inputs(r, *extra_input);
  add_provenance(r, command);
  return r;
}

void write_result(const Result& r, const std::string& folder, const std::string& figure_format) {
  plot::FigureFormat ff = plot::FigureFormat::kPng;
  if (!plot::parse_figure_format(figure_format, &ff))
    throw usage_error("figure_format '" + figure_format + "': expected png or svg");
  cli::check_output_folder(folder, r.inputs, {}, "folder");
  cli::OutputSwap swap(folder);
  std::visit(
      [&](const auto& o) {
        using T = std::decay_t<decltype(o)>;
        if constexpr (std::is_same_v<T, RetrieveOutput>) {
          write_retrieval_outputs(r.scan, o, swap.temp(), ff);
        } else if constexpr (std::is_same_v<T, RabbittOutput>) {
          write_rabbitt_outputs(o.trace, o.analysis, o.burst ? &*o.burst : nullptr, o.result,
                                swap.temp(), ff);
        } else {
          write_classify_outputs(o.trace, o.result,
                                 o.retrieval ? &o.retrieval->reconstruction : nullptr,
                                 o.ir_wavelength_nm, swap.temp(), ff);
        }
      },
      r.output);
  // As the CLI (cli/analysis.cpp run_scan): files holding NaN or infinity are no result.
  if (const std::string bad = cli::find_non_finite_output(swap.temp()); !bad.empty())
    throw input_error(
        "the analysis produced non-finite numbers (NaN or infinity) from this input, in '" +
        fs::path(bad).filename().string() +
        "'; no estimate can be written (check the counts and "
        "'scale' of the scan); '" +
        printable_path(folder) + "' is unchanged");
  swap.commit();
}

const RetrieveOutput* retrieval_of(const Result& r) {
  if (const auto* o = std::get_if<RetrieveOutput>(&r.output)) return o;
  if (const auto* c = std::get_if<ClassifyOutput>(&r.output))
    return c->retrieval ? &*c->retrieval : nullptr;
  return nullptr;
}

// The retrieved XUV about its centre photon energy (as xuv_temporal.csv writes it).
XuvField centred_xuv(const RetrieveOutput& o) {
  const auto& x = o.result.xuv;
  const double wc = x && x->center_photon_energy_eV ? units::eV_to_au(*x->center_photon_energy_eV)
                                                    : o.reconstruction.xuv.carrier_au();
  return o.reconstruction.xuv.with_carrier(wc);
}

py::dict result_arrays(const Result& r) {
  py::dict d;
  const RetrieveOutput* o = retrieval_of(r);
  if (o) {
    const XuvField x = centred_xuv(*o);
    d["xuv_time_as"] = to_numpy(scaled(x.grid().times(), au_to_as));
    d["xuv_field"] = to_numpy(x.envelope());
    d["xuv_photon_energy_eV"] = to_numpy(scaled(x.photon_energies_au(), au_to_eV));
    d["xuv_spectrum"] = to_numpy(x.spectrum());
    const IrField& ir = o->reconstruction.ir;
    std::vector<double> t(ir.size());
    for (std::size_t i = 0; i < ir.size(); ++i) t[i] = units::au_to_fs(ir.time(i));
    d["ir_time_fs"] = to_numpy(t);
    d["ir_vector_potential_au"] = to_numpy(ir.vector_potential());
    d["ir_electric_field_au"] = to_numpy(ir.electric_field());
    d["trace_delay_fs"] = to_numpy(scaled(o->problem.delay_au, au_to_fs));
    d["trace_energy_eV"] = to_numpy(scaled(o->problem.energy_au, au_to_eV));
    d["measured_trace"] = to_numpy(o->problem.intensity);
    d["retrieved_trace"] = to_numpy(o->reconstruction.retrieved);
  }
  if (const auto* rb = std::get_if<RabbittOutput>(&r.output); rb && rb->burst) {
    d["burst_time_as"] = to_numpy(rb->burst->time_as);
    d["burst_intensity"] = to_numpy(rb->burst->intensity);
  }
  return d;
}

py::object arrays_item(const Result& r, const char* key) {
  py::dict d = result_arrays(r);
  return d.contains(key) ? py::object(d[key]) : py::object(py::none());
}

// ---------------------------------------------------------------------------------------------
// analyses

void set_energy_window(const py::object& window, PreprocessOptions& pp) {
  if (window.is_none()) return;
  if (py::isinstance<py::str>(window)) {
    parse_energy_window(window.cast<std::string>(), "energy_window", &pp.energy_window_lo_eV,
                        &pp.energy_window_hi_eV);
    return;
  }
  const auto lohi = window.cast<std::vector<double>>();
  if (lohi.size() != 2) throw usage_error("energy_window: expected (LO, HI) in eV or \"LO:HI\"");
  std::string text = std::to_string(lohi[0]) + ":" + std::to_string(lohi[1]);
  parse_energy_window(text, "energy_window", &pp.energy_window_lo_eV, &pp.energy_window_hi_eV);
}

void check_engine(const std::string& engine) {
  if (engine != "auto") (void)make_engine(engine);  // unknown names listed
}

// The CLI's --gas / --ir-wavelength of rabbitt and classify on a scan already read. A scan whose
// energy axis was calibrated from flight times used the sidecar's values for that: those must
// be given to load_scan (where the reader applies them before the calibration).
Scan with_overrides(const Scan& scan, const py::object& gas, const py::object& ir_wavelength,
                    const std::string& fn) {
  if (gas.is_none() && ir_wavelength.is_none()) return scan;
  if (!scan.trace.meta.calibration.empty())
    throw usage_error(
        fn +
        ": gas / ir_wavelength given for a scan whose energy axis was calibrated from "
        "flight times with the sidecar's values; give them to load_scan(gas=..., "
        "ir_wavelength_nm=...) instead");
  Scan s = scan;
  if (!gas.is_none()) s.trace.meta.gas = gas.cast<std::string>();
  if (!ir_wavelength.is_none()) {
    const double w = ir_wavelength.cast<double>();
    if (const std::string p = cli::ir_wavelength_nm_problem(w); !p.empty())
      throw usage_error(fn + ": ir_wavelength = " + std::to_string(w) + ": " + p);
    s.trace.meta.ir_wavelength_nm = w;
  }
  return s;
}

// The CLI's --lines: "2s,3s" or none as there, or a list of names.
void set_line_names(const py::object& lines, LineDelayOptions& o) {
  if (lines.is_none()) return;
  std::string text;
  if (py::isinstance<py::str>(lines)) {
    text = lines.cast<std::string>();
  } else {
    try {
      for (const std::string& n : lines.cast<std::vector<std::string>>())
        text += (text.empty() ? "" : ",") + n;
    } catch (const py::cast_error&) {
      throw py::type_error("retrieve(): lines = " + py::repr(lines).cast<std::string>() +
                           ": expected NAME[,NAME...], none or a list of names");
    }
  }
  if (!text.empty()) cli::parse_line_names(text, "lines", &o.names);
}

// The options of RetrieveOptions::describe arrive as keywords (python/described_kwargs.h);
// energy_window and lines are the CLI's --energy-window and --lines.
Result py_retrieve(const Scan& scan, const py::object& energy_window, const py::object& lines,
                   const py::object& progress, const py::kwargs& options) {
  RetrieveOptions o;
  set_described_from_kwargs(o, options, "retrieve");
  set_energy_window(energy_window, o.preprocess);
  set_line_names(lines, o.line_delays);
  check_engine(o.engine);
  if (const std::string e = o.validate(); !e.empty()) throw usage_error(e);
  return run_analysis(progress, scan.trace, "retrieve", [&](const AnalysisProgress& p) {
    return analyse_retrieve(scan.trace, o, p);
  });
}

// The options of RabbittAnalysisOptions::describe arrive as keywords (python/described_kwargs.h);
// gas and ir_wavelength are the CLI's overrides, energy_window its --energy-window.
Result py_rabbitt(const Scan& given, const py::object& gas, const py::object& ir_wavelength,
                  const py::object& xuv_only, const py::object& energy_window,
                  const py::object& progress, const py::kwargs& options) {
  const Scan scan = with_overrides(given, gas, ir_wavelength, "rabbitt");
  RabbittAnalysisOptions o;
  set_described_from_kwargs(o, options, "rabbitt");
  set_energy_window(energy_window, o.preprocess);
  const Scan* xo = nullptr;
  if (!xuv_only.is_none()) {
    xo = xuv_only.cast<const Scan*>();
    o.xuv_only_name = xo->trace.meta.source.empty() ? "Scan.from_arrays" : xo->trace.meta.source;
  }
  if (const std::string e = o.validate(); !e.empty()) throw usage_error(e);
  const Trace* xo_trace = xo ? &xo->trace : nullptr;
  return run_analysis(
      progress, scan.trace, "rabbitt",
      [&](const AnalysisProgress& p) { return analyse_rabbitt(scan.trace, xo_trace, o, p); },
      xo_trace);
}

// The options of ClassifyAnalysisOptions::describe arrive as keywords (python/described_kwargs.h);
// gas and ir_wavelength are the CLI's overrides, energy_window its --energy-window.
Result py_classify(const Scan& given, const py::object& gas, const py::object& ir_wavelength,
                   const py::object& energy_window, const py::object& progress,
                   const py::kwargs& options) {
  const Scan scan = with_overrides(given, gas, ir_wavelength, "classify");
  ClassifyAnalysisOptions o;
  set_described_from_kwargs(o, options, "classify");
  o.retrieve_options.bootstrap = 0;
  set_energy_window(energy_window, o.retrieve_options.preprocess);
  if (const std::string e = o.validate(); !e.empty()) throw usage_error(e);
  check_engine(o.retrieve_options.engine);
  return run_analysis(progress, scan.trace, "classify", [&](const AnalysisProgress& p) {
    return analyse_classify(scan.trace, o, p);
  });
}

// ---------------------------------------------------------------------------------------------
// simulate

std::pair<Scan, py::object> py_simulate(const py::object& preset_or_config,
                                        unsigned long long seed) {
  synthetic::ScanConfig cfg;
  std::string what;
  if (py::isinstance<py::dict>(preset_or_config)) {
    what = "config";
    cfg = cli::parse_scan_config(json_dumps(preset_or_config), what, true);
  } else {
    const std::string s = py::str(preset_or_config).cast<std::string>();
    std::error_code ec;
    if (fs::is_regular_file(s, ec)) {
      what = s;
      cfg = cli::load_scan_config(s);
    } else {
      what = "preset " + s;
      cfg = synthetic::find_preset(s).config;
    }
  }
  if (const std::string e = cfg.validate(); !e.empty()) throw input_error(what + ": " + e);
  std::optional<synthetic::SyntheticScan> sim;
  {
    py::gil_scoped_release release;
    sim = synthetic::generate_scan(cfg, seed);
  }
  Scan s;
  s.trace = sim->trace;
  s.trace.meta.source.clear();
  return {s, json_loads(result_to_json(sim->truth))};
}

// ---------------------------------------------------------------------------------------------
// reference hooks for the tests (docs/python.md "Checks against reference libraries")

// The synthetic generator's SFA amplitude a(W, tau) (synthetic/sfa_quadrature.h) for a Gaussian
// XUV pulse (retrieval/physics/xuv_builders.h) and a Gaussian IR pulse
// (retrieval/physics/ir_field.h), constant dipole; rows = delays.
py::array_t<std::complex<double>> sfa_amplitude(const std::vector<double>& delay_fs,
                                                const std::vector<double>& energy_eV,
                                                double center_eV, double transform_limited_fwhm_as,
                                                double gdd_as2, double ionization_energy_eV,
                                                double ir_wavelength_nm, double ir_fwhm_fs,
                                                double ir_peak_intensity_Wcm2, double ir_cep_rad,
                                                double grid_step_as, int grid_points) {
  GaussianXuvPulse xp;
  xp.center_eV = center_eV;
  xp.transform_limited_fwhm_as = transform_limited_fwhm_as;
  xp.gdd_as2 = gdd_as2;
  const XuvField xuv = make_gaussian_xuv(
      TimeGrid::centered(static_cast<std::size_t>(grid_points), units::as_to_au(grid_step_as)), xp);
  GaussianIrPulse ir;
  ir.wavelength_nm = ir_wavelength_nm;
  ir.fwhm_fs = ir_fwhm_fs;
  ir.peak_intensity_Wcm2 = ir_peak_intensity_Wcm2;
  ir.cep_rad = ir_cep_rad;
  const double ip = units::eV_to_au(ionization_energy_eV);
  synthetic::QuadratureOptions qo;
  qo.threads = 1;
  const synthetic::SfaQuadrature sfa(xuv, ir, ip, DipoleModel(DipoleKind::kConstant, ip), qo);
  return to_numpy(sfa.amplitude(scaled(delay_fs, [](double v) { return units::fs_to_au(v); }),
                                scaled(energy_eV, [](double v) { return units::eV_to_au(v); })));
}

// The engines' FFT (retrieval/core/grid.h Fft::time_to_freq): out_k = sum_n in_n exp(+2 pi i k n /
// N).
py::array_t<std::complex<double>> fft_time_to_freq(const std::vector<std::complex<double>>& in) {
  const Fft fft(in.size());
  CVec a(in.begin(), in.end()), out(in.size());
  fft.time_to_freq(a, out);
  return to_numpy(out);
}

}  // namespace

}  // namespace sw::python

PYBIND11_MODULE(streakwright, m) {
  using namespace sw;
  using namespace sw::python;
  m.doc() = "streakwright: attosecond streaking and RABBITT analysis (docs/python.md)";
  m.attr("__version__") = STREAKWRIGHT_VERSION;

  py::register_exception_translator([](std::exception_ptr p) {
    try {
      if (p) std::rethrow_exception(p);
    } catch (const sw::Error& e) {
      PyErr_SetString(PyExc_ValueError, e.what());
    }
  });

  py::class_<Scan>(m, "Scan", "A photoelectron energy versus delay scan (rows = delays).")
      .def_property_readonly(
          "counts", [](const Scan& s) { return to_numpy(s.trace.counts); },
          "counts per bin, 2-D (delays x energies)")
      .def_property_readonly(
          "energy_eV", [](const Scan& s) { return to_numpy(scaled(s.trace.energy_au, au_to_eV)); })
      .def_property_readonly(
          "delay_fs", [](const Scan& s) { return to_numpy(scaled(s.trace.delay_au, au_to_fs)); })
      .def_property_readonly("gas", [](const Scan& s) { return s.trace.meta.gas; })
      .def_property_readonly("ir_wavelength_nm",
                             [](const Scan& s) { return s.trace.meta.ir_wavelength_nm; })
      .def_property_readonly(
          "kind", [](const Scan& s) { return std::string(to_string(s.trace.meta.kind)); })
      .def_property_readonly("meta", &scan_meta, "sidecar values, unknown keys under 'extra'")
      .def_static("from_arrays", &scan_from_arrays, py::arg("counts"), py::kw_only(),
                  py::arg("energy_eV"), py::arg("delay_fs"), py::arg("gas") = py::none(),
                  py::arg("ir_wavelength_nm") = py::none(),
                  "Scan from arrays in memory, validated as a sidecar file is; further keyword "
                  "arguments are sidecar keys (kind, background, energy_resolution_eV, ...).")
      .def("__repr__", [](const Scan& s) {
        return "<streakwright.Scan " + std::to_string(s.trace.num_delays()) + " delays x " +
               std::to_string(s.trace.num_energies()) + " energies, gas '" + s.trace.meta.gas +
               "', kind " + to_string(s.trace.meta.kind) + ">";
      });

  py::class_<Result> result_class(
      m, "Result", "The result of one analysis (result.json and the sampled fields).");
  result_class
      .def_property_readonly("analysis", [](const Result& r) { return r.result().analysis; })
      .def_property_readonly("warnings", [](const Result& r) { return r.result().warnings; })
      .def(
          "to_json", [](const Result& r) { return result_to_json(r.result()); }, "result.json text")
      .def(
          "to_dict", [](const Result& r) { return json_loads(result_to_json(r.result())); },
          "result.json as a dict")
      .def(
          "write",
          [](const Result& r, const std::string& folder, const std::string& figure_format) {
            py::gil_scoped_release release;
            write_result(r, folder, figure_format);
          },
          py::arg("folder"), py::arg("figure_format") = "png",
          "write the output folder the CLI writes (replaced only when complete); figure_format "
          "\"png\" or \"svg\" as the CLI's --figure-format")
      .def_property_readonly("arrays", &result_arrays, "every sampled quantity as numpy arrays")
      .def_property_readonly("xuv_time_as",
                             [](const Result& r) { return arrays_item(r, "xuv_time_as"); })
      .def_property_readonly(
          "xuv_field", [](const Result& r) { return arrays_item(r, "xuv_field"); },
          "complex XUV envelope about the centre photon energy");
  // The other sampled quantities, one read-only property each (named as in `arrays`).
  for (const char* name :
       {"xuv_photon_energy_eV", "xuv_spectrum", "ir_time_fs", "ir_vector_potential_au",
        "ir_electric_field_au", "measured_trace", "retrieved_trace"})
    result_class.def_property_readonly(name,
                                       [name](const Result& r) { return arrays_item(r, name); });
  result_class.def("__repr__", [](const Result& r) {
    return "<streakwright.Result " + r.result().analysis + ">";
  });

  m.def("load_scan", &load_scan, py::arg("path"), py::kw_only(), py::arg("gas") = py::none(),
        py::arg("ir_wavelength_nm") = py::none(), py::arg("kind") = py::none(),
        py::arg("allow_outside_data") = false,
        "Read a scan through its sidecar (NAME.json / NAME.yaml) with the CLI's reader.");

  m.def("simulate", &py_simulate, py::arg("preset_or_config"), py::kw_only(),
        py::arg("seed") = 1ULL,
        "Synthetic scan with known truth: a preset name, a config file path or a config dict. "
        "Returns (Scan, truth dict).");

  // An analysis' docstring: its summary, then its keyword options from the description.
  const auto analysis_doc = [](const char* summary, const auto& defaults) {
    return std::string(summary) +
           "\n\nKeyword options (the CLI's flags with '-' -> '_'; defaults as there):\n" +
           described_kwargs_doc(defaults);
  };
  // Keywords: the flags of the CLI's `retrieve` from RetrieveOptions::describe, plus
  // energy_window, lines and progress.
  static const std::string retrieve_doc =
      analysis_doc(
          "Streaking retrieval (the CLI's `retrieve`); progress(stage, message) is called "
          "during the work.",
          RetrieveOptions{}) +
      "  energy_window = None: analyse only photoelectron energies (LO, HI) or \"LO:HI\" (eV)\n"
      "  lines = None: lines whose delay relative to the reference line is measured: "
      "\"2s,3s\", [\"2s\", \"Kr 4p\"] or \"none\"; None = every line found\n";
  m.def("retrieve", &py_retrieve, py::arg("scan"), py::kw_only(),
        py::arg("energy_window") = py::none(), py::arg("lines") = py::none(),
        py::arg("progress") = py::none(), retrieve_doc.c_str());

  // Keywords: the flags of the CLI's `rabbitt` and `classify` from their descriptions, plus the
  // overrides gas and ir_wavelength, energy_window, (rabbitt) xuv_only and progress.
  static const std::string rabbitt_doc = analysis_doc(
      "RABBITT analysis (the CLI's `rabbitt`); xuv_only: a Scan of the field-free spectrum.",
      RabbittAnalysisOptions{});
  m.def("rabbitt", &py_rabbitt, py::arg("scan"), py::kw_only(), py::arg("gas") = py::none(),
        py::arg("ir_wavelength") = py::none(), py::arg("xuv_only") = py::none(),
        py::arg("energy_window") = py::none(), py::arg("progress") = py::none(),
        rabbitt_doc.c_str());

  static const std::string classify_doc = analysis_doc(
      "Isolated / satellites / train verdict (the CLI's `classify`).", ClassifyAnalysisOptions{});
  m.def("classify", &py_classify, py::arg("scan"), py::kw_only(), py::arg("gas") = py::none(),
        py::arg("ir_wavelength") = py::none(), py::arg("energy_window") = py::none(),
        py::arg("progress") = py::none(), classify_doc.c_str());

  m.def(
      "presets",
      [] {
        std::vector<std::string> names;
        for (const auto& p : synthetic::presets()) names.push_back(p.name);
        return names;
      },
      "names of the built-in simulation presets");

  // Unit conversions (retrieval/core/units.h, CODATA 2018), for analyses in Python and for the
  // tests.
  py::module_ u =
      m.def_submodule("units", "conversions between atomic units and eV/fs/as/nm/W cm^-2");
  u.def("eV_to_au", &units::eV_to_au);
  u.def("au_to_eV", &units::au_to_eV);
  u.def("fs_to_au", &units::fs_to_au);
  u.def("au_to_fs", &units::au_to_fs);
  u.def("as_to_au", &units::as_to_au);
  u.def("au_to_as", &units::au_to_as);
  u.def("wavelength_nm_to_omega_au", &units::wavelength_nm_to_omega_au);
  u.def("intensity_to_peak_field_au", &units::intensity_to_peak_field_au);
  u.def("ponderomotive_energy_au", &units::ponderomotive_energy_au);

  // Reference hooks for the tests: the library's own numerical pieces, compared in
  // tests/python against scipy/numpy computations of the same quantities.
  py::module_ r = m.def_submodule("reference", "the library's numerical pieces, for checks");
  r.def("sfa_amplitude", &sfa_amplitude, py::kw_only(), py::arg("delay_fs"), py::arg("energy_eV"),
        py::arg("center_eV"), py::arg("transform_limited_fwhm_as"), py::arg("gdd_as2"),
        py::arg("ionization_energy_eV"), py::arg("ir_wavelength_nm"), py::arg("ir_fwhm_fs"),
        py::arg("ir_peak_intensity_Wcm2"), py::arg("ir_cep_rad"), py::arg("grid_step_as"),
        py::arg("grid_points"));
  r.def(
      "fwhm",
      [](const std::vector<double>& x, const std::vector<double>& y) {
        return fwhm_of_main_peak(x, y);
      },
      py::arg("x"), py::arg("y"), "FWHM of the main peak (retrieval/physics/pulse_metrics.h)");
  r.def("fft_time_to_freq", &fft_time_to_freq, py::arg("samples"));
}
