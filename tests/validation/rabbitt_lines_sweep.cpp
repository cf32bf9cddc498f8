// RABBITT with two photoelectron lines: relative delays inserted in the direct-quadrature
// generator (synthetic/, LineSpec::delay_as) against those sw::analyze_rabbitt retrieves.
// Cases: argon 3s beside 3p, and a two-gas jet (argon 3p with xenon 5p); inserted delays
// -30, 0, +50 as; second-line strengths 0.3 and 1; two count levels (Poisson draws of one
// noise-free scan). Writes the markdown table to OUT_DIR/validation_rabbitt_lines_table.md and
// stdout. Usage: rabbitt_lines_sweep OUT_DIR [--quick]
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "retrieval/analysis/rabbitt.h"
#include "retrieval/core/units.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "tests/program_support.h"

using namespace sw;

namespace {

// The argon-rabbitt preset with a second line.
synthetic::ScanConfig two_line_config(const std::string& second_gas, const std::string& second,
                                      double strength, double delay_as) {
  synthetic::ScanConfig c = synthetic::find_preset("argon-rabbitt").config;
  synthetic::LineSpec a, b;
  a.name = "3p";
  b.gas = second_gas;
  b.name = second;
  b.relative_strength = strength;
  b.delay_as = delay_as;
  c.lines = {a, b};
  c.geometry.energy_eV = {1.5, 0.05, 721};  // 1.5 .. 37.5 eV (Xe 5p reaches 36 eV)
  c.geometry.delay_fs = {-2.6, 0.1, 53};    // two IR periods
  c.numerics.threads = 2;
  return c;
}

}  // namespace

int main(int argc, char** argv) {
  if (!test::has_arguments(argc, argv, 1, "OUT_DIR [--quick]")) return 2;
  const bool quick = argc > 2 && std::string(argv[2]) == "--quick";
  const std::vector<double> delays =
      quick ? std::vector<double>{50.0} : std::vector<double>{-30.0, 0.0, 50.0};
  const std::vector<double> strengths =
      quick ? std::vector<double>{1.0} : std::vector<double>{0.3, 1.0};
  const std::vector<double> counts = {300.0, 3000.0};
  const int seeds = quick ? 2 : 4;
  struct Case {
    std::string label, gas, line;
  };
  const std::vector<Case> cases = {{"Ar 3s beside Ar 3p", "", "3s"},
                                   {"Xe 5p beside Ar 3p (two gases)", "Xe", "5p"}};
  std::ostringstream md;
  md << "| lines | strength | peak counts | inserted (as) | retrieved (as) | sigma (as) | "
        "pull | sidebands | chi2/dof | seeds within 3 sigma |\n"
        "|---|---|---|---|---|---|---|---|---|---|\n";
  for (const Case& cs : cases)
    for (double st : strengths)
      for (double d : delays) {
        const auto t0 = std::chrono::steady_clock::now();
        const synthetic::SyntheticScan scan =
            synthetic::generate_scan(two_line_config(cs.gas, cs.line, st, d), 1);
        const double gen_s =
            std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
        for (double pk : counts) {
          double sum = 0, sum_sigma = 0, sum_chi2 = 0;
          int within = 0, ok = 0, nsb = 0;
          for (int s = 0; s < seeds; ++s) {
            RabbittOptions o;
            o.atomic.mode = AtomicDelayMode::kNone;  // the SFA has no atomic delays
            Trace t = synthetic::redraw_counts(scan, pk, 100 + static_cast<unsigned long long>(s));
            // A two-gas jet is declared in the sidecar (the table knows only the scan's gas).
            if (!cs.gas.empty()) {
              DeclaredLine a, b;
              a.name = "3p";
              b.name = cs.line;
              b.gas = cs.gas;
              t.meta.lines = {a, b};
            }
            const RabbittAnalysis r = analyze_rabbitt(t, o);
            if (r.lines.size() < 2) continue;
            const RabbittLine* L = nullptr;
            for (const RabbittLine& x : r.lines)
              if (!x.candidate.reference && x.present && x.delay) L = &x;
            if (!L) continue;
            ++ok;
            sum += L->delay->mean;
            sum_sigma += L->delay->sigma;
            sum_chi2 += L->delay->reduced_chi2;
            nsb = L->delay->count;
            if (std::abs(L->delay->mean - d) <= 3.0 * L->delay->sigma) ++within;
          }
          char row[512];
          if (ok == 0) {
            std::snprintf(row, sizeof row,
                          "| %s | %.1f | %.0f | %+.0f | no delay | | | | | 0/%d |\n",
                          cs.label.c_str(), st, pk, d, seeds);
          } else {
            const double m = sum / ok, sg = sum_sigma / ok;
            std::snprintf(
                row, sizeof row,
                "| %s | %.1f | %.0f | %+.0f | %+.1f | %.1f | %+.2f | %d | %.2f | %d/%d |\n",
                cs.label.c_str(), st, pk, d, m, sg, (m - d) / (sg / std::sqrt(ok)), nsb,
                sum_chi2 / ok, within, seeds);
          }
          md << row;
          std::printf("%s", row);
          std::fflush(stdout);
        }
        std::fprintf(stderr, "(generation %.1f s)\n", gen_s);
      }
  const std::filesystem::path out =
      std::filesystem::path(argv[1]) / "validation_rabbitt_lines_table.md";
  std::ofstream(out) << md.str();
  return 0;
}
