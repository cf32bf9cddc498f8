// result.json writing and reading (io/result_io.h) against DESIGN.md "The result contract":
// stable keys, omission of absent sections and values, dotted extras, refusal of NaN/inf,
// and a lossless round trip.
#include <catch2/catch.hpp>

#include <chrono>
#include <cmath>
#include <filesystem>
#include <limits>
#include <random>

#include <nlohmann/json.hpp>

#include "io/atomic_file.h"
#include "io/result_io.h"
#include "retrieval/core/error.h"
#include "tests/check_support.h"
#include "tests/test_support.h"

namespace fs = std::filesystem;
using nlohmann::json;

namespace {

using sw::test::TempDir;
using sw::test::write_text;

sw::AnalysisResult full_result() {
  sw::AnalysisResult r;
  r.input = "scan_0042.json";
  r.analysis = "retrieve";
  r.engine = "ptychographic";
  r.xuv = sw::XuvSection{};
  r.xuv->fwhm_as = 151.2;
  r.xuv->fwhm_as_sigma = 3.1;
  r.xuv->transform_limited_fwhm_as = 149.0;
  r.xuv->gdd_as2 = 120.0;
  r.xuv->gdd_as2_sigma = 300.0;
  r.xuv->center_photon_energy_eV = 95.1;
  r.ir = sw::IrSection{};
  r.ir->peak_vector_potential_au = 0.209;
  r.ir->peak_intensity_Wcm2 = 5.0e12;
  r.ir->wavelength_nm = 800.0;
  r.ir->fwhm_fs = 5.0;
  r.verdict = sw::VerdictSection{};
  r.verdict->pulse_class = sw::PulseClass::kIsolated;
  r.verdict->satellite_intensity_ratio = 0.01;
  r.verdict->main_burst_energy_fraction = 0.98;
  r.verdict->reason = "largest satellite at 1 % of the main burst";
  r.verdict->evidence.push_back({"bursts_above_threshold", 1LL});
  r.verdict->evidence.push_back({"spectrum.comb_contrast", 0.02});
  r.fit = sw::FitSection{};
  r.fit->trace_error = 0.012;
  r.fit->iterations = 300;
  r.fit->converged = true;
  r.fit->seconds = 0.8;
  r.fit->noise_model = "poisson";
  r.rabbitt = sw::RabbittSection{};
  r.rabbitt->attochirp_as_per_eV = 10.2;
  r.rabbitt->attochirp_as_per_eV_sigma = 0.4;
  r.rabbitt->train_burst_fwhm_as = 260.0;
  sw::Sideband sb;
  sb.order = 14;
  sb.energy_eV = 6.0;
  sb.phase_rad = 1.2;
  sb.phase_rad_sigma = 0.02;
  sb.group_delay_as = 140.0;
  sb.group_delay_as_sigma = 2.0;
  sb.modulation_depth = 0.4;
  r.rabbitt->sidebands.push_back(sb);
  sb.order = 16;
  sb.modulation_depth.reset();
  sb.atomic_delay_as = -12.5;
  r.rabbitt->sidebands.push_back(sb);
  r.extra.push_back({"generator.xuv.center_eV", 95.0});
  r.extra.push_back({"generator.xuv.gdd_as2", 120.0});
  r.extra.push_back({"generator.seed", 17LL});
  r.extra.push_back({"generator.noise", std::string("poisson")});
  r.extra.push_back({"preprocess.subtracted", true});
  r.extra.push_back({"preprocess.window_eV", std::vector<double>{40.0, 60.5}});
  r.extra_json["sidecar.run"] = R"({"id": 17, "tags": ["a", "b"], "none": null})";
  r.warnings.push_back("bandwidth/energy = 0.31: CMA questionable");
  return r;
}

}  // namespace

