// The imperfections validation set, its running and reporting: one retrieval per case scored
// against the generator's truth (run_sweep), the scans as files, the CSV, figures and tables.
// The cases themselves are in imperfections_cases.cpp.
#include "imperfections.h"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <mutex>
#include <sstream>
#include <thread>

#include "io/figures.h"
#include "io/trace_reader.h"
#include "io/trace_writer.h"
#include "retrieval/analysis/retrieve.h"
#include "retrieval/core/error.h"
#include "synthetic/generator.h"

namespace sw::validation {

using synthetic::ScanConfig;

double SweepRow::fwhm_error() const { return (fwhm_as - truth_fwhm_as) / truth_fwhm_as; }
double SweepRow::a0_error() const { return (a0 - truth_a0) / truth_a0; }
double SweepRow::pull() const {
  return fwhm_sigma_as > 0 ? (fwhm_as - truth_fwhm_as) / fwhm_sigma_as : std::nan("");
}
bool SweepRow::within(double k) const {
  return fwhm_sigma_as > 0 && std::abs(fwhm_as - truth_fwhm_as) <= k * fwhm_sigma_as;
}
bool SweepRow::wrong() const {
  if (!error.empty()) return true;
  return !(std::abs(fwhm_error()) <= tolerance) || !(std::abs(a0_error()) <= tolerance) ||
         truth_class != retrieved_class;
}
bool SweepRow::wrong_and_trusted() const { return error.empty() && wrong() && trusted; }

namespace {

SweepRow run_case(const ValidationCase& k, const SweepOptions& o, const std::string& dir) {
  SweepRow row;
  row.name = k.name;
  row.imperfection = k.imperfection;
  row.good = k.good;
  row.peak_counts = k.config.noise.peak_counts;
  row.tolerance = k.tolerance;
  const auto start = std::chrono::steady_clock::now();
  try {
    ScanConfig c = k.config;
    if (o.jobs > 1) c.numerics.threads = 1;
    const synthetic::SyntheticScan scan = synthetic::generate_scan(c, k.seed);
    row.truth_fwhm_as = scan.truth.xuv->fwhm_as.value_or(0);
    row.truth_a0 = scan.truth.ir ? scan.truth.ir->peak_vector_potential_au.value_or(0) : 0;
    row.truth_class = to_string(scan.truth.verdict->pulse_class);
    Trace trace = scan.trace;
    if (scan.tof) {
      // Time-of-flight scans go through the files: the reader applies the calibration.
      TraceWriteOptions wo;
      wo.tof = TraceTofAxis{scan.tof->tof_ns, scan.tof->length_m, scan.tof->t0_ns,
                            scan.tof->energy_offset_eV};
      const std::string sidecar = (std::filesystem::path(dir) / (k.name + ".json")).string();
      trace.meta.source.clear();
      write_trace(trace, sidecar, TraceFormat::kPng16, wo);
      trace = read_trace(sidecar);
    }
    if (!k.declared_lines.empty()) trace.meta.lines = k.declared_lines;
    RetrieveOptions ro;
    ro.bootstrap = o.bootstrap;
    ro.engine = o.engine;
    ro.threads = 1;
    parse_uncertainty_method(o.uncertainty, &ro.uncertainty);  // checked by run_sweep
    ro.preprocess.energy_combine = o.energy_combine;
    if (o.full_model_patience > 0) ro.full_model_patience = o.full_model_patience;
    const RetrieveOutput r = retrieve(trace, ro);
    const AnalysisResult& a = r.result;
    row.engine = a.engine;
    if (a.xuv) {
      row.fwhm_as = a.xuv->fwhm_as.value_or(std::nan(""));
      row.fwhm_sigma_as = a.xuv->fwhm_as_sigma.value_or(0);
    }
    row.a0 = a.ir ? a.ir->peak_vector_potential_au.value_or(std::nan("")) : std::nan("");
    row.retrieved_class = a.verdict ? to_string(a.verdict->pulse_class) : "none";
    row.window_cut_share = param_number(a.extra, "preprocess.window_cut_share").value_or(0.0);
    row.uncertainty_method = param_string(a.extra, "bootstrap.method");
    if (a.quality) {
      row.has_quality = true;
      row.trusted = a.quality->trusted;
      for (const std::string& f : a.quality->failed)
        row.failed += (row.failed.empty() ? "" : ";") + f;
    }
  } catch (const std::exception& e) {
    row.error = e.what();
    row.trusted = false;
  }
  row.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  return row;
}

std::string fmt(const char* f, double x) {
  char b[64];
  std::snprintf(b, sizeof b, f, x);
  return b;
}

std::string csv_field(std::string s) {
  if (s.find_first_of(",\"\n") == std::string::npos) return s;
  std::string o = "\"";
  for (char ch : s) o += ch == '"' ? std::string("\"\"") : std::string(1, ch);
  return o + "\"";
}

}  // namespace

std::vector<SweepRow> run_sweep(const std::vector<std::string>& names, const SweepOptions& o,
                                const RowCallback& on_row) {
  const std::vector<ValidationCase> all = sweep_cases(o);
  std::vector<ValidationCase> todo;
  if (names.empty()) {
    todo = all;
  } else {
    for (const std::string& n : names) {
      auto it = std::find_if(all.begin(), all.end(),
                             [&](const ValidationCase& k) { return k.name == n; });
      if (it == all.end()) {
        std::string known;
        for (const ValidationCase& k : all) known += (known.empty() ? "" : ", ") + k.name;
        throw usage_error("unknown validation case '" + n + "'; known cases: " + known);
      }
      todo.push_back(*it);
    }
  }
  if (o.bootstrap < 0)
    throw usage_error("--bootstrap = " + std::to_string(o.bootstrap) + "; expected >= 0");
  if (o.jobs < 1) throw usage_error("--jobs = " + std::to_string(o.jobs) + "; expected >= 1");
  if (UncertaintyMethod u; !parse_uncertainty_method(o.uncertainty, &u))
    throw usage_error("--uncertainty = " + o.uncertainty + "; expected full, warm or laplace");
  std::filesystem::path dir = o.work_dir;
  if (dir.empty())
    dir = std::filesystem::temp_directory_path() /
          ("sw_validation_" +
           std::to_string(std::chrono::steady_clock::now().time_since_epoch().count()));
  std::filesystem::create_directories(dir);

  std::vector<SweepRow> rows(todo.size());
  std::atomic<std::size_t> next{0};
  std::mutex log;
  auto worker = [&] {
    for (;;) {
      const std::size_t i = next++;
      if (i >= todo.size()) return;
      rows[i] = run_case(todo[i], o, dir.string());
      if (!o.verbose && on_row) {
        std::lock_guard<std::mutex> lock(log);
        on_row(rows[i]);
      }
      if (o.verbose) {
        const SweepRow& r = rows[i];
        std::lock_guard<std::mutex> lock(log);
        if (on_row) on_row(r);
        if (!r.error.empty())
          std::fprintf(stderr, "%-28s ERROR %s (%.0f s)\n", r.name.c_str(), r.error.c_str(),
                       r.seconds);
        else
          std::fprintf(stderr,
                       "%-28s FWHM %7.1f +- %5.1f / %7.1f as (%+6.1f %%)  A0 %+6.1f %%  %s/%s  "
                       "%s%s  %.0f s\n",
                       r.name.c_str(), r.fwhm_as, r.fwhm_sigma_as, r.truth_fwhm_as,
                       100 * r.fwhm_error(), 100 * r.a0_error(), r.retrieved_class.c_str(),
                       r.truth_class.c_str(),
                       !r.has_quality ? "no-quality-section"
                       : r.trusted    ? "trusted"
                                      : "untrusted",
                       r.wrong() ? " WRONG" : "", r.seconds);
      }
    }
  };
  std::vector<std::thread> pool;
  const int n = std::min<int>(o.jobs, static_cast<int>(todo.size()));
  for (int j = 1; j < n; ++j) pool.emplace_back(worker);
  worker();
  for (auto& t : pool) t.join();
  if (o.work_dir.empty()) {
    std::error_code ec;
    std::filesystem::remove_all(dir, ec);
  }
  return rows;
}

std::vector<std::string> write_scans(const std::vector<std::string>& names, const SweepOptions& o,
                                     const std::string& dir) {
  std::filesystem::create_directories(dir);
  std::vector<std::string> written;
  for (const ValidationCase& k : sweep_cases(o)) {
    if (!names.empty() && std::find(names.begin(), names.end(), k.name) == names.end()) continue;
    const synthetic::SyntheticScan scan = synthetic::generate_scan(k.config, k.seed);
    Trace trace = scan.trace;
    TraceWriteOptions wo;
    if (scan.tof)
      wo.tof = TraceTofAxis{scan.tof->tof_ns, scan.tof->length_m, scan.tof->t0_ns,
                            scan.tof->energy_offset_eV};
    trace.meta.source.clear();
    if (!k.declared_lines.empty()) trace.meta.lines = k.declared_lines;
    const std::string sidecar = (std::filesystem::path(dir) / (k.name + ".json")).string();
    write_trace(trace, sidecar, TraceFormat::kPng16, wo);
    written.push_back(sidecar);
  }
  return written;
}

std::string check_scans(const std::vector<std::string>& names, const SweepOptions& o) {
  const int jobs = o.jobs;
  std::vector<ValidationCase> todo;
  for (const ValidationCase& k : sweep_cases(o))
    if (names.empty() || std::find(names.begin(), names.end(), k.name) != names.end())
      todo.push_back(k);
  std::vector<std::string> lines(todo.size());
  std::atomic<std::size_t> next{0};
  auto worker = [&] {
    for (;;) {
      const std::size_t i = next++;
      if (i >= todo.size()) return;
      ScanConfig c = todo[i].config;
      if (jobs > 1) c.numerics.threads = 1;
      try {
        const synthetic::SyntheticScan s = synthetic::generate_scan(c, todo[i].seed);
        const Eigen::Index n = s.clean.cols(), m = std::max<Eigen::Index>(2, n / 50);
        const double edge =
            std::max(s.clean.leftCols(m).maxCoeff(), s.clean.rightCols(m).maxCoeff()) /
            s.clean.maxCoeff();
        char b[512];
        std::snprintf(
            b, sizeof b,
            "%-28s FWHM %7.1f TL %7.1f as  %-24s A0 %.4f  edge %.1e  %zux%zu  max %.0f  %.1f s%s",
            todo[i].name.c_str(), s.truth.xuv->fwhm_as.value_or(0),
            s.truth.xuv->transform_limited_fwhm_as.value_or(0),
            to_string(s.truth.verdict->pulse_class),
            s.truth.ir ? s.truth.ir->peak_vector_potential_au.value_or(0) : 0.0, edge,
            s.trace.num_delays(), s.trace.num_energies(), s.trace.counts.maxCoeff(), s.seconds,
            s.truth.warnings.empty() ? "" : "  WARNING");
        lines[i] = b;
      } catch (const std::exception& e) {
        lines[i] = todo[i].name + " ERROR " + e.what();
      }
    }
  };
  std::vector<std::thread> pool;
  for (int j = 1; j < jobs; ++j) pool.emplace_back(worker);
  worker();
  for (auto& t : pool) t.join();
  std::string out;
  for (const std::string& l : lines) out += l + "\n";
  return out;
}

std::string sweep_csv_header() {
  return "case,imperfection,good,peak_counts,tolerance,truth_fwhm_as,fwhm_as,fwhm_sigma_as,"
         "fwhm_error_pct,error_over_sigma,truth_a0_au,a0_au,a0_error_pct,truth_class,"
         "retrieved_class,quality_present,trusted,failed,within_1sigma,within_2sigma,wrong,"
         "wrong_and_trusted,engine,seconds,error,window_cut_share,uncertainty_method";
}

std::string sweep_csv_line(const SweepRow& r) {
  std::ostringstream s;
  s.precision(8);
  s << csv_field(r.name) << ',' << csv_field(r.imperfection) << ',' << r.good << ','
    << r.peak_counts << ',' << r.tolerance << ',' << r.truth_fwhm_as << ',' << r.fwhm_as << ','
    << r.fwhm_sigma_as << ',' << 100 * r.fwhm_error() << ',' << r.pull() << ',' << r.truth_a0 << ','
    << r.a0 << ',' << 100 * r.a0_error() << ',' << r.truth_class << ',' << r.retrieved_class << ','
    << r.has_quality << ',' << r.trusted << ',' << csv_field(r.failed) << ',' << r.within(1) << ','
    << r.within(2) << ',' << r.wrong() << ',' << r.wrong_and_trusted() << ',' << r.engine << ','
    << r.seconds << ',' << csv_field(r.error) << ',' << r.window_cut_share << ','
    << csv_field(r.uncertainty_method);
  return s.str();
}

std::vector<SweepRow> rows_from_csv(const std::string& text, const std::string& where) {
  // RFC 4180 fields: quoted fields may hold commas and doubled quotes.
  auto split = [](const std::string& line) {
    std::vector<std::string> f;
    std::string cur;
    bool q = false;
    for (std::size_t i = 0; i < line.size(); ++i) {
      const char c = line[i];
      if (q) {
        if (c == '"' && i + 1 < line.size() && line[i + 1] == '"')
          cur += '"', ++i;
        else if (c == '"')
          q = false;
        else
          cur += c;
      } else if (c == '"')
        q = true;
      else if (c == ',')
        f.push_back(cur), cur.clear();
      else
        cur += c;
    }
    f.push_back(cur);
    return f;
  };
  std::vector<SweepRow> rows;
  std::istringstream in(text);
  std::string line;
  int n = 0;
  while (std::getline(in, line)) {
    if (++n == 1 || line.empty()) continue;
    const std::vector<std::string> f = split(line);
    // 25: files written before window_cut_share, 26: before uncertainty_method.
    if (f.size() < 25 || f.size() > 27)
      throw input_error(where + " line " + std::to_string(n) + ": expected 25 to 27 fields, got " +
                        std::to_string(f.size()));
    auto num = [&](int i) {
      try {
        return std::stod(f[static_cast<std::size_t>(i)]);
      } catch (const std::exception&) {
        return std::nan("");
      }
    };
    SweepRow r;
    r.name = f[0];
    r.imperfection = f[1];
    r.good = f[2] == "1";
    r.peak_counts = num(3);
    r.tolerance = num(4);
    r.truth_fwhm_as = num(5);
    r.fwhm_as = num(6);
    r.fwhm_sigma_as = num(7);
    r.truth_a0 = num(10);
    r.a0 = num(11);
    r.truth_class = f[13];
    r.retrieved_class = f[14];
    r.has_quality = f[15] == "1";
    r.trusted = f[16] == "1";
    r.failed = f[17];
    r.engine = f[22];
    r.seconds = num(23);
    r.error = f[24];
    if (f.size() > 25) r.window_cut_share = num(25);
    if (f.size() > 26) r.uncertainty_method = f[26];
    rows.push_back(r);
  }
  return rows;
}

void sweep_figures(const std::vector<SweepRow>& rows, const std::string& dir) {
  std::filesystem::create_directories(dir);
  Series trusted, untrusted, band_hi, band_lo;
  trusted.label = "trusted";
  trusted.line = false;
  trusted.markers = true;
  trusted.color = plot::Rgb{30, 90, 200};
  untrusted = trusted;
  untrusted.label = "quality.trusted = false";
  untrusted.color = plot::Rgb{210, 60, 40};
  band_hi.label = "target (5 % / 8 % / 10 %)";
  band_hi.dashed = true;
  band_hi.color = plot::Rgb{120, 120, 120};
  band_lo = band_hi;
  band_lo.label = "";
  Series pt = trusted, pu = untrusted;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    const SweepRow& r = rows[i];
    const double x = static_cast<double>(i + 1);
    band_hi.x.push_back(x);
    band_lo.x.push_back(x);
    band_hi.y.push_back(100 * r.tolerance);
    band_lo.y.push_back(-100 * r.tolerance);
    if (!r.error.empty()) continue;
    Series& s = r.trusted ? trusted : untrusted;
    s.x.push_back(x);
    s.y.push_back(std::clamp(100 * r.fwhm_error(), -60.0, 60.0));
    s.y_err.push_back(r.fwhm_sigma_as > 0 ? std::min(100 * r.fwhm_sigma_as / r.truth_fwhm_as, 60.0)
                                          : 0.0);
    if (r.fwhm_sigma_as > 0) {
      Series& p = r.trusted ? pt : pu;
      p.x.push_back(x);
      p.y.push_back(std::clamp(r.pull(), -8.0, 8.0));
    }
  }
  LinePlot lp;
  lp.title = "FWHM error per case (bars: reported 1 sigma; clipped at 60 %)";
  lp.x_label = "case (row of docs/validation_imperfections_table.md)";
  lp.y_label = "FWHM error (%)";
  lp.series = {band_hi, band_lo, trusted, untrusted};
  lp.zero_line = true;
  lp.y_min = -60;
  lp.y_max = 60;
  plot_lines(lp, dir + "/imperfections_fwhm_error.png");
  LinePlot pl;
  pl.title = "FWHM (retrieved - truth) / sigma per case (clipped at 8)";
  pl.x_label = lp.x_label;
  pl.y_label = "pull";
  Series p1, m1, p2, m2;
  for (Series* s : {&p1, &m1, &p2, &m2}) {
    s->dashed = true;
    s->color = plot::Rgb{120, 120, 120};
    s->x = band_hi.x;
  }
  p1.y.assign(p1.x.size(), 1);
  m1.y.assign(m1.x.size(), -1);
  p2.y.assign(p2.x.size(), 2);
  m2.y.assign(m2.x.size(), -2);
  p2.label = "+-1 and +-2";
  pl.series = {p1, m1, p2, m2, pt, pu};
  pl.zero_line = true;
  pl.y_min = -8;
  pl.y_max = 8;
  plot_lines(pl, dir + "/imperfections_pull.png");
}

