// Streaking-retrieval validation sweep: scans from the direct-quadrature generator with known
// truth, retrieved by each engine; writes docs/validation_streaking_table.md (tables) and a figure.
// Usage: streaking_sweep OUT_DIR [--quick]
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <functional>
#include <sstream>
#include <string>
#include <vector>

#include "io/figures.h"
#include "retrieval/analysis/retrieve.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"

using namespace sw;

namespace {

struct Row {
  std::string group, label, engine;
  double truth_fwhm, fwhm, truth_a0, a0, truth_gdd, gdd, G, floor, seconds;
  double truth_ec = 0, ec = 0, truth_sat = 0, sat = 0;
};

synthetic::ScanConfig base() {
  synthetic::ScanConfig c = synthetic::find_preset("neon-150as").config;
  c.geometry.delay_fs = {-6.0, 0.15, 81};
  return c;
}

}  // namespace

int main(int argc, char** argv) {
  const std::string out = argc > 1 ? argv[1] : "docs";
  const bool quick = argc > 2 && std::string(argv[2]) == "--quick";
  std::filesystem::create_directories(out + "/figures");
  std::vector<Row> rows;
  std::vector<std::string> engines = {"ptychographic", "projections"};
  auto run = [&](const std::string& group, const std::string& label,
                 const synthetic::ScanConfig& cfg, const std::vector<std::string>& engs) {
    const auto scan = synthetic::generate_scan(cfg, 5);
    for (const auto& e : engs) {
      RetrieveOptions o;
      o.engine = e;
      o.bootstrap = 0;
      o.threads = 1;
      const RetrieveOutput r = retrieve(scan.trace, o);
      Row row{group,
              label,
              r.result.engine,
              *scan.truth.xuv->fwhm_as,
              *r.result.xuv->fwhm_as,
              *scan.truth.ir->peak_vector_potential_au,
              r.result.ir->peak_vector_potential_au.value_or(0),
              scan.truth.xuv->gdd_as2.value_or(0),
              r.result.xuv->gdd_as2.value_or(0),
              r.reconstruction.trace_error,
              r.reconstruction.noise_floor_trace_error,
              r.result.fit->seconds.value_or(0)};
      row.truth_ec = scan.truth.xuv->center_photon_energy_eV.value_or(0);
      row.ec = r.result.xuv->center_photon_energy_eV.value_or(0);
      row.truth_sat = scan.truth.verdict->satellite_intensity_ratio.value_or(0);
      row.sat = r.result.verdict->satellite_intensity_ratio.value_or(0);
      std::fprintf(stderr,
                   "%-10s %-22s %-14s FWHM %7.1f / %7.1f  A0 %.4f / %.4f  GDD %7.0f / %7.0f\n",
                   group.c_str(), label.c_str(), row.engine.c_str(), row.fwhm, row.truth_fwhm,
                   row.a0, row.truth_a0, row.gdd, row.truth_gdd);
      rows.push_back(row);
    }
  };
  for (double d : quick ? std::vector<double>{80, 150, 300}
                        : std::vector<double>{60, 80, 120, 150, 200, 300, 400}) {
    auto c = base();
    c.xuv.gaussian.transform_limited_fwhm_as = d;
    if (d < 100) c.geometry.energy_eV = {30.0, 0.3, 300};
    run("duration", std::to_string(int(d)) + " as TL", c,
        d < 100 ? std::vector<std::string>{"ptychographic", "auto"} : engines);
  }
  for (double g : {-8000.0, -3000.0, 3000.0, 8000.0}) {
    auto c = base();
    c.xuv.gaussian.gdd_as2 = g;
    run("gdd", std::to_string(int(g)) + " as^2", c, engines);
  }
  for (double I : {1e12, 3e12, 1e13}) {
    auto c = base();
    c.ir.pulse.peak_intensity_Wcm2 = I;
    char b[32];
    std::snprintf(b, sizeof b, "%.0e W/cm^2", I);
    run("intensity", b, c, engines);
  }
  for (double n : {20.0, 50.0, 100.0, 300.0, 1000.0}) {
    auto c = base();
    c.noise.peak_counts = n;
    run("counts", std::to_string(int(n)) + " peak counts", c, engines);
  }
  {
    auto c = base();
    c.noise.background_counts = 5.0;
    run("background", "5 counts/bin flat", c, engines);
    c = base();
    c.noise.delay_jitter_rms_fs = 0.03;
    run("jitter", "0.03 fs rms delay jitter", c, engines);
    c = base();
    c.noise.resolution = synthetic::ResolutionKind::kConstant;
    c.noise.resolution_fwhm_eV = 0.5;
    run("resolution", "0.5 eV FWHM", c, engines);
  }
  {
    auto c = synthetic::find_preset("helium-70as").config;
    c.geometry.delay_fs = {-6.0, 0.15, 81};
    run("broadband", "70 as at 130 eV (He)", c, {"ptychographic", "projections", "auto"});
  }
  {
    auto c = synthetic::find_preset("neon-satellites").config;
    c.geometry.delay_fs = {-6.0, 0.15, 81};
    run("satellites", "15 % / 8 % at -/+T/2", c, {"ptychographic", "auto"});
  }

  std::ostringstream md;
  md << "| group | case | engine | FWHM truth (as) | FWHM (as) | error | A0 truth (a.u.) | A0 "
        "(a.u.) | error | "
        "GDD truth (as^2) | GDD (as^2) | centre truth (eV) | centre (eV) | satellites truth | "
        "satellites | G / G_noise | time (s) "
        "|\n|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|---|\n";
  char buf[512];
  for (const Row& r : rows) {
    std::snprintf(buf, sizeof buf,
                  "| %s | %s | %s | %.1f | %.1f | %+.1f %% | %.4f | %.4f | %+.1f %% | %.0f | %.0f "
                  "| %.2f | %.2f | %.3f | %.3f | %.2f | %.1f |\n",
                  r.group.c_str(), r.label.c_str(), r.engine.c_str(), r.truth_fwhm, r.fwhm,
                  100 * (r.fwhm - r.truth_fwhm) / r.truth_fwhm, r.truth_a0, r.a0,
                  100 * (r.a0 - r.truth_a0) / r.truth_a0, r.truth_gdd, r.gdd, r.truth_ec, r.ec,
                  r.truth_sat, r.sat, r.G / r.floor, r.seconds);
    md << buf;
  }
  std::ofstream(out + "/validation_streaking_table.md") << md.str();

  // Figure: FWHM error vs peak counts per engine.
  LinePlot lp;
  lp.title = "FWHM error vs peak counts (150 as TL, neon, 81 delays)";
  lp.x_label = "peak counts per bin";
  lp.y_label = "FWHM error (%)";
  lp.zero_line = true;
  for (const auto& e : engines) {
    Series s;
    s.label = e;
    s.markers = true;
    for (const Row& r : rows)
      if (r.group == "counts" && r.engine == e) {
        s.x.push_back(std::log10(std::stod(r.label)));
        s.y.push_back(100 * (r.fwhm - r.truth_fwhm) / r.truth_fwhm);
      }
    lp.series.push_back(s);
  }
  lp.x_label = "log10(peak counts per bin)";
  plot_lines(lp, out + "/figures/streaking_fwhm_vs_counts.png");
  std::printf("%s", md.str().c_str());
  return 0;
}