TEST_CASE("result.json carries the contract keys with their values", "[io][result]") {
  const json j = json::parse(sw::result_to_json(full_result()));
  // Keys and example values of DESIGN.md "The result contract".
  CHECK(j["streakwright_result"] == 1);
  CHECK(j["input"] == "scan_0042.json");
  CHECK(j["analysis"] == "retrieve");
  CHECK(j["engine"] == "ptychographic");
  CHECK(j["xuv"]["fwhm_as"] == 151.2);
  CHECK(j["xuv"]["fwhm_as_sigma"] == 3.1);
  CHECK(j["xuv"]["transform_limited_fwhm_as"] == 149.0);
  CHECK(j["xuv"]["gdd_as2"] == 120.0);
  CHECK(j["xuv"]["gdd_as2_sigma"] == 300.0);
  CHECK(j["xuv"]["center_photon_energy_eV"] == 95.1);
  CHECK(j["ir"]["peak_vector_potential_au"] == 0.209);
  CHECK(j["ir"]["peak_intensity_Wcm2"] == 5.0e12);
  CHECK(j["ir"]["wavelength_nm"] == 800.0);
  CHECK(j["ir"]["fwhm_fs"] == 5.0);
  CHECK(j["verdict"]["class"] == "isolated");
  CHECK(j["verdict"]["satellite_intensity_ratio"] == 0.01);
  CHECK(j["verdict"]["main_burst_energy_fraction"] == 0.98);
  CHECK(j["verdict"]["evidence"]["spectrum"]["comb_contrast"] == 0.02);
  CHECK(j["fit"]["trace_error"] == 0.012);
  CHECK(j["fit"]["iterations"] == 300);
  CHECK(j["fit"]["converged"] == true);
  CHECK(j["fit"]["seconds"] == 0.8);
  CHECK(j["rabbitt"]["attochirp_as_per_eV"] == 10.2);
  CHECK(j["rabbitt"]["attochirp_as_per_eV_sigma"] == 0.4);
  CHECK(j["rabbitt"]["train_burst_fwhm_as"] == 260.0);
  REQUIRE(j["rabbitt"]["sidebands"].size() == 2);
  const json& sb = j["rabbitt"]["sidebands"][0];
  CHECK(sb["order"] == 14);
  CHECK(sb["energy_eV"] == 6.0);
  CHECK(sb["phase_rad"] == 1.2);
  CHECK(sb["phase_rad_sigma"] == 0.02);
  CHECK(sb["group_delay_as"] == 140.0);
  CHECK(sb["modulation_depth"] == 0.4);
  CHECK_FALSE(sb.contains("atomic_delay_as"));
  CHECK_FALSE(j["rabbitt"]["sidebands"][1].contains("modulation_depth"));
  // Dotted keys expand into nested objects.
  CHECK(j["generator"]["xuv"]["center_eV"] == 95.0);
  CHECK(j["generator"]["xuv"]["gdd_as2"] == 120.0);
  CHECK(j["generator"]["seed"] == 17);
  CHECK(j["preprocess"]["window_eV"] == json::array({40.0, 60.5}));
  CHECK(j["sidecar"]["run"]["tags"][1] == "b");
  CHECK(j["sidecar"]["run"]["none"].is_null());
  CHECK(j["warnings"][0] == "bandwidth/energy = 0.31: CMA questionable");
  // Absent optionals are omitted, never zero.
  CHECK_FALSE(j["xuv"].contains("tod_as3"));
  CHECK_FALSE(j["xuv"].contains("rms_duration_as"));
  CHECK_FALSE(j["ir"].contains("peak_intensity_Wcm2_sigma"));
  CHECK_FALSE(j["fit"].contains("termination"));
}

TEST_CASE("sections not computed are absent", "[io][result]") {
  sw::AnalysisResult r;
  r.input = "x.json";
  r.analysis = "classify";
  r.verdict = sw::VerdictSection{};
  r.verdict->reason = "too weak";
  const json j = json::parse(sw::result_to_json(r));
  for (const char* k : {"engine", "xuv", "ir", "fit", "rabbitt", "warnings"}) {
    INFO(k);
    CHECK_FALSE(j.contains(k));
  }
  CHECK(j["verdict"]["class"] == "undetermined");
  CHECK_FALSE(j["verdict"].contains("satellite_intensity_ratio"));
  CHECK(j.size() == 4);  // streakwright_result, input, analysis, verdict
  // An empty section stays an empty object (computed, nothing to report), not absent.
  r.xuv = sw::XuvSection{};
  CHECK(json::parse(sw::result_to_json(r))["xuv"] == json::object());
}