std::string sweep_csv(const std::vector<SweepRow>& rows) {
  std::string s = sweep_csv_header() + "\n";
  for (const SweepRow& r : rows) s += sweep_csv_line(r) + "\n";
  return s;
}

std::string sweep_summary(const std::vector<SweepRow>& rows) {
  int n50 = 0, w1 = 0, w2 = 0, good = 0, good_right = 0, false_alarms = 0, wt = 0, wrong = 0,
      errors = 0, no_quality = 0, nt = 0, t1 = 0, t2 = 0, untrusted = 0;
  for (const SweepRow& r : rows) {
    if (r.error.empty() && !r.trusted) ++untrusted;
    if (!r.error.empty()) ++errors;
    if (r.error.empty() && !r.has_quality) ++no_quality;
    if (r.wrong()) ++wrong;
    if (r.wrong_and_trusted()) ++wt;
    if (r.error.empty() && r.peak_counts >= 50 && r.fwhm_sigma_as > 0) {
      ++n50;
      w1 += r.within(1);
      w2 += r.within(2);
      if (r.trusted) {
        ++nt;
        t1 += r.within(1);
        t2 += r.within(2);
      }
    }
    if (r.good) {
      ++good;
      if (!r.wrong()) {
        ++good_right;
        if (!r.trusted) ++false_alarms;
      }
    }
  }
  std::ostringstream s;
  auto pct = [](int a, int b) {
    return b > 0 ? fmt("%.0f %%", 100.0 * a / b) : std::string("n/a");
  };
  s << "- coverage (rows >= 50 peak counts with a sigma): truth within 1 sigma in " << w1 << " / "
    << n50 << " (" << pct(w1, n50) << "), within 2 sigma in " << w2 << " / " << n50 << " ("
    << pct(w2, n50) << ")\n";
  s << "- the same over trusted results only: within 1 sigma in " << t1 << " / " << nt << " ("
    << pct(t1, nt) << "), within 2 sigma in " << t2 << " / " << nt << " (" << pct(t2, nt) << ")\n";
  s << "- untrusted results: " << untrusted << "\n";
  s << "- false alarms on good scans: " << false_alarms << " untrusted of " << good_right
    << " right good scans (" << good << " good scans)\n";
  s << "- wrong (beyond target or wrong class): " << wrong << " of " << rows.size()
    << "; wrong and trusted: " << wt << "\n";
  s << "- analyses that failed with an error: " << errors
    << "; results without a quality section: " << no_quality << "\n";
  return s.str();
}

