// `streakwright batch INPUT... --out DIR`: analyse a whole archive, resumable, shardable.
#include <algorithm>
#include <cstdio>
#include <filesystem>
#include <map>
#include <memory>

#include <nlohmann/json.hpp>

#include "cli/batch_inputs.h"
#include "cli/batch_runner.h"
#include "cli/batch_summary.h"
#include "cli/commands.h"
#include "cli/option_checks.h"
#include "cli/option_registry.h"
#include "cli/output_folder.h"
#include "cli/structured_file.h"
#include "io/input_guard.h"
#include "retrieval/core/error.h"
#include "retrieval/core/trace.h"
#include "retrieval/engines/engine.h"
#include "retrieval/physics/dipole.h"
#include "retrieval/preprocess/lines.h"

namespace sw::cli {

namespace {

struct BatchArgs {
  std::vector<std::string> inputs;
  std::string out, shard = "1/1", analysis = "auto", config;
  std::string energy_window;  ///< --energy-window LO:HI (eV), "" = none
  BatchOptions options;
  bool dry_run = false;
  bool allow_outside_data = false;
  // Options whose command-line presence decides whether the config file may set them.
  std::map<std::string, CLI::Option*> cli;
};

// Config keys of the batch itself; the analyses' keys come from RabbittAnalysisOptions::describe
// and RetrieveOptions::describe.
const std::vector<std::string> kBatchKeys = {"analysis", "jobs", "resume", "energy_window",
                                             "figure_format"};

std::string config_keys_text() {
  std::string list;
  for (const auto& n : kBatchKeys) list += (list.empty() ? "" : ", ") + n;
  for (const auto& n : described_config_keys<RabbittAnalysisOptions>()) list += ", " + n;
  for (const auto& n : described_config_keys<RetrieveOptions>()) list += ", " + n;
  return list;
}

/// Config file: the batch options as keys (command-line values win), plus gas,
/// ir_wavelength_nm and kind as overrides for every scan.
void apply_config(BatchArgs& a) {
  const nlohmann::json j = read_structured_file(a.config, "batch config");
  if (!j.is_object())
    throw usage_error("batch config '" + a.config +
                      "': expected a mapping of option names to values");
  auto given = [&](const std::string& k) {
    const auto it = a.cli.find(k);
    return it != a.cli.end() && it->second->count() > 0;
  };
  auto where = [&](const std::string& k) { return "batch config '" + a.config + "', " + k; };
  auto get_string = [&](const std::string& k, const nlohmann::json& v) {
    if (!v.is_string()) throw usage_error(where(k) + ": expected a string");
    return v.get<std::string>();
  };
  auto get_number = [&](const std::string& k, const nlohmann::json& v) {
    if (!v.is_number()) throw usage_error(where(k) + ": expected a number");
    return v.get<double>();
  };
  auto get_int = [&](const std::string& k, const nlohmann::json& v) {
    if (!v.is_number_integer()) throw usage_error(where(k) + ": expected an integer");
    return v.get<long long>();
  };
  RetrieveOptions& r = a.options.retrieve;
  RetrieveOptions probe;  // type checks of keys the command line overrides
  RabbittAnalysisOptions rabbitt_probe;
  for (auto it = j.begin(); it != j.end(); ++it) {
    const std::string& k = it.key();
    const nlohmann::json& v = it.value();
    if (k == "gas") {
      a.options.overrides.gas = get_string(k, v);
      continue;
    }
    if (k == "ir_wavelength_nm") {
      const double w = get_number(k, v);
      if (const std::string p = ir_wavelength_nm_problem(w); !p.empty())
        throw usage_error(where(k) + " = " + v.dump() + "; " + p);
      a.options.overrides.ir_wavelength_nm = w;
      continue;
    }
    if (k == "kind") {
      TraceKind tk;
      const std::string s = get_string(k, v);
      if (!parse_trace_kind(s, &tk))
        throw usage_error(where(k) + " = '" + s + "'; expected streaking, rabbitt or xuv_only");
      a.options.overrides.kind = s;
      continue;
    }
    const bool batch_key = std::find(kBatchKeys.begin(), kBatchKeys.end(), k) != kBatchKeys.end();
    const bool rabbitt_key = !batch_key && set_described_from_config(rabbitt_probe, k, v, where(k));
    if (!batch_key && !rabbitt_key && !set_described_from_config(probe, k, v, where(k)))
      throw usage_error(where(k) + ": unknown key; expected one of gas, ir_wavelength_nm, kind, " +
                        config_keys_text());
    if (given(k)) continue;  // the command line wins
    if (rabbitt_key)
      set_described_from_config(a.options.rabbitt, k, v, where(k));
    else if (!batch_key)
      set_described_from_config(r, k, v, where(k));
    else if (k == "analysis")
      a.analysis = get_string(k, v);
    else if (k == "jobs")
      a.options.jobs = static_cast<int>(get_int(k, v));
    else if (k == "energy_window")
      a.energy_window = get_string(k, v);
    else if (k == "figure_format") {
      const std::string f = get_string(k, v);
      if (!plot::parse_figure_format(f, &a.options.figure_format))
        throw usage_error(where(k) + " = '" + f + "'; expected png or svg");
    } else if (k == "resume") {
      if (!v.is_boolean()) throw usage_error(where(k) + ": expected true or false");
      a.options.resume = v.get<bool>();
    }
  }
}

int run_batch_command(BatchArgs& a) {
  if (!a.config.empty()) apply_config(a);
  BatchOptions& o = a.options;
  o.out_dir = a.out;
  if (!parse_shard(a.shard, &o.shard_k, &o.shard_n))
    throw usage_error("--shard " + a.shard + ": expected K/N with 1 <= K <= N (e.g. 2/8)");
  if (!parse_analysis_kind(a.analysis, &o.analysis))
    throw usage_error("--analysis " + a.analysis +
                      ": expected auto, retrieve, rabbitt or classify");
  if (!a.energy_window.empty())
    parse_energy_window(a.energy_window, "--energy-window",
                        &o.retrieve.preprocess.energy_window_lo_eV,
                        &o.retrieve.preprocess.energy_window_hi_eV);
  if (o.retrieve.engine != "auto") (void)make_engine(o.retrieve.engine);  // lists the names
  if (const std::string e = o.validate(); !e.empty()) throw usage_error(e);

  std::vector<std::string> skipped;
  const std::vector<BatchScan> all = collect_scans(a.inputs, a.out, &skipped);
  if (all.empty()) {
    std::string list;
    for (const auto& i : a.inputs) list += (list.empty() ? "'" : ", '") + i + "'";
    throw usage_error("no trace sidecars found in " + list +
                      " (a sidecar is NAME.json / NAME.yaml with the key \"streakwright\")");
  }
  std::vector<BatchScan> mine;
  for (const auto& s : all)
    if (in_shard(s.name, o.shard_k, o.shard_n)) mine.push_back(s);
  if (a.dry_run) {
    for (const auto& s : mine)
      std::printf("%s\t%s\n", printable_path(s.name).c_str(), printable_path(s.sidecar).c_str());
    return 0;
  }
  // Inputs are never touched: refuse an output folder that is or contains an input root, a
  // sidecar's folder or a data file's folder (exit 2, before any work). Then lock it.
  std::vector<std::string> roots, files;
  for (const auto& i : a.inputs) {
    std::error_code ec;
    const std::filesystem::path p(i);
    roots.push_back(std::filesystem::is_directory(p, ec)
                        ? i
                        : (p.parent_path().empty() ? std::string(".") : p.parent_path().string()));
  }
  for (const auto& s : all) {
    files.push_back(s.sidecar);
    files.push_back(sidecar_data_file(s.sidecar));
  }
  check_output_folder(a.out, files, roots);
  o.read_policy.allowed_roots = roots;
  o.read_policy.allow_outside_data = a.allow_outside_data;
  {
    std::error_code ec;
    std::filesystem::create_directories(a.out, ec);
    if (ec)
      throw usage_error("--out '" + printable_path(a.out) + "': cannot create the folder (" +
                        ec.message() + ")");
  }
  const BatchLock lock(a.out);
  if (!o.quiet) {
    std::fprintf(stderr, "streakwright batch: %zu scan(s)", mine.size());
    if (o.shard_n > 1)
      std::fprintf(stderr, " in shard %d/%d of %zu", o.shard_k, o.shard_n, all.size());
    std::fprintf(stderr, ", %d job(s), output %s%s\n", o.jobs, a.out.c_str(),
                 o.resume ? ", resuming" : "");
    if (!skipped.empty())
      std::fprintf(stderr,
                   "streakwright batch: %zu structured file(s) skipped (not trace sidecars), "
                   "e.g. %s\n",
                   skipped.size(), skipped.front().c_str());
  }
  if (o.jobs > 1 && o.retrieve.threads > 1 && !o.quiet)
    std::fprintf(stderr,
                 "streakwright batch: --threads %d ignored: engines run single-threaded when "
                 "--jobs > 1\n",
                 o.retrieve.threads);

  const BatchReport rep = run_batch(mine, o);

  std::vector<std::pair<std::string, std::string>> info = {
      {"out", a.out},
      {"shard", std::to_string(o.shard_k) + "/" + std::to_string(o.shard_n)},
      {"options", batch_options_string(o)}};
  std::string inputs;
  for (const auto& i : a.inputs) inputs += (inputs.empty() ? "" : " ") + i;
  info.push_back({"inputs", inputs});
  if (rep.interrupted) info.push_back({"interrupted", "true"});
  std::vector<std::string> notes = {"Inputs: " + inputs + ". Options: " + batch_options_string(o) +
                                    "."};
  if (o.shard_n > 1)
    notes.push_back("Shard " + std::to_string(o.shard_k) + " of " + std::to_string(o.shard_n) +
                    " (" + std::to_string(mine.size()) + " of " + std::to_string(all.size()) +
                    " scans).");
  if (rep.interrupted)
    notes.push_back("The batch was interrupted; scans marked 'not run' did not start.");
  const std::filesystem::path out(a.out);
  write_summary_outputs(a.out, rep.rows, info, "streakwright batch: " + out.filename().string(),
                        notes, {}, o.figure_format);

  for (const auto& r : rep.rows)
    if (r.status != "ok")
      std::fprintf(stderr, "failed: %s: %s\n", r.scan.c_str(), r.message.c_str());
  std::printf("batch: %zu scan(s): %zu ok, %zu failed", rep.rows.size(), rep.ok, rep.failed);
  if (rep.reused) std::printf(" (%zu reused by --resume)", rep.reused);
  if (rep.not_run) std::printf(", %zu not run", rep.not_run);
  std::printf(", %.1f s\n", rep.seconds);
  std::printf("summary: %s, %s; index: %s\n", (out / "summary.csv").string().c_str(),
              (out / "summary.json").string().c_str(), (out / "index.html").string().c_str());
  if (rep.interrupted) {
    std::printf(
        "interrupted: finished scans are complete; run again with --resume to do the rest\n");
    return 130;
  }
  return rep.failed > 0 ? 5 : 0;
}

}  // namespace

void add_batch_command(CLI::App& app) {
  const auto [cmd, a] = add_command<BatchArgs>(
      app, "batch", run_batch_command,
      "Analyse many scans: folders, sidecars or manifests; resumable, parallel, shardable",
      R"(INPUT: a folder (searched recursively for trace sidecars), a sidecar, or a manifest
(.csv, or .json/.yaml with a "scans" list; per-scan columns scan, name, gas,
ir_wavelength_nm, engine, kind, analysis). Each scan is written to DIR/<its path relative
to its input folder, without extension>/ (result.json, CSVs, figures, report.html), via a
temporary folder renamed into place. Then DIR/summary.csv, summary.json, trend_*.png
(.svg with --figure-format svg) and index.html. A failed scan never stops the batch.
--config FILE (JSON or YAML): the options below as keys ()" +
          config_keys_text() + R"(; energy_window as "LO:HI"),
plus gas, ir_wavelength_nm and kind applied to every scan (manifest rows win);
command-line options win over the file.
Seeds: each scan's seed derives from --seed and its name, so results do not depend on
--jobs or --shard. Ctrl-C: no new scans start, running ones finish (twice: abandoned).
Exit: 0 all ok, 5 some scan failed, 2 bad usage, 130 interrupted. See docs/batch.md.)");
  cmd->add_option("inputs", a->inputs, "folders, sidecars or manifests")->required();
  cmd->add_option("--out,-o", a->out, "batch output folder (created)")->required();
  a->cli["jobs"] = cmd->add_option("--jobs,-j", a->options.jobs, "scans analysed in parallel")
                       ->capture_default_str();
  a->cli["resume"] =
      cmd->add_flag("--resume", a->options.resume,
                    "skip scans whose result has the same input hash, options and version");
  cmd->add_option("--shard", a->shard, "run only shard K of N (1-based), e.g. 3/8")
      ->capture_default_str();
  a->cli["analysis"] =
      cmd->add_option("--analysis", a->analysis, "auto | retrieve | rabbitt | classify")
          ->capture_default_str();
  cmd->add_option("--config", a->config, "batch options and overrides (JSON or YAML)");
  // The retrieve options of RetrieveOptions::describe (retrieval/analysis/retrieve.h).
  a->cli.merge(add_described_options(cmd, a->options.retrieve));
  a->cli["energy_window"] =
      cmd->add_option("--energy-window", a->energy_window,
                      "analyse only photoelectron energies LO:HI (eV) in every scan");
  // The rabbitt options a batch sets for every scan (RabbittAnalysisOptions::describe).
  a->cli.merge(
      add_described_options(cmd, a->options.rabbitt, DescribedFlags::kConfigKeyed, "rabbitt: "));
  a->cli["figure_format"] = add_figure_format_option(cmd, &a->options.figure_format);
  cmd->add_flag("--dry-run", a->dry_run,
                "list the scans (name and sidecar) of this shard and exit");
  cmd->add_flag("--quiet,-q", a->options.quiet, "no progress on stderr");
  cmd->add_flag("--allow-outside-data", a->allow_outside_data,
                "read data files outside the input folders' trees (refused by default)");
  check_numeric_options(cmd);
}

}  // namespace sw::cli
