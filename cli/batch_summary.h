#pragma once
// The batch summary: one row per scan with its status and headline numbers, and the files
// written from the rows into a batch output folder (docs/batch.md):
//   summary.csv          RFC 4180 table, one row per scan, empty cells for absent values
//   summary.json         {"streakwright_summary": 1, ..., "scans": [{row}, ...]}, absent values
//                        omitted (never zero), numbers with round-trip precision
//   trend_fwhm.png       XUV FWHM (as) +- sigma versus scan number or acquisition time
//   trend_attochirp.png  RABBITT attochirp (as/eV) +- sigma, same x axis
//   index.html           self-contained page: counts, failures first with their messages, every
//                        scan with a link to its report, the trend figures
// Shared by `batch` (rows from the scans it ran or reused) and `summarize` (rows merged from
// summary.json files or from result.json files).

#include <optional>
#include <string>
#include <vector>

#include "io/plot.h"
#include "retrieval/core/result.h"

namespace sw::cli {

struct SummaryRow {
  std::string scan;         ///< scan name = output folder relative to the batch folder
  std::string status;       ///< "ok" or "failed"
  std::string message;      ///< failure reason; for ok rows a remark ("not converged") or ""
  std::string analysis;     ///< analysis run: retrieve | rabbitt | classify (or requested)
  std::string pulse_class;  ///< verdict.class ("" when absent)
  std::optional<double> fwhm_as, fwhm_as_sigma;
  std::optional<double> gdd_as2, gdd_as2_sigma;
  std::optional<double> attochirp_as_per_eV, attochirp_as_per_eV_sigma;
  std::optional<double> peak_vector_potential_au, peak_vector_potential_au_sigma;
  std::optional<double> satellite_intensity_ratio, satellite_intensity_ratio_sigma;
  std::optional<double> trace_error;
  /// The first analysed non-reference photoelectron line (result lines): its relative delay
  /// (raw, as) and strength, with sigmas; delay_line names it ("2s vs 2p"; "" when none).
  std::optional<double> line_delay_as, line_delay_as_sigma, line_strength, line_strength_sigma;
  std::string delay_line;
  std::optional<double> seconds;  ///< wall time of the scan's analysis
  std::optional<bool> converged;  ///< fit.converged when the analysis has a fit
  std::optional<bool> trusted;    ///< quality.trusted when the result has a quality section
  std::string failed_checks;      ///< quality.failed joined with ';' ("" when none)
  std::string acquired;           ///< acquisition time from the sidecar ("acquired", ISO 8601)
  std::string input;              ///< sidecar path as given
  std::string input_hash;         ///< FNV-1a 64 of sidecar + data (provenance)
  /// Path of the scan's report.html relative to the folder holding the summary ("" if none).
  std::string report;
  bool reused = false;  ///< --resume kept an existing result
};

/// A headline number of the summary: its column name, a label with unit for figures and text,
/// and where value and 1-sigma live in a row (sigma nullptr when the quantity has none).
struct HeadlineQuantity {
  const char* column;
  const char* label;
  std::optional<double> SummaryRow::*value;
  std::optional<double> SummaryRow::*sigma;
};
/// fwhm_as, gdd_as2, attochirp_as_per_eV, peak_vector_potential_au, satellite_intensity_ratio,
/// trace_error, line_delay_as, line_strength, in the column order of summary.csv.
const std::vector<HeadlineQuantity>& headline_quantities();

/// The summary row of a successful analysis (status ok). Reads batch.seconds / fit.seconds,
/// batch.acquired and provenance.input_hash_fnv1a64 from result.extra.
SummaryRow row_from_result(const std::string& scan, const AnalysisResult& r);

/// Column names of summary.csv, in order.
const std::vector<std::string>& summary_columns();

/// Text of summary.csv / summary.json. `info` adds top-level keys to summary.json (strings).
std::string summary_csv(const std::vector<SummaryRow>& rows);
std::string summary_json(const std::vector<SummaryRow>& rows,
                         const std::vector<std::pair<std::string, std::string>>& info);

/// Parses summary.json text (`where` names the file). Throws sw::Error(kInput) on bad content.
std::vector<SummaryRow> rows_from_summary_json(const std::string& text, const std::string& where);

/// Seconds since 1970-01-01T00:00:00Z of an ISO 8601 date-time ("2024-03-05T14:22:10Z",
/// "2024-03-05 14:22", "...+01:00", fractional seconds allowed; no zone = UTC), or nullopt.
std::optional<double> parse_iso8601_utc(const std::string& text);

/// An extra table of index.html (e.g. the comparison of summarize --against).
struct SummaryTable {
  std::string heading;
  std::string caption;
  std::vector<std::string> header;
  std::vector<std::vector<std::string>> rows;
};

/// Writes summary.csv, summary.json, the trend figures and index.html into `dir` (atomically,
/// file by file). `title` heads index.html; `notes` are paragraphs placed under the counts;
/// `tables` follow the failures.
void write_summary_outputs(const std::string& dir, const std::vector<SummaryRow>& rows,
                           const std::vector<std::pair<std::string, std::string>>& info,
                           const std::string& title, const std::vector<std::string>& notes,
                           const std::vector<SummaryTable>& tables = {},
                           plot::FigureFormat figure_format = plot::FigureFormat::kPng);

/// The rows of a batch output folder: DIR/summary.json if present; else the summary.json files
/// of its immediate sub-folders (shard-1, shard-2, ...); else one ok row per result.json found
/// below DIR (name = its folder relative to DIR). Report paths are made relative to DIR.
/// `source` (optional) says which of the three was used. Throws sw::Error(kInput) if DIR is not
/// a folder or holds none of them.
std::vector<SummaryRow> load_batch_rows(const std::string& dir, std::string* source = nullptr);

}  // namespace sw::cli