std::string sweep_markdown(const std::vector<SweepRow>& rows) {
  std::ostringstream s;
  s << "| case | imperfection | peak counts | FWHM truth (as) | FWHM (as) | error | error/sigma | "
       "A0 error | class truth / retrieved | trusted | failed checks | 1 sigma | 2 sigma | wrong | "
       "wrong & trusted |\n|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|\n";
  for (const SweepRow& r : rows) {
    if (!r.error.empty()) {
      s << "| " << r.name << " | " << r.imperfection << " | " << r.peak_counts << " | "
        << fmt("%.1f", r.truth_fwhm_as) << " | error: " << r.error
        << " | | | | | no | | | | yes | no |\n";
      continue;
    }
    s << "| " << r.name << " | " << r.imperfection << " | " << r.peak_counts << " | "
      << fmt("%.1f", r.truth_fwhm_as) << " | " << fmt("%.1f", r.fwhm_as) << " +- "
      << fmt("%.1f", r.fwhm_sigma_as) << " | " << fmt("%+.1f %%", 100 * r.fwhm_error()) << " | "
      << (r.fwhm_sigma_as > 0 ? fmt("%+.1f", r.pull()) : std::string("n/a")) << " | "
      << fmt("%+.1f %%", 100 * r.a0_error()) << " | " << r.truth_class << " / " << r.retrieved_class
      << " | " << (r.has_quality ? (r.trusted ? "yes" : "no") : "(no section)") << " | " << r.failed
      << " | " << (r.within(1) ? "yes" : "no") << " | " << (r.within(2) ? "yes" : "no") << " | "
      << (r.wrong() ? "**yes**" : "no") << " | " << (r.wrong_and_trusted() ? "**yes**" : "no")
      << " |\n";
  }
  s << "\n" << sweep_summary(rows);
  return s.str();
}

}  // namespace sw::validation
