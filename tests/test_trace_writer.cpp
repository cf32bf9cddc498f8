// Writing scans (io/trace_writer.h) and reading them back (io/trace_reader.h): every format,
// both layouts, both axis forms, YAML sidecars, echoed metadata, truth records, and atomic
// writes that leave no temporary files.
#include <catch2/catch.hpp>

#include <chrono>
#include <cmath>
#include <filesystem>
#include <random>

#include <nlohmann/json.hpp>

#include "io/atomic_file.h"
#include "io/result_io.h"
#include "io/trace_reader.h"
#include "io/trace_writer.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "tests/check_support.h"
#include "tests/test_support.h"

namespace fs = std::filesystem;

namespace {

using sw::test::TempDir;
using sw::test::write_text;

/// A streaking-like trace: Gaussian photoline whose centre oscillates with delay, non-integer
/// counts up to ~`peak`, on uniform energy and (uniform or jittered) delay axes.
sw::Trace make_trace(bool uniform_delays, double peak) {
  sw::Trace t;
  const int ne = 37, nd = 23;
  for (int j = 0; j < ne; ++j) t.energy_au.push_back(sw::units::eV_to_au(40.0 + 0.25 * j));
  std::mt19937 rng(7);
  std::uniform_real_distribution<double> jitter(-0.02, 0.02);
  for (int i = 0; i < nd; ++i)
    t.delay_au.push_back(
        sw::units::fs_to_au(-3.0 + 0.25 * i + (uniform_delays ? 0.0 : jitter(rng))));
  t.counts.resize(nd, ne);
  for (int i = 0; i < nd; ++i)
    for (int j = 0; j < ne; ++j) {
      const double centre = 44.5 + 1.5 * std::sin(0.8 * i);
      const double x = (40.0 + 0.25 * j - centre) / 1.2;
      t.counts(i, j) = peak * std::exp(-0.5 * x * x) + 0.37;
    }
  t.meta.gas = "Ne";
  t.meta.ir_wavelength_nm = 790.0;
  t.meta.kind = sw::TraceKind::kStreaking;
  t.meta.background = 0.37;
  t.meta.energy_resolution_eV = 0.2;
  t.meta.notes = "synthetic, seed 7";
  t.meta.extra_json["operator"] = "\"B. Sample\"";
  t.meta.extra_json["run"] = R"({"id":42,"ok":true})";
  return t;
}

void check_axes_equal(const sw::Trace& a, const sw::Trace& b) {
  REQUIRE(a.energy_au.size() == b.energy_au.size());
  REQUIRE(a.delay_au.size() == b.delay_au.size());
  // Axes pass through eV/fs text with 17 significant digits (round-trip exact up to the
  // 1e-9-relative uniformity tolerance of the {first, step, count} form).
  for (std::size_t j = 0; j < a.energy_au.size(); ++j)
    CHECK(b.energy_au[j] == Approx(a.energy_au[j]).epsilon(1e-12));
  for (std::size_t i = 0; i < a.delay_au.size(); ++i)
    CHECK(b.delay_au[i] == Approx(a.delay_au[i]).epsilon(1e-9).margin(1e-9));
}

nlohmann::json sidecar_json(const std::string& path) {
  return nlohmann::json::parse(sw::read_file_bytes(path));
}

}  // namespace

TEST_CASE("round trip: every format x both layouts x both axis forms", "[io][writer]") {
  for (const auto fmt : {sw::TraceFormat::kPng16, sw::TraceFormat::kTiff, sw::TraceFormat::kCsv})
    for (const auto layout : {sw::TraceLayout::kDelayRows, sw::TraceLayout::kEnergyRows})
      for (const bool uniform : {true, false}) {
        TempDir dir;
        INFO(sw::to_string(fmt) << " " << sw::to_string(layout)
                                << (uniform ? " uniform" : " jittered"));
        const sw::Trace in = make_trace(uniform, 3000.0);
        const sw::TraceFiles files =
            sw::write_trace(in, dir / "scan.json", fmt, {.layout = layout});
        const sw::Trace out = sw::read_trace(files.sidecar);
        check_axes_equal(in, out);
        const auto sc = sidecar_json(files.sidecar);
        CHECK(sc["layout"] == sw::to_string(layout));
        // Axis form: {first, step, count} exactly when uniform; jittered delays as an array.
        CHECK(sc["energy_eV"].is_object());
        CHECK(sc["delay_fs"].is_object() == uniform);
        REQUIRE(out.counts.rows() == in.counts.rows());
        REQUIRE(out.counts.cols() == in.counts.cols());
        const double scale = sc["scale"].get<double>();
        double worst = 0;
        for (Eigen::Index i = 0; i < in.counts.rows(); ++i)
          for (Eigen::Index j = 0; j < in.counts.cols(); ++j)
            worst = std::max(worst, std::abs(out.counts(i, j) - in.counts(i, j)));
        if (fmt == sw::TraceFormat::kPng16) {
          // 16-bit quantisation (PNG, ISO/IEC 15948: 0..65535): rounding error <= scale / 2.
          CHECK(scale == Approx(in.counts.maxCoeff() / 65535.0));
          CHECK(worst <= scale / 2 * (1 + 1e-12));
          CHECK(worst > 0);  // non-integer counts cannot be exact in 16 bits
        } else if (fmt == sw::TraceFormat::kTiff) {
          // IEEE 754 binary32 (TIFF 6.0 SampleFormat 3): relative rounding <= 2^-24.
          CHECK(scale == 1.0);
          CHECK(worst <= in.counts.maxCoeff() * std::ldexp(1.0, -24));
        } else {
          CHECK(worst == 0.0);  // 17 significant digits round-trip a binary64 exactly
        }
        // Meta and unknown keys echoed.
        CHECK(out.meta.gas == "Ne");
        CHECK(out.meta.ir_wavelength_nm == 790.0);
        CHECK(out.meta.kind == sw::TraceKind::kStreaking);
        CHECK(*out.meta.background == 0.37);
        CHECK(*out.meta.energy_resolution_eV == 0.2);
        CHECK(out.meta.notes == "synthetic, seed 7");
        CHECK(out.meta.extra_json == in.meta.extra_json);
        // Exactly the image and the sidecar: no temporary files left behind.
        std::vector<std::string> expected{fs::path(files.image).filename().string(), "scan.json"};
        std::sort(expected.begin(), expected.end());
        CHECK(dir.listing() == expected);
      }
}

