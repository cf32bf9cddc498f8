// `streakwright simulate`: synthetic scans with known truth (presets or a config file).
#include <cstdio>
#include <filesystem>
#include <memory>

#include "cli/commands.h"
#include "cli/option_checks.h"
#include "cli/simulate_config.h"
#include "io/figures.h"
#include "io/trace_writer.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"

namespace sw::cli {

namespace {

struct SimulateArgs {
  std::string preset, config, out, name, format;
  unsigned long long seed = 1;
  bool list = false;
  bool quiet = false;
  plot::FigureFormat figure_format = plot::FigureFormat::kPng;
};

int run_simulate(const SimulateArgs& a) {
  if (a.list) {
    for (const auto& p : synthetic::presets())
      std::printf("%-22s %s\n", p.name.c_str(), p.description.c_str());
    return 0;
  }
  if (a.preset.empty() == a.config.empty())
    throw usage_error(
        "simulate: give exactly one of --preset NAME or --config FILE (see simulate --list)");
  if (a.out.empty()) throw usage_error("simulate: --out DIR is required");
  synthetic::ScanConfig cfg =
      a.preset.empty() ? load_scan_config(a.config) : synthetic::find_preset(a.preset).config;
  if (const std::string e = cfg.validate(); !e.empty())
    throw input_error((a.config.empty() ? "preset " + a.preset : a.config) + ": " + e);
  std::string name = a.name;
  if (name.empty())
    name = !cfg.name.empty() ? cfg.name : std::filesystem::path(a.config).stem().string();
  TraceFormat fmt = cfg.output_format;
  if (!a.format.empty() && !parse_trace_format(a.format, &fmt))
    throw usage_error("--format " + a.format + ": expected png16, tiff or csv");
  std::error_code ec;
  std::filesystem::create_directories(a.out, ec);
  if (ec) throw input_error("cannot create output folder '" + a.out + "': " + ec.message());

  if (!a.quiet) std::fprintf(stderr, "simulate: %s (seed %llu) ...\n", name.c_str(), a.seed);
  const synthetic::SyntheticScan scan = synthetic::generate_scan(cfg, a.seed);
  const std::string sidecar = (std::filesystem::path(a.out) / (name + ".json")).string();
  TraceWriteOptions wo;
  wo.truth = &scan.truth;
  if (scan.tof)
    wo.tof = TraceTofAxis{scan.tof->tof_ns, scan.tof->length_m, scan.tof->t0_ns,
                          scan.tof->energy_offset_eV};
  Trace t = scan.trace;
  t.meta.source.clear();
  const TraceFiles files = write_trace(t, sidecar, fmt, wo);

  // Figure of the scan as a physicist would look at it first.
  std::vector<double> dfs(t.num_delays()), eev(t.num_energies());
  for (std::size_t i = 0; i < dfs.size(); ++i) dfs[i] = units::au_to_fs(t.delay_au[i]);
  for (std::size_t j = 0; j < eev.size(); ++j) eev[j] = units::au_to_eV(t.energy_au[j]);
  const std::string png =
      (std::filesystem::path(a.out) / (name + ".figure" + plot::figure_extension(a.figure_format)))
          .string();
  if (t.num_delays() >= 2) {
    TraceFigureOptions fo;
    fo.title = name + " (synthetic, seed " + std::to_string(a.seed) + ")";
    plot_trace_image(t.counts, dfs, eev, fo, png);
  } else {
    LinePlot lp;
    lp.title = name + " (synthetic, seed " + std::to_string(a.seed) + ")";
    lp.x_label = "photoelectron energy (eV)";
    lp.y_label = "counts per bin";
    Series s;
    s.x = eev;
    for (std::size_t j = 0; j < eev.size(); ++j)
      s.y.push_back(t.counts(0, static_cast<Eigen::Index>(j)));
    s.label = "spectrum";
    lp.series.push_back(s);
    plot_lines(lp, png);
  }
  std::printf("wrote %s (%zu delays x %zu energies, %.2f s), %s, %s, %s\n", files.sidecar.c_str(),
              t.num_delays(), t.num_energies(), scan.seconds, files.image.c_str(),
              files.truth.c_str(), png.c_str());
  return 0;
}

}  // namespace

void add_simulate_command(CLI::App& app) {
  const auto [cmd, a] = add_command<SimulateArgs>(
      app, "simulate", run_simulate,
      "Generate a synthetic scan with known truth (preset or config file)",
      R"(The generator evaluates the SFA streaking amplitude by direct quadrature with the full
momentum dependence (independently of the engines' FFT model) and applies the configured
noise: energy resolution, background, Poisson counting, readout noise, saturation, delay
jitter and drift, IR intensity and CEP fluctuations. Writes DIR/NAME.json (sidecar), the
data image, DIR/NAME.truth.json (result.json keys + every generator parameter) and
DIR/NAME.figure.png (.svg with --figure-format svg). Every random draw derives from --seed.)");
  cmd->add_flag("--list", a->list, "list the presets (name, then a one-line description) and exit");
  cmd->add_option("--preset", a->preset, "preset name (see --list)");
  cmd->add_option("--config", a->config,
                  "scan configuration file (YAML or JSON; keys of docs/file_formats.md)");
  cmd->add_option("--out,-o", a->out, "output folder (created)");
  cmd->add_option("--seed", a->seed, "seed of every random draw")->capture_default_str();
  cmd->add_option("--name", a->name,
                  "base name of the written files (default: the preset or config name)");
  cmd->add_option("--format", a->format, "data format: png16 | tiff | csv (default: the config's)");
  add_figure_format_option(cmd, &a->figure_format);
  cmd->add_flag("--quiet,-q", a->quiet, "no progress on stderr");
}

}  // namespace sw::cli
