#include "cli/batch_summary.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <ctime>
#include <filesystem>
#include <sstream>

#include <nlohmann/json.hpp>

#include "io/atomic_file.h"
#include "io/figures.h"
#include "io/report_html.h"
#include "io/result_io.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "streakwright_version.h"

namespace sw::cli {

namespace {

namespace fs = std::filesystem;
using ojson = nlohmann::ordered_json;

std::string csv_cell(const std::string& s) {
  if (s.find_first_of(",\"\r\n") == std::string::npos) return s;
  std::string q = "\"";
  for (char c : s) q += c == '"' ? std::string("\"\"") : std::string(1, c);
  return q + "\"";
}

/// Display of value +- sigma (retrieval/core/format.h: sigma to two significant digits).
std::string display(const std::optional<double>& v, const std::optional<double>& s) {
  if (!v) return "";
  return format_value_sigma(*v, s && *s > 0 ? s : std::nullopt);
}

/// Percent-encodes what a relative URL path cannot carry verbatim.
std::string url_path(const std::string& p) {
  std::string out;
  for (unsigned char c : p) {
    if (std::isalnum(c) || c == '/' || c == '.' || c == '-' || c == '_' || c == '~') {
      out += static_cast<char>(c);
    } else {
      char buf[4];
      std::snprintf(buf, sizeof buf, "%%%02X", c);
      out += buf;
    }
  }
  return out;
}

std::string utc_now() {
  const std::time_t now = std::time(nullptr);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", std::gmtime(&now));
  return buf;
}

std::string utc_text(double epoch_s) {
  const auto t = static_cast<std::time_t>(std::floor(epoch_s));
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%dT%H:%M:%SZ", std::gmtime(&t));
  return buf;
}

/// One trend figure of a headline quantity over the ok rows.
void trend_figure(const std::vector<SummaryRow>& rows, const HeadlineQuantity& q,
                  const std::string& title, const std::string& png) {
  // Acquisition time on the x axis when every plotted scan has one, else the scan number.
  std::vector<std::size_t> idx;
  for (std::size_t i = 0; i < rows.size(); ++i)
    if (rows[i].status == "ok" && (rows[i].*q.value)) idx.push_back(i);
  bool by_time = !idx.empty();
  double t_first = 0;
  std::vector<double> times;
  for (std::size_t i : idx) {
    const auto t = parse_iso8601_utc(rows[i].acquired);
    if (!t) {
      by_time = false;
      break;
    }
    times.push_back(*t);
  }
  double unit_s = 3600.0;
  std::string unit = "h";
  if (by_time) {
    t_first = *std::min_element(times.begin(), times.end());
    if (*std::max_element(times.begin(), times.end()) - t_first > 72 * 3600.0) {
      unit_s = 86400.0;
      unit = "days";
    }
  }
  Series s;
  s.markers = true;
  s.line = false;  // scans are separate measurements: points with error bars, no curve
  s.label = "";
  bool any_sigma = false;
  for (std::size_t k = 0; k < idx.size(); ++k) {
    const SummaryRow& r = rows[idx[k]];
    s.x.push_back(by_time ? (times[k] - t_first) / unit_s : static_cast<double>(idx[k] + 1));
    s.y.push_back(*(r.*q.value));
    const double sig = q.sigma && (r.*q.sigma) ? *(r.*q.sigma) : 0.0;
    any_sigma = any_sigma || sig > 0;
    s.y_err.push_back(sig);
  }
  if (!any_sigma) s.y_err.clear();
  if (by_time) {
    // Points in time order so the connecting line does not zig-zag.
    std::vector<std::size_t> o(s.x.size());
    for (std::size_t k = 0; k < o.size(); ++k) o[k] = k;
    std::sort(o.begin(), o.end(), [&](std::size_t a, std::size_t b) { return s.x[a] < s.x[b]; });
    Series t = s;
    for (std::size_t k = 0; k < o.size(); ++k) {
      t.x[k] = s.x[o[k]];
      t.y[k] = s.y[o[k]];
      if (!s.y_err.empty()) t.y_err[k] = s.y_err[o[k]];
    }
    s = t;
  }
  LinePlot p;
  p.title = title + (idx.empty() ? " (no scan has this value)" : "");
  p.x_label = by_time ? "acquisition time (" + unit + " after " + utc_text(t_first) + ")"
                      : "scan number (summary order)";
  p.y_label = q.label;
  p.series.push_back(s);
  p.width_px = 900;
  p.height_px = 520;
  plot_lines(p, png);
}

}  // namespace

const std::vector<HeadlineQuantity>& headline_quantities() {
  static const std::vector<HeadlineQuantity> q = {
      {"fwhm_as", "XUV FWHM (as)", &SummaryRow::fwhm_as, &SummaryRow::fwhm_as_sigma},
      {"gdd_as2", "XUV GDD (as^2)", &SummaryRow::gdd_as2, &SummaryRow::gdd_as2_sigma},
      {"attochirp_as_per_eV", "attochirp (as/eV)", &SummaryRow::attochirp_as_per_eV,
       &SummaryRow::attochirp_as_per_eV_sigma},
      {"peak_vector_potential_au", "IR A0 (a.u.)", &SummaryRow::peak_vector_potential_au,
       &SummaryRow::peak_vector_potential_au_sigma},
      {"satellite_intensity_ratio", "satellite / main intensity",
       &SummaryRow::satellite_intensity_ratio, &SummaryRow::satellite_intensity_ratio_sigma},
      {"trace_error", "trace error G", &SummaryRow::trace_error, nullptr},
      {"line_delay_as", "second-line delay (as)", &SummaryRow::line_delay_as,
       &SummaryRow::line_delay_as_sigma},
      {"line_strength", "second-line strength", &SummaryRow::line_strength,
       &SummaryRow::line_strength_sigma},
  };
  return q;
}

const std::vector<std::string>& summary_columns() {
  static const std::vector<std::string> c = [] {
    std::vector<std::string> v = {"scan", "status", "message", "analysis", "class"};
    for (const auto& q : headline_quantities()) {
      v.push_back(q.column);
      if (q.sigma) v.push_back(std::string(q.column) + "_sigma");
    }
    for (const char* s : {"seconds", "converged", "trusted", "failed_checks", "reused", "acquired",
                          "input", "input_hash", "report", "delay_line"})
      v.push_back(s);
    return v;
  }();
  return c;
}

SummaryRow row_from_result(const std::string& scan, const AnalysisResult& r) {
  SummaryRow row;
  row.scan = scan;
  row.status = "ok";
  row.analysis = r.analysis;
  row.input = r.input;
  if (r.verdict) {
    row.pulse_class = to_string(r.verdict->pulse_class);
    row.satellite_intensity_ratio = r.verdict->satellite_intensity_ratio;
    row.satellite_intensity_ratio_sigma = r.verdict->satellite_intensity_ratio_sigma;
  }
  if (r.xuv) {
    row.fwhm_as = r.xuv->fwhm_as;
    row.fwhm_as_sigma = r.xuv->fwhm_as_sigma;
    row.gdd_as2 = r.xuv->gdd_as2;
    row.gdd_as2_sigma = r.xuv->gdd_as2_sigma;
  }
  if (r.rabbitt) {
    row.attochirp_as_per_eV = r.rabbitt->attochirp_as_per_eV;
    row.attochirp_as_per_eV_sigma = r.rabbitt->attochirp_as_per_eV_sigma;
  }
  if (r.ir) {
    row.peak_vector_potential_au = r.ir->peak_vector_potential_au;
    row.peak_vector_potential_au_sigma = r.ir->peak_vector_potential_au_sigma;
  }
  if (r.fit) {
    row.trace_error = r.fit->trace_error;
    row.converged = r.fit->converged;
    row.seconds = r.fit->seconds;
  }
  if (const auto s = param_number(r.extra, "batch.seconds")) row.seconds = s;
  for (const LineEntry& l : r.lines) {
    if (l.reference || !l.relative_delay_as) continue;
    row.line_delay_as = l.relative_delay_as;
    row.line_delay_as_sigma = l.relative_delay_as_sigma;
    row.line_strength = l.relative_strength;
    row.line_strength_sigma = l.relative_strength_sigma;
    row.delay_line = l.name;
    for (const LineEntry& ref : r.lines)
      if (ref.reference) row.delay_line += " vs " + ref.name;
    break;
  }
  if (r.quality) {
    row.trusted = r.quality->trusted;
    for (const auto& f : r.quality->failed)
      row.failed_checks += (row.failed_checks.empty() ? "" : ";") + f;
  }
  if (row.converged && !*row.converged)
    row.message = "the engine did not converge (best estimate written, converged: false)";
  else if (row.trusted && !*row.trusted)
    row.message = "not trusted: failed quality checks " + row.failed_checks;
  row.acquired = param_string(r.extra, "batch.acquired");
  row.input_hash = param_string(r.extra, "provenance.input_hash_fnv1a64");
  return row;
}

std::string summary_csv(const std::vector<SummaryRow>& rows) {
  std::string out;
  const auto& cols = summary_columns();
  for (std::size_t k = 0; k < cols.size(); ++k) out += (k ? "," : "") + cols[k];
  out += "\n";
  for (const SummaryRow& r : rows) {
    std::vector<std::string> cells = {r.scan, r.status, r.message, r.analysis, r.pulse_class};
    for (const auto& q : headline_quantities()) {
      cells.push_back((r.*q.value) ? format_exact(*(r.*q.value)) : "");
      if (q.sigma) cells.push_back((r.*q.sigma) ? format_exact(*(r.*q.sigma)) : "");
    }
    cells.push_back(r.seconds ? format_exact(*r.seconds) : "");
    cells.push_back(r.converged ? (*r.converged ? "true" : "false") : "");
    cells.push_back(r.trusted ? (*r.trusted ? "true" : "false") : "");
    cells.push_back(r.failed_checks);
    cells.push_back(r.reused ? "true" : "false");
    for (const std::string* s : {&r.acquired, &r.input, &r.input_hash, &r.report, &r.delay_line})
      cells.push_back(*s);
    for (std::size_t k = 0; k < cells.size(); ++k) {
      if (k) out += ',';
      out += csv_cell(cells[k]);
    }
    out += "\n";
  }
  return out;
}

std::string summary_json(const std::vector<SummaryRow>& rows,
                         const std::vector<std::pair<std::string, std::string>>& info) {
  ojson j;
  j["streakwright_summary"] = 1;
  j["program_version"] = STREAKWRIGHT_VERSION;
  j["created_utc"] = utc_now();
  for (const auto& [k, v] : info) j[k] = v;
  std::size_t ok = 0;
  for (const auto& r : rows) ok += r.status == "ok" ? 1 : 0;
  j["counts"] = {{"scans", rows.size()}, {"ok", ok}, {"failed", rows.size() - ok}};
  ojson scans = ojson::array();
  for (const SummaryRow& r : rows) {
    ojson s;
    s["scan"] = r.scan;
    s["status"] = r.status;
    if (!r.message.empty()) s["message"] = r.message;
    if (!r.analysis.empty()) s["analysis"] = r.analysis;
    if (!r.pulse_class.empty()) s["class"] = r.pulse_class;
    for (const auto& q : headline_quantities()) {
      if (r.*q.value) s[q.column] = *(r.*q.value);
      if (q.sigma && (r.*q.sigma)) s[std::string(q.column) + "_sigma"] = *(r.*q.sigma);
    }
    if (r.seconds) s["seconds"] = *r.seconds;
    if (r.converged) s["converged"] = *r.converged;
    if (r.trusted) s["trusted"] = *r.trusted;
    if (!r.failed_checks.empty()) s["failed_checks"] = r.failed_checks;
    if (r.reused) s["reused"] = true;
    if (!r.acquired.empty()) s["acquired"] = r.acquired;
    if (!r.input.empty()) s["input"] = r.input;
    if (!r.input_hash.empty()) s["input_hash"] = r.input_hash;
    if (!r.report.empty()) s["report"] = r.report;
    if (!r.delay_line.empty()) s["delay_line"] = r.delay_line;
    scans.push_back(std::move(s));
  }
  j["scans"] = std::move(scans);
  return j.dump(2) + "\n";
}

std::vector<SummaryRow> rows_from_summary_json(const std::string& text, const std::string& where) {
  nlohmann::json j;
  try {
    j = nlohmann::json::parse(text);
  } catch (const nlohmann::json::parse_error& e) {
    throw input_error(where + " is not valid JSON (RFC 8259): " + e.what());
  }
  if (!j.is_object() || !j.contains("streakwright_summary") || !j.contains("scans") ||
      !j["scans"].is_array())
    throw input_error(where +
                      ": expected a batch summary with \"streakwright_summary\": 1 and a "
                      "\"scans\" array");
  std::vector<SummaryRow> rows;
  std::size_t i = 0;
  for (const auto& s : j["scans"]) {
    const std::string at = where + ": scans[" + std::to_string(i++) + "]";
    if (!s.is_object() || !s.contains("scan") || !s["scan"].is_string() || !s.contains("status") ||
        !s["status"].is_string())
      throw input_error(at + ": expected an object with string keys \"scan\" and \"status\"");
    SummaryRow r;
    auto str = [&](const char* key, std::string* out) {
      if (!s.contains(key)) return;
      if (!s[key].is_string()) throw input_error(at + "." + key + ": expected a string");
      *out = s[key].get<std::string>();
    };
    auto number = [&](const std::string& key, std::optional<double>* out) {
      if (!s.contains(key)) return;
      if (!s[key].is_number()) throw input_error(at + "." + key + ": expected a number");
      *out = s[key].get<double>();
    };
    str("scan", &r.scan);
    str("status", &r.status);
    str("message", &r.message);
    str("analysis", &r.analysis);
    str("class", &r.pulse_class);
    for (const auto& q : headline_quantities()) {
      number(q.column, &(r.*q.value));
      if (q.sigma) number(std::string(q.column) + "_sigma", &(r.*q.sigma));
    }
    number("seconds", &r.seconds);
    if (s.contains("converged") && s["converged"].is_boolean())
      r.converged = s["converged"].get<bool>();
    if (s.contains("trusted") && s["trusted"].is_boolean()) r.trusted = s["trusted"].get<bool>();
    str("failed_checks", &r.failed_checks);
    if (s.contains("reused") && s["reused"].is_boolean()) r.reused = s["reused"].get<bool>();
    str("acquired", &r.acquired);
    str("input", &r.input);
    str("input_hash", &r.input_hash);
    str("report", &r.report);
    str("delay_line", &r.delay_line);
    rows.push_back(std::move(r));
  }
  return rows;
}

std::optional<double> parse_iso8601_utc(const std::string& text) {
  int Y = 0, M = 0, D = 0, h = 0, m = 0;
  double sec = 0;
  char sep = 0;
  int used = 0;
  if (std::sscanf(text.c_str(), "%4d-%2d-%2d%c%2d:%2d%n", &Y, &M, &D, &sep, &h, &m, &used) < 6 ||
      (sep != 'T' && sep != 't' && sep != ' '))
    return std::nullopt;
  std::size_t pos = static_cast<std::size_t>(used);
  if (pos < text.size() && text[pos] == ':') {
    std::size_t end = pos + 1;
    while (end < text.size() &&
           (std::isdigit(static_cast<unsigned char>(text[end])) || text[end] == '.'))
      ++end;
    try {
      sec = std::stod(text.substr(pos + 1, end - pos - 1));
    } catch (...) {
      return std::nullopt;
    }
    pos = end;
  }
  double offset_s = 0;
  if (pos < text.size()) {
    const char z = text[pos];
    if (z == 'Z' || z == 'z') {
      ++pos;
    } else if (z == '+' || z == '-') {
      int oh = 0, om = 0;
      if (std::sscanf(text.c_str() + pos + 1, "%2d:%2d", &oh, &om) < 1) return std::nullopt;
      offset_s = (z == '+' ? 1 : -1) * (oh * 3600.0 + om * 60.0);
      pos = text.size();
    } else {
      return std::nullopt;
    }
  }
  if (M < 1 || M > 12 || D < 1 || D > 31 || h > 23 || m > 59 || sec >= 61) return std::nullopt;
  std::tm tm{};
  tm.tm_year = Y - 1900;
  tm.tm_mon = M - 1;
  tm.tm_mday = D;
  tm.tm_hour = h;
  tm.tm_min = m;
  const std::time_t t = timegm(&tm);
  return static_cast<double>(t) + sec - offset_s;
}

void write_summary_outputs(const std::string& dir, const std::vector<SummaryRow>& rows,
                           const std::vector<std::pair<std::string, std::string>>& info,
                           const std::string& title, const std::vector<std::string>& notes,
                           const std::vector<SummaryTable>& tables,
                           plot::FigureFormat figure_format) {
  std::error_code ec;
  fs::create_directories(dir, ec);
  if (ec) throw input_error("cannot create the summary folder '" + dir + "': " + ec.message());
  // Figures ("*.png" below) take the extension of the requested format.
  const auto path = [&](const char* f) {
    return (fs::path(dir) / plot::with_figure_extension(f, figure_format)).string();
  };
  write_file_atomic(path("summary.csv"), summary_csv(rows));
  write_file_atomic(path("summary.json"), summary_json(rows, info));
  const auto& hq = headline_quantities();
  trend_figure(rows, hq[0], "XUV pulse duration across the batch", path("trend_fwhm.png"));
  trend_figure(rows, hq[2], "RABBITT attochirp across the batch", path("trend_attochirp.png"));

  std::size_t ok = 0, reused = 0, untrusted = 0;
  for (const auto& r : rows) {
    ok += r.status == "ok" ? 1 : 0;
    reused += r.reused ? 1 : 0;
    untrusted += r.trusted && !*r.trusted ? 1 : 0;
  }
  HtmlReport page(title);
  std::ostringstream counts;
  counts << rows.size() << " scans: " << ok << " ok, " << rows.size() - ok << " failed";
  if (untrusted)
    counts << "; " << untrusted << " of the ok results not trusted (quality checks failed)";
  if (reused) counts << " (" << reused << " results reused by --resume)";
  counts << ". Tables: summary.csv and summary.json in this folder.";
  page.add_paragraph(counts.str());
  for (const auto& n : notes) page.add_paragraph(n);
  std::vector<std::vector<std::string>> failed;
  for (const auto& r : rows) {
    if (r.status == "ok") continue;
    failed.push_back({r.scan, r.analysis, r.message, r.input});
  }
  if (!failed.empty()) {
    page.add_heading("Failed scans (" + std::to_string(failed.size()) + ")");
    page.add_table({"scan", "analysis", "reason", "input"}, failed);
  }
  for (const auto& t : tables) {
    page.add_heading(t.heading);
    page.add_table(t.header, t.rows, t.caption);
  }
  page.add_heading("Scans");
  std::vector<std::vector<std::string>> table, links;
  for (const auto& r : rows) {
    std::vector<std::string> row = {
        r.scan,
        r.status,
        r.analysis,
        r.pulse_class,
        display(r.fwhm_as, r.fwhm_as_sigma),
        display(r.gdd_as2, r.gdd_as2_sigma),
        display(r.attochirp_as_per_eV, r.attochirp_as_per_eV_sigma),
        display(r.peak_vector_potential_au, r.peak_vector_potential_au_sigma),
        display(r.satellite_intensity_ratio, r.satellite_intensity_ratio_sigma),
        display(r.trace_error, std::nullopt),
        r.seconds ? display(r.seconds, std::nullopt) : "",
        r.message};
    table.push_back(std::move(row));
    links.push_back({r.report.empty() ? "" : url_path(r.report)});
  }
  page.add_table_with_links(
      {"scan (report)", "status", "analysis", "class", "FWHM (as)", "GDD (as^2)",
       "attochirp (as/eV)", "IR A0 (a.u.)", "satellite ratio", "G", "time (s)", "remark"},
      table, links);
  page.add_heading("Trends");
  page.add_figure(path("trend_fwhm.png"),
                  "XUV FWHM with its bootstrap 1-sigma versus scan number (or acquisition time "
                  "when every sidecar gives one).");
  page.add_figure(path("trend_attochirp.png"),
                  "RABBITT attochirp with its 1-sigma versus scan number (or acquisition time).");
  std::string footer = std::string("streakwright ") + STREAKWRIGHT_VERSION + ", " + utc_now();
  page.set_footer(footer);
  page.write(path("index.html"));
}

std::vector<SummaryRow> load_batch_rows(const std::string& dir, std::string* source) {
  std::error_code ec;
  if (!fs::is_directory(dir, ec))
    throw input_error("'" + dir + "' is not a folder; expected a batch output folder");
  const fs::path root(dir);
  auto from_summary = [](const fs::path& file, const fs::path& prefix) {
    std::vector<SummaryRow> rows =
        rows_from_summary_json(read_file_bytes(file.string()), file.string());
    for (auto& r : rows)
      if (!r.report.empty()) r.report = (prefix / r.report).generic_string();
    return rows;
  };
  if (fs::is_regular_file(root / "summary.json", ec)) {
    if (source) *source = (root / "summary.json").string();
    return from_summary(root / "summary.json", "");
  }
  std::vector<fs::path> shard_summaries;
  for (const auto& e : fs::directory_iterator(root, ec))
    if (e.is_directory() && fs::is_regular_file(e.path() / "summary.json"))
      shard_summaries.push_back(e.path());
  std::sort(shard_summaries.begin(), shard_summaries.end());
  if (!shard_summaries.empty()) {
    std::vector<SummaryRow> rows;
    std::string list;
    for (const auto& d : shard_summaries) {
      const auto part = from_summary(d / "summary.json", d.filename());
      rows.insert(rows.end(), part.begin(), part.end());
      list += (list.empty() ? "" : ", ") + (d / "summary.json").string();
    }
    if (source) *source = list;
    return rows;
  }
  std::vector<SummaryRow> rows;
  fs::recursive_directory_iterator it(root, fs::directory_options::skip_permission_denied, ec), end;
  for (; it != end; it.increment(ec)) {
    if (ec) break;
    const std::string fname = it->path().filename().string();
    if (it->is_directory() && !fname.empty() && fname[0] == '.') {
      it.disable_recursion_pending();
      continue;
    }
    if (fname != "result.json" || !it->is_regular_file()) continue;
    const fs::path folder = it->path().parent_path();
    fs::path rel = folder.lexically_relative(root);
    std::string name = rel.generic_string();
    if (name.empty() || name == ".")
      name = fs::absolute(root).lexically_normal().filename().string();
    SummaryRow row;
    try {
      row = row_from_result(name, read_result_json(it->path().string()));
    } catch (const Error& e) {
      row.scan = name;
      row.status = "failed";
      row.message = std::string("cannot read the result: ") + e.what();
    }
    if (fs::exists(folder / "report.html"))
      row.report = (rel / "report.html").lexically_normal().generic_string();
    rows.push_back(std::move(row));
  }
  if (rows.empty())
    throw input_error("'" + dir +
                      "' holds no summary.json (neither in it nor in its sub-folders) and "
                      "no result.json; expected the output folder of streakwright batch");
  std::sort(rows.begin(), rows.end(),
            [](const SummaryRow& a, const SummaryRow& b) { return a.scan < b.scan; });
  if (source) *source = "result.json files under " + dir;
  return rows;
}

}  // namespace sw::cli