TEST_CASE("png16 is lossless with scale 1 for integer counts up to 65535", "[io][writer]") {
  TempDir dir;
  sw::Trace t = make_trace(true, 1000.0);
  t.counts = t.counts.array().round();
  t.counts(3, 4) = 65535;
  const auto files = sw::write_trace(t, dir / "int.json", sw::TraceFormat::kPng16);
  CHECK(sidecar_json(files.sidecar)["scale"] == 1.0);
  const sw::Trace back = sw::read_trace(files.sidecar);
  CHECK((back.counts - t.counts).cwiseAbs().maxCoeff() == 0.0);
}

TEST_CASE("explicit_axes writes arrays even when uniform", "[io][writer]") {
  TempDir dir;
  const sw::Trace t = make_trace(true, 10.0);
  sw::TraceWriteOptions o;
  o.explicit_axes = true;
  const auto files = sw::write_trace(t, dir / "a.json", sw::TraceFormat::kCsv, o);
  const auto sc = sidecar_json(files.sidecar);
  CHECK(sc["energy_eV"].is_array());
  CHECK(sc["delay_fs"].is_array());
  check_axes_equal(t, sw::read_trace(files.sidecar));
}

TEST_CASE("YAML sidecar written through cv::FileStorage is read back", "[io][writer]") {
  TempDir dir;
  const sw::Trace t = make_trace(false, 50.0);
  const auto files = sw::write_trace(t, dir / "y.yaml", sw::TraceFormat::kTiff);
  const sw::Trace back = sw::read_trace(files.sidecar);
  check_axes_equal(t, back);
  CHECK(back.meta.notes == t.meta.notes);
  CHECK(back.meta.extra_json.at("operator") == "\"B. Sample\"");
  // Strings with YAML indicators (':', '#', quotes) survive FileStorage's quoting.
  sw::Trace odd = t;
  odd.meta.notes = "gate: 3 'fs' # not a comment, \"quoted\"";
  odd.meta.gas = "Ar";
  const sw::Trace odd_back =
      sw::read_trace(sw::write_trace(odd, dir / "odd.yml", sw::TraceFormat::kCsv).sidecar);
  CHECK(odd_back.meta.notes == odd.meta.notes);
  // FileStorage has no boolean: true is written as 1 (documented limitation of YAML sidecars).
  CHECK(back.meta.extra_json.at("run") == R"({"id":42,"ok":1})");
}

TEST_CASE("truth record is written beside the sidecar", "[io][writer]") {
  TempDir dir;
  sw::AnalysisResult truth;
  truth.analysis = "simulate";
  truth.xuv = sw::XuvSection{};
  truth.xuv->fwhm_as = 180.0;
  truth.extra.push_back({"generator.seed", 7LL});
  sw::TraceWriteOptions o;
  o.truth = &truth;
  const auto files =
      sw::write_trace(make_trace(true, 10.0), dir / "s.json", sw::TraceFormat::kPng16, o);
  CHECK(files.truth == dir / "s.truth.json");
  CHECK(sw::truth_path_for(dir / "s.json") == dir / "s.truth.json");
  const sw::AnalysisResult back = sw::read_result_json(files.truth);
  CHECK(*back.xuv->fwhm_as == 180.0);
  CHECK(dir.listing() == std::vector<std::string>{"s.json", "s.png", "s.truth.json"});
}

