// `streakwright summarize DIR... [--against OLD_DIR] [--out DIR]`: merge batch (shard) outputs
// into one summary and compare two runs.
#include <cstdio>
#include <filesystem>
#include <map>
#include <memory>

#include "cli/batch_summary.h"
#include "cli/commands.h"
#include "cli/option_checks.h"
#include "cli/summary_compare.h"
#include "io/atomic_file.h"
#include "retrieval/core/error.h"

namespace sw::cli {

namespace {

namespace fs = std::filesystem;

struct SummarizeArgs {
  std::vector<std::string> dirs;
  std::string against, out;
  bool quiet = false;
  plot::FigureFormat figure_format = plot::FigureFormat::kPng;
};

/// Rows of several batch folders merged by scan name; report paths re-based on `base` (the
/// folder the merged summary will live in; "" = keep them relative to each input folder).
std::vector<SummaryRow> merge(const std::vector<std::string>& dirs, const std::string& base,
                              std::vector<std::string>* notes) {
  std::map<std::string, SummaryRow> merged;
  std::map<std::string, std::string> from;
  for (const std::string& d : dirs) {
    std::string source;
    std::vector<SummaryRow> rows = load_batch_rows(d, &source);
    notes->push_back("from " + source + ": " + std::to_string(rows.size()) + " scan(s)");
    for (SummaryRow& r : rows) {
      if (!r.report.empty() && !base.empty()) {
        const fs::path abs_report = fs::absolute(fs::path(d) / r.report).lexically_normal();
        r.report =
            abs_report.lexically_relative(fs::absolute(base).lexically_normal()).generic_string();
      } else if (!r.report.empty()) {
        r.report = (fs::path(d) / r.report).generic_string();
      }
      const auto it = merged.find(r.scan);
      if (it == merged.end()) {
        from[r.scan] = d;
        merged.emplace(r.scan, std::move(r));
        continue;
      }
      // The same scan in two inputs: an ok row wins over a failed one; else the first stays.
      const bool replace = it->second.status != "ok" && r.status == "ok";
      notes->push_back("scan " + r.scan + " appears in " + from[r.scan] + " and " + d +
                       "; kept the " + (replace ? "ok row of " + d : "row of " + from[r.scan]));
      if (replace) {
        from[r.scan] = d;
        it->second = std::move(r);
      }
    }
  }
  std::vector<SummaryRow> rows;
  for (auto& [k, r] : merged) rows.push_back(std::move(r));
  return rows;
}

int run_summarize(const SummarizeArgs& a) {
  std::vector<std::string> notes;
  const std::vector<SummaryRow> rows = merge(a.dirs, a.out, &notes);
  std::size_t ok = 0;
  for (const auto& r : rows) ok += r.status == "ok" ? 1 : 0;
  if (!a.quiet)
    for (const auto& n : notes) std::fprintf(stderr, "summarize: %s\n", n.c_str());
  std::printf("summarize: %zu scan(s) from %zu folder(s): %zu ok, %zu failed\n", rows.size(),
              a.dirs.size(), ok, rows.size() - ok);
  std::vector<SummaryTable> tables;
  std::optional<SummaryComparison> cmp;
  if (!a.against.empty()) {
    std::vector<std::string> old_notes;
    const std::vector<SummaryRow> old_rows = merge({a.against}, "", &old_notes);
    cmp = compare_summaries(rows, old_rows);
    std::printf("against %s:\n%s", a.against.c_str(), comparison_text(*cmp).c_str());
    tables.push_back(comparison_table(*cmp, a.against));
  }
  if (!a.out.empty()) {
    std::vector<std::pair<std::string, std::string>> info = {{"out", a.out}};
    std::string inputs;
    for (const auto& d : a.dirs) inputs += (inputs.empty() ? "" : " ") + d;
    info.push_back({"merged_from", inputs});
    if (!a.against.empty()) info.push_back({"against", a.against});
    std::vector<std::string> page_notes = {"Merged from: " + inputs + "."};
    for (const auto& n : notes) page_notes.push_back(n);
    write_summary_outputs(a.out, rows, info,
                          "streakwright summary: " + fs::path(a.out).filename().string(),
                          page_notes, tables, a.figure_format);
    if (cmp) write_file_atomic((fs::path(a.out) / "comparison.csv").string(), comparison_csv(*cmp));
    std::printf("summary: %s; index: %s\n", (fs::path(a.out) / "summary.csv").string().c_str(),
                (fs::path(a.out) / "index.html").string().c_str());
  }
  return 0;
}

}  // namespace

void add_summarize_command(CLI::App& app) {
  const auto [cmd, a] = add_command<SummarizeArgs>(
      app, "summarize", run_summarize,
      "Merge batch outputs (e.g. shards) into one summary; compare two runs",
      R"(Each DIR is a batch output folder: its summary.json is used, else the summary.json files of
its sub-folders (shard-1, shard-2, ...), else its result.json files. Scans are merged by
name. With --out, writes summary.csv, summary.json, trend figures and index.html there
(links point into the input folders). With --against OLD_DIR, lists the scans whose
headline numbers (FWHM, GDD, attochirp, A0, satellite ratio) moved by more than their
combined uncertainty sqrt(s_old^2 + s_new^2), class and status changes, and scans present
in only one run (also written to comparison.csv). Exit 0, 2 bad usage, 3 unreadable input.)");
  cmd->add_option("dirs", a->dirs, "batch output folders to merge")->required();
  cmd->add_option("--against", a->against, "an older batch output folder to compare with");
  cmd->add_option("--out,-o", a->out, "folder for the merged summary (created)");
  add_figure_format_option(cmd, &a->figure_format);
  cmd->add_flag("--quiet,-q", a->quiet, "no notes on stderr");
}

}  // namespace sw::cli