TEST_CASE("NaN and infinity are refused with the key named", "[io][result]") {
  // RFC 8259 section 6: NaN and Infinity are not permitted JSON numbers.
  auto message = [](const sw::AnalysisResult& r) {
    return sw::test::error_message([&] { (void)sw::result_to_json(r); }, sw::ErrorKind::kNumeric);
  };
  sw::AnalysisResult r = full_result();
  r.xuv->gdd_as2_sigma = std::numeric_limits<double>::quiet_NaN();
  CHECK_THAT(message(r), Catch::Contains("xuv.gdd_as2_sigma") && Catch::Contains("NaN"));
  r = full_result();
  r.rabbitt->sidebands[1].phase_rad = std::numeric_limits<double>::infinity();
  CHECK_THAT(message(r), Catch::Contains("rabbitt.sidebands[1].phase_rad"));
  r = full_result();
  r.extra.push_back({"generator.ir.cep_rad", -std::numeric_limits<double>::infinity()});
  CHECK_THAT(message(r), Catch::Contains("generator.ir.cep_rad"));
  r = full_result();
  r.extra.push_back({"curve", std::vector<double>{1.0, std::nan("")}});
  CHECK_THAT(message(r), Catch::Contains("curve[1]"));
}

TEST_CASE("colliding dotted keys are an error, not a silent overwrite", "[io][result]") {
  sw::AnalysisResult r;
  r.extra.push_back({"a.b", 1.0});
  r.extra.push_back({"a.b.c", 2.0});
  CHECK_THROWS_AS(sw::result_to_json(r), sw::Error);
  sw::AnalysisResult r2;
  r2.fit = sw::FitSection{};
  r2.fit->seconds = 1.0;
  r2.extra.push_back({"fit.seconds", 2.0});
  CHECK_THROWS_WITH(sw::result_to_json(r2), Catch::Contains("fit.seconds"));
  // Adding beside a contract section is allowed ("add more beside them").
  sw::AnalysisResult r3 = r2;
  r3.extra = {{"fit.restarts", 2LL}};
  CHECK(json::parse(sw::result_to_json(r3))["fit"]["restarts"] == 2);
}

TEST_CASE("round trip through a file is lossless", "[io][result]") {
  TempDir dir;
  const sw::AnalysisResult r = full_result();
  sw::write_result_json(dir / "result.json", r);
  CHECK(std::distance(fs::directory_iterator(dir.path), fs::directory_iterator{}) == 1);
  const sw::AnalysisResult b = sw::read_result_json(dir / "result.json");
  CHECK(b.input == r.input);
  CHECK(b.engine == r.engine);
  CHECK(*b.xuv->fwhm_as == *r.xuv->fwhm_as);
  CHECK_FALSE(b.xuv->tod_as3.has_value());
  CHECK(*b.ir->peak_intensity_Wcm2 == 5.0e12);
  CHECK(b.verdict->pulse_class == sw::PulseClass::kIsolated);
  CHECK(b.verdict->reason == r.verdict->reason);
  REQUIRE(b.verdict->evidence.size() == 2);
  CHECK(b.verdict->evidence[1].key == "spectrum.comb_contrast");
  CHECK(*b.fit->iterations == 300);
  CHECK(*b.fit->converged);
  CHECK(b.fit->noise_model == "poisson");
  REQUIRE(b.rabbitt->sidebands.size() == 2);
  CHECK(b.rabbitt->sidebands[1].order == 16);
  CHECK(*b.rabbitt->sidebands[1].atomic_delay_as == -12.5);
  CHECK_FALSE(b.rabbitt->sidebands[1].modulation_depth.has_value());
  CHECK(b.warnings == r.warnings);
  // Extras come back as dotted Params with their types.
  auto find = [&](const std::string& k) -> const sw::Param& {
    for (const auto& p : b.extra)
      if (p.key == k) return p;
    FAIL("missing extra " << k);
    throw 0;
  };
  CHECK(std::get<double>(find("generator.xuv.center_eV").value) == 95.0);
  CHECK(std::get<long long>(find("generator.seed").value) == 17);
  CHECK(std::get<bool>(find("preprocess.subtracted").value));
  CHECK(std::get<std::string>(find("generator.noise").value) == "poisson");
  CHECK(std::get<std::vector<double>>(find("preprocess.window_eV").value) ==
        std::vector<double>{40.0, 60.5});
  CHECK(std::get<long long>(find("sidecar.run.id").value) == 17);
  CHECK(b.extra_json.at("sidecar.run.none") == "null");
  CHECK(b.extra_json.at("sidecar.run.tags") == R"(["a","b"])");
  // Writing what was read gives the same document (object key order aside).
  CHECK(json::parse(sw::result_to_json(b)) == json::parse(sw::result_to_json(r)));
}