TEST_CASE("writer refuses bad targets and leaves nothing behind", "[io][writer]") {
  TempDir dir;
  const sw::Trace t = make_trace(true, 10.0);
  auto message = [&](const std::string& path) {
    return sw::test::error_message([&] { sw::write_trace(t, path, sw::TraceFormat::kCsv); },
                                   sw::ErrorKind::kInput);
  };
  CHECK_THAT(message(dir / "s.txt"), Catch::Contains("s.txt") && Catch::Contains(".json"));
  CHECK_THAT(message(dir / "missing_folder/s.json"),
             Catch::Contains("missing_folder") && Catch::Contains("does not exist"));
  sw::Trace bad = t;
  bad.counts(0, 0) = -1;
  CHECK_THROWS_AS(sw::write_trace(bad, dir / "b.json", sw::TraceFormat::kCsv), sw::Error);
  CHECK(dir.listing().empty());
}

TEST_CASE("write_file_atomic replaces content whole and leaves no temporary", "[io][atomic]") {
  TempDir dir;
  const std::string p = dir / "f.txt";
  sw::write_file_atomic(p, "first version");
  sw::write_file_atomic(p, "second");
  CHECK(sw::read_file_bytes(p) == "second");
  sw::write_file_atomic(dir / "empty.txt", "");
  CHECK(sw::read_file_bytes(dir / "empty.txt").empty());
  CHECK(dir.listing() == std::vector<std::string>{"empty.txt", "f.txt"});
}

TEST_CASE("flight-time axis: written ascending with its calibration, bad axes refused",
          "[io][writer][tof]") {
  TempDir dir;
  sw::Trace t = make_trace(true, 100.0);
  const std::size_t n = t.num_energies();
  sw::TraceWriteOptions wo;
  sw::TraceTofAxis ax;
  ax.length_m = 0.5;
  ax.t0_ns = 1.0;
  for (std::size_t j = 0; j < n; ++j) ax.tof_ns.push_back(400.0 - 2.0 * static_cast<double>(j));
  wo.tof = ax;
  const sw::TraceFiles f = sw::write_trace(t, dir / "tof.json", sw::TraceFormat::kCsv, wo);
  const auto sc = sidecar_json(f.sidecar);
  CHECK(!sc.contains("energy_eV"));
  CHECK(sc["tof_ns"]["step"].get<double>() == Approx(2.0));  // ascending flight time
  CHECK(sc["calibration"]["length_m"].get<double>() == 0.5);
  CHECK(sc["calibration"]["t0_ns"].get<double>() == 1.0);
  // The reader conserves the counts of every row (io/tof_calibration.h, DESIGN.md "Jacobians").
  const sw::Trace back = sw::read_trace(f.sidecar);
  for (Eigen::Index i = 0; i < t.counts.rows(); ++i)
    CHECK(back.counts.row(i).sum() == Approx(t.counts.row(i).sum()).epsilon(1e-9));
  // One flight time per column, after t0.
  wo.tof->tof_ns.pop_back();
  CHECK_THROWS_WITH(sw::write_trace(t, dir / "bad.json", sw::TraceFormat::kCsv, wo),
                    Catch::Contains("one flight time per column"));
  wo.tof = ax;
  wo.tof->tof_ns[0] = 0.5;
  CHECK_THROWS_WITH(sw::write_trace(t, dir / "bad.json", sw::TraceFormat::kCsv, wo),
                    Catch::Contains("after t0_ns"));
  CHECK(!fs::exists(dir / "bad.json"));
}

TEST_CASE("declared lines, energy window and saturation level round-trip", "[io][writer]") {
  // DESIGN.md's sidecar keys `lines`, `energy_window_eV`, `saturation_counts`: what the writer
  // emits the reader must give back unchanged (a simulated two-gas scan keeps its declared lines).
  TempDir dir;
  sw::Trace t = make_trace(true, 10.0);
  t.meta.energy_window_eV = {41.0, 48.5};
  t.meta.saturation_counts = 900.0;
  t.meta.lines = {{"2p", std::nullopt, std::nullopt, ""}, {"4p", 14.0, 0.4, "Kr"}};
  const auto files = sw::write_trace(t, dir / "l.json", sw::TraceFormat::kCsv, {});
  const auto sc = sidecar_json(files.sidecar);
  CHECK(sc["lines"][0]["ionization_energy_eV"] == "auto");
  const sw::Trace b = sw::read_trace(files.sidecar);
  REQUIRE(b.meta.energy_window_eV.size() == 2);
  CHECK(b.meta.energy_window_eV[0] == 41.0);
  CHECK(b.meta.energy_window_eV[1] == 48.5);
  REQUIRE(b.meta.saturation_counts);
  CHECK(*b.meta.saturation_counts == 900.0);
  REQUIRE(b.meta.lines.size() == 2);
  CHECK(b.meta.lines[0].name == "2p");
  CHECK_FALSE(b.meta.lines[0].ionization_energy_eV);
  CHECK(b.meta.lines[1].gas == "Kr");
  CHECK(*b.meta.lines[1].ionization_energy_eV == 14.0);
  CHECK(*b.meta.lines[1].relative_strength == 0.4);
}
