// The streakwright executable: simulate, info, retrieve, exit codes and messages (docs/cli.md).
#include <catch2/catch.hpp>

#include <array>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <random>
#include <string>

#include "io/result_io.h"
#include "tests/test_support.h"

namespace fs = std::filesystem;

namespace {

using Run = sw::test::CliRun;
Run cli(const std::string& args) { return sw::test::run_cli(args); }

fs::path temp_dir() {
  std::random_device rd;
  fs::path d = fs::temp_directory_path() / ("sw-cli-" + std::to_string(rd()));
  fs::create_directories(d);
  return d;
}

}  // namespace

TEST_CASE("version, help and presets", "[cli]") {
  CHECK(cli("--version").out.find("streakwright 0.") != std::string::npos);
  const Run h = cli("retrieve --help");
  CHECK(h.code == 0);
  CHECK(h.out.find("ptychographic") != std::string::npos);
  CHECK(h.out.find("full-model") != std::string::npos);
  const Run l = cli("simulate --list");
  CHECK(l.code == 0);
  for (const char* name :
       {"neon-150as", "helium-70as", "neon-satellites", "argon-rabbitt", "neon-xuv-only"})
    CHECK(l.out.find(name) != std::string::npos);
}

TEST_CASE("exit codes: usage 2, bad input 3", "[cli]") {
  // docs/cli.md exit-code table (the project's own contract).
  const fs::path d = temp_dir();
  std::ofstream(d / "broken.json") << "{ \"streakwright\": 1, \"image\": ";
  // Arguments, exit code and a text the output must hold (what is wrong, or the valid choices).
  const struct {
    std::string args;
    int code;
    const char* says;
  } runs[] = {
      {"retrieve", 2, "scan is required"},  // missing required arguments
      {"simulate --preset no-such-preset --out " + d.string(), 3, "no-such-preset"},
      {"info " + (d / "absent.json").string(), 3, "absent.json"},
      {"info " + (d / "broken.json").string(), 3, "broken.json"},
      {"retrieve " + (d / "broken.json").string() + " --out " + (d / "o").string() +
           " --engine no-such-engine",
       2, "ptychographic"},  // lists the registered engines
  };
  for (const auto& r : runs) {
    INFO(r.args);
    const Run run = cli(r.args);
    CHECK(run.code == r.code);
    CHECK(run.out.find(r.says) != std::string::npos);
  }
  fs::remove_all(d);
}

TEST_CASE("simulate then retrieve reproduces the truth", "[cli]") {
  // Truth from the direct-quadrature generator; tolerance of the streaking-retrieval issue
  // (FWHM and A0 within 5 % at >= 100 peak counts).
  const fs::path d = temp_dir();
  const Run s = cli("simulate --preset neon-150as --seed 3 --quiet --out " + d.string());
  REQUIRE(s.code == 0);
  REQUIRE(fs::exists(d / "neon-150as.json"));
  REQUIRE(fs::exists(d / "neon-150as.truth.json"));
  const Run i = cli("info " + (d / "neon-150as.json").string());
  CHECK(i.code == 0);
  CHECK(i.out.find("121 delays x 300 energies") != std::string::npos);
  const Run r = cli("retrieve " + (d / "neon-150as.json").string() + " --out " +
                    (d / "r").string() + " --engine ptychographic --bootstrap 2 --quiet");
  REQUIRE(r.code == 0);
  CHECK(r.out.find("XUV FWHM") != std::string::npos);
  for (const char* f : {"result.json", "report.html", "xuv_temporal.csv", "xuv_spectral.csv",
                        "ir_field.csv", "trace_comparison.png", "xuv_pulse.png", "convergence.png"})
    CHECK(fs::exists(d / "r" / f));
  const sw::AnalysisResult res = sw::read_result_json((d / "r" / "result.json").string());
  const sw::AnalysisResult truth = sw::read_result_json((d / "neon-150as.truth.json").string());
  CHECK(std::abs(*res.xuv->fwhm_as / *truth.xuv->fwhm_as - 1) < 0.05);
  CHECK(std::abs(*res.ir->peak_vector_potential_au / *truth.ir->peak_vector_potential_au - 1) <
        0.05);
  CHECK(res.xuv->fwhm_as_sigma.has_value());
  CHECK(res.fit->converged.value_or(false));
  // No temporary files left behind (atomic writes).
  for (const auto& e : fs::directory_iterator(d / "r"))
    CHECK(e.path().filename().string().find(".tmp") == std::string::npos);
  fs::remove_all(d);
}