TEST_CASE("reading a bad result file names the file and the key", "[io][result]") {
  TempDir dir;
  auto message = [&](const std::string& text) {
    sw::write_file_atomic(dir / "r.json", text);
    return sw::test::error_message([&] { (void)sw::read_result_json(dir / "r.json"); },
                                   sw::ErrorKind::kInput);
  };
  CHECK_THAT(message("{\"streakwright_result\": 1,"),
             Catch::Contains("r.json") && Catch::Contains("not valid JSON"));
  CHECK_THAT(message("{\"input\": \"x\"}"), Catch::Contains("streakwright_result"));
  CHECK_THAT(message("{\"streakwright_result\": 2}"), Catch::Contains("version 1"));
  CHECK_THAT(message(R"({"streakwright_result": 1, "xuv": {"fwhm_as": "short"}})"),
             Catch::Contains("xuv.fwhm_as") && Catch::Contains("a number"));
  CHECK_THAT(message(R"({"streakwright_result": 1, "verdict": {"class": "double"}})"),
             Catch::Contains("verdict.class"));
  CHECK_THAT(message(R"({"streakwright_result": 1, "fit": {"converged": 1}})"),
             Catch::Contains("fit.converged"));
  CHECK_THAT(message(R"({"streakwright_result": 1, "rabbitt": {"sidebands": [{"order": 12}]}})"),
             Catch::Contains("rabbitt.sidebands[0].energy_eV"));
  CHECK_THAT(sw::test::error_message([&] { (void)sw::read_result_json(dir / "nothing.json"); },
                                     sw::ErrorKind::kInput),
             Catch::Contains("nothing.json"));
}

TEST_CASE("quality and lines sections follow DESIGN.md and round-trip", "[io][result]") {
  // Key names and shapes: ../shared/DESIGN.md "The result contract" (quality, lines).
  sw::AnalysisResult r;
  r.analysis = "retrieve";
  sw::QualitySection q;
  q.add("trace_error_vs_noise_floor", 1.04, 1.5, "<=", "G / G_noise");
  q.add("fwhm_vs_transform_limit", 0.42, 0.95, ">=", "FWHM / transform limit");
  q.add("total_counts", 10.0, 100.0, ">=", "informational", /*guards_headline=*/false);
  r.quality = q;
  CHECK_FALSE(q.trusted);
  CHECK(q.failed == std::vector<std::string>{"fwhm_vs_transform_limit", "total_counts"});
  sw::LineEntry a;
  a.name = "2p";
  a.ionization_energy_eV = 21.5645;
  a.relative_strength = 1.0;
  a.reference = true;
  a.analysed = true;
  sw::LineEntry b;
  b.name = "2s";
  b.ionization_energy_eV = 48.475;
  b.relative_strength = 0.31;
  b.relative_strength_sigma = 0.01;
  r.lines = {a, b};
  const json j = json::parse(sw::result_to_json(r));
  CHECK(j["quality"]["trusted"] == false);
  CHECK(j["quality"]["failed"][0] == "fwhm_vs_transform_limit");
  CHECK(j["quality"]["checks"][1]["value"] == 0.42);
  CHECK(j["quality"]["checks"][1]["limit"] == 0.95);
  CHECK(j["quality"]["checks"][1]["pass"] == false);
  CHECK(j["lines"][0]["reference"] == true);
  CHECK(j["lines"][1]["ionization_energy_eV"] == 48.475);
  CHECK_FALSE(j["lines"][1].contains("relative_delay_as"));  // not analysed: no delay
  const sw::AnalysisResult back = sw::result_from_json(sw::result_to_json(r), "mem");
  REQUIRE(back.quality);
  CHECK_FALSE(back.quality->trusted);
  CHECK(back.quality->checks.size() == 3);
  CHECK(back.quality->checks[2].guards_headline == false);
  REQUIRE(back.lines.size() == 2);
  CHECK(back.lines[1].relative_strength_sigma.value_or(0) == 0.01);
  CHECK(sw::result_to_json(back) == sw::result_to_json(r));
  // A guarding check that passes and an informational one that fails: still trusted.
  sw::QualitySection ok;
  ok.add("a", 1.0, 2.0, "<=", "");
  ok.add("b", 1.0, 2.0, ">=", "", false);
  CHECK(ok.trusted);
  // A non-finite value fails its check and is never written as NaN.
  sw::QualitySection bad;
  bad.add("c", std::nan(""), 2.0, "<=", "");
  CHECK_FALSE(bad.trusted);
  CHECK(std::isfinite(bad.checks[0].value));
}
