// Every way a scan's files can be wrong (DESIGN.md "Errors and data safety", "The trace file
// contract"): read_trace must throw sw::Error of kind kInput whose message names the file, the
// field and what was expected; it must never crash or accept the file.
#include <catch2/catch.hpp>

#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <limits>
#include <random>
#include <string>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>
#include <opencv2/core.hpp>
#include <opencv2/imgcodecs.hpp>

#include "io/trace_reader.h"
#include "retrieval/core/error.h"
#include "tests/check_support.h"
#include "tests/test_support.h"

namespace fs = std::filesystem;
using Catch::Contains;
using nlohmann::json;

namespace {

using sw::test::TempDir;
using sw::test::write_text;

/// A valid 4 delays x 5 energies scan: good.png + the sidecar below.
struct Fixture {
  TempDir dir;
  json sidecar = {{"streakwright", 1},
                  {"image", "good.png"},
                  {"layout", "delay_rows"},
                  {"energy_eV", {{"first", 40.0}, {"step", 0.5}, {"count", 5}}},
                  {"delay_fs", {{"first", -1.0}, {"step", 0.5}, {"count", 4}}}};
  Fixture() {
    cv::Mat m(4, 5, CV_16UC1, cv::Scalar(100));
    REQUIRE(cv::imwrite(dir / "good.png", m));
  }
  /// Writes `sc` as sidecar NAME.json and returns the message of the kInput error it must give.
  std::string error_for(const json& sc, const std::string& name = "case.json") {
    write_text(dir / name, sc.dump());
    return error_for_file(dir / name);
  }
  /// Names image file `image` in the sidecar (after writing `text` into it, unless empty) and
  /// returns the kInput message.
  std::string error_for_image(const std::string& image, const std::string& text = "") {
    if (!text.empty()) write_text(dir / image, text);
    json sc = sidecar;
    sc["image"] = image;
    return error_for(sc);
  }
  static std::string error_for_file(const std::string& path) {
    INFO("reading " << path);
    return sw::test::error_message([&] { (void)sw::read_trace(path); }, sw::ErrorKind::kInput);
  }
};

}  // namespace

TEST_CASE("the fixture itself is valid", "[io][bad]") {
  Fixture f;
  write_text(f.dir / "ok.json", f.sidecar.dump());
  CHECK_NOTHROW(sw::read_trace(f.dir / "ok.json"));
}

TEST_CASE("sidecar missing, not JSON/YAML, wrong extension, not an object", "[io][bad]") {
  Fixture f;
  CHECK_THAT(Fixture::error_for_file(f.dir / "absent.json"),
             Contains("absent.json") && Contains("does not exist"));
  // Each file's text and what its message says besides the file's name.
  const struct {
    const char* name;
    const char* text;
    const char* says;
  } bad[] = {
      {"broken.json", R"({"streakwright": 1, "image": )",  // RFC 8259: an object must be closed.
       "not valid JSON"},
      {"empty.json", "", "not valid JSON"},
      {"broken.yaml", "streakwright: 1\nimage: [unclosed\n", "not valid YAML"},
      {"case.ini", "streakwright=1", ".json"},
      {"list.json", "[1, 2]", "top level"},
  };
  for (const auto& b : bad) {
    write_text(f.dir / b.name, b.text);
    CHECK_THAT(Fixture::error_for_file(f.dir / b.name), Contains(b.name) && Contains(b.says));
  }
  fs::create_directories(f.dir.path / "folder.json");
  CHECK_THAT(Fixture::error_for_file(f.dir / "folder.json"),
             Contains("folder.json") && Contains("folder"));
}

TEST_CASE("each required key, when missing, is named", "[io][bad]") {
  Fixture f;
  for (const char* key : {"streakwright", "image", "layout", "energy_eV", "delay_fs"}) {
    INFO(key);
    json sc = f.sidecar;
    sc.erase(key);
    const std::string m = f.error_for(sc);
    CHECK_THAT(
        m, Contains("case.json") && Contains(std::string("'") + key + "'") && Contains("missing"));
  }
  json sc = f.sidecar;
  sc.erase("energy_eV");
  CHECK_THAT(f.error_for(sc), Contains("tof_ns"));  // the alternative is mentioned
  sc = f.sidecar;
  sc.erase("delay_fs");
  CHECK_THAT(f.error_for(sc), Contains("delay_um"));
}

TEST_CASE("wrong version, layout, kind and ill-typed fields", "[io][bad]") {
  Fixture f;
  // Each change of the valid sidecar (an RFC 7396 JSON merge patch: null removes a key) and the
  // texts its message must hold.
  const std::vector<std::pair<const char*, std::vector<std::string>>> changes = {
      {R"({"streakwright": 2})", {"case.json", "'streakwright'", "version 2", "expected 1"}},
      {R"({"layout": "rows"})", {"'layout'", "'rows'", "delay_rows, energy_rows"}},
      {R"({"kind": "frog"})", {"'kind'", "'frog'", "streaking, rabbitt, xuv_only"}},
      {R"({"energy_eV": {"step": "0.5"}})", {"case.json", "'energy_eV.step'", "expected a number"}},
      {R"({"energy_eV": {"step": 0}})", {"'energy_eV.step'", "non-zero"}},
      {R"({"delay_fs": {"count": 2.5}})", {"'delay_fs.count'", "whole number"}},
      {R"({"delay_fs": {"first": null}})", {"'delay_fs'", "'first'"}},
      {R"({"delay_fs": {"last": 1.0}})", {"'delay_fs'", "'last'"}},
      {R"({"energy_eV": "40..42"})", {"'energy_eV'", "{first, step, count}"}},
      {R"({"image": 5})", {"'image'", "string"}},
      {R"({"scale": -2})", {"'scale'", "> 0"}},
      {R"({"background": "median"})", {"'background'", "\"auto\""}},
      {R"({"ir_wavelength_nm": 0})", {"'ir_wavelength_nm'"}},
      {R"({"energy_resolution_eV": -0.1})", {"'energy_resolution_eV'"}},
      {R"({"tof_ns": {"first": 40.0, "step": 0.5, "count": 5}})", {"'tof_ns'", "energy_eV"}},
      {R"({"delay_um": {"first": -1.0, "step": 0.5, "count": 4}})", {"'delay_um'", "delay_fs"}},
  };
  for (const auto& [patch, texts] : changes) {
    json sc = f.sidecar;
    sc.merge_patch(json::parse(patch));
    const std::string m = f.error_for(sc);
    INFO(patch << " gave: " << m);
    for (const std::string& t : texts) CHECK_THAT(m, Contains(t));
  }
}

TEST_CASE("axis counts that do not match the image give both numbers", "[io][bad]") {
  Fixture f;
  json sc = f.sidecar;
  sc["energy_eV"]["count"] = 6;
  CHECK_THAT(f.error_for(sc), Contains("case.json") && Contains("'energy_eV'") &&
                                  Contains("has 6 values") && Contains("has 5 columns") &&
                                  Contains("good.png"));
  sc = f.sidecar;
  sc["delay_fs"] = json::array({0.0, 1.0, 2.0});
  CHECK_THAT(f.error_for(sc),
             Contains("'delay_fs'") && Contains("has 3 values") && Contains("has 4 rows"));
  sc = f.sidecar;
  sc["layout"] = "energy_rows";  // now 4 rows are energies: 5 energies do not fit
  CHECK_THAT(f.error_for(sc),
             Contains("'energy_eV'") && Contains("has 5 values") && Contains("has 4 rows"));
}

TEST_CASE("non-monotonic axes", "[io][bad]") {
  Fixture f;
  json sc = f.sidecar;
  sc["delay_fs"] = json::array({0.0, 1.0, 0.5, 2.0});
  CHECK_THAT(f.error_for(sc), Contains("case.json") && Contains("'delay_fs'") &&
                                  Contains("not strictly monotonic at index 2"));
  sc = f.sidecar;
  sc["energy_eV"] = json::array({40.0, 40.5, 40.5, 41.0, 41.5});
  CHECK_THAT(f.error_for(sc), Contains("'energy_eV'") && Contains("monotonic"));
  sc = f.sidecar;
  sc["energy_eV"] = json::array({40.0, 40.5, "x", 41.0, 41.5});
  CHECK_THAT(f.error_for(sc), Contains("'energy_eV[2]'") && Contains("expected a number"));
}

TEST_CASE("missing, undecodable, colour and unsupported-depth images", "[io][bad]") {
  Fixture f;
  json sc = f.sidecar;
  sc["image"] = "nothere.png";
  CHECK_THAT(f.error_for(sc), Contains("case.json") && Contains("'image'") &&
                                  Contains("nothere.png") && Contains("does not exist"));
  write_text(f.dir / "garbage.png",
             "this is not a PNG signature");  // ISO/IEC 15948 5.2: 8-byte signature
  sc["image"] = "garbage.png";
  CHECK_THAT(f.error_for(sc),
             Contains("'image'") && Contains("garbage.png") && Contains("could not be decoded"));
  cv::Mat colour(4, 5, CV_8UC3, cv::Scalar(1, 2, 3));
  REQUIRE(cv::imwrite(f.dir / "colour.png", colour));
  sc["image"] = "colour.png";
  CHECK_THAT(f.error_for(sc), Contains("colour.png") && Contains("3 channels") &&
                                  Contains("expected a single-channel image"));
  cv::Mat s8(4, 5, CV_8SC1,
             cv::Scalar(3));  // TIFF 6.0 SampleFormat 2, 8 bits: not a detector format
  REQUIRE(cv::imwrite(f.dir / "s8.tiff", s8));
  sc["image"] = "s8.tiff";
  CHECK_THAT(f.error_for(sc),
             Contains("s8.tiff") && Contains("'image'") && Contains("unsupported sample type"));
  fs::create_directories(f.dir.path / "dir.png");
  sc["image"] = "dir.png";
  CHECK_THAT(f.error_for(sc), Contains("dir.png") && Contains("folder"));
}

TEST_CASE("NaN, infinite and negative counts are located; empty and all-zero images refused",
          "[io][bad]") {
  Fixture f;
  // IEEE 754 NaN stored in a float TIFF (TIFF 6.0 SampleFormat 3).
  cv::Mat m(4, 5, CV_32FC1, cv::Scalar(1.0f));
  m.at<float>(2, 3) = std::numeric_limits<float>::quiet_NaN();
  REQUIRE(cv::imwrite(f.dir / "nan.tiff", m));
  CHECK_THAT(f.error_for_image("nan.tiff"), Contains("case.json") && Contains("nan.tiff") &&
                                                Contains("NaN") && Contains("row 2, column 3"));
  m.at<float>(2, 3) = 1.0f;
  m.at<float>(0, 4) = std::numeric_limits<float>::infinity();
  REQUIRE(cv::imwrite(f.dir / "inf.tiff", m));
  CHECK_THAT(f.error_for_image("inf.tiff"),
             Contains("inf.tiff") && Contains("infinite") && Contains("row 0, column 4"));
  CHECK_THAT(f.error_for_image("neg.csv", "1,1,1,1,1\n1,1,1,1,1\n1,1,1,-2,1\n1,1,1,1,1\n"),
             Contains("neg.csv") && Contains("negative") && Contains("row 2, column 3"));
  cv::Mat zero(4, 5, CV_16UC1, cv::Scalar(0));
  REQUIRE(cv::imwrite(f.dir / "zero.png", zero));
  CHECK_THAT(f.error_for_image("zero.png"),
             Contains("zero.png") && Contains("zero") && Contains("'image'"));
  CHECK_THAT(f.error_for_image("header_only.csv", "e1,e2,e3\n"),
             Contains("header_only.csv") && Contains("no numbers"));
}

TEST_CASE("non-numeric and ragged CSV cells are located (RFC 4180 fields)", "[io][bad]") {
  Fixture f;
  CHECK_THAT(f.error_for_image("text.csv", "1,2,3,4,5\n1,2,3,4,5\n1,2,abc,4,5\n1,2,3,4,5\n"),
             Contains("case.json") && Contains("text.csv") && Contains("'image'") &&
                 Contains("line 3, column 3") && Contains("'abc'"));
  CHECK_THAT(f.error_for_image("hole.csv", "1,2,3,4,5\n1,,3,4,5\n1,2,3,4,5\n1,2,3,4,5\n"),
             Contains("hole.csv") && Contains("line 2, column 2") && Contains("empty"));
  CHECK_THAT(f.error_for_image("ragged.csv", "1,2,3,4,5\n1,2,3,4\n1,2,3,4,5\n1,2,3,4,5\n"),
             Contains("ragged.csv") && Contains("line 2 has 4 cells"));
}

TEST_CASE("time-of-flight calibration errors", "[io][bad][tof]") {
  Fixture f;
  json sc = f.sidecar;
  sc.erase("energy_eV");
  sc["tof_ns"] = {{"first", 100.0}, {"step", 1.0}, {"count", 5}};
  CHECK_THAT(f.error_for(sc), Contains("'tof_ns'") && Contains("calibration"));
  sc["calibration"] = {{"length_m", 1.0}};
  CHECK_THAT(f.error_for(sc), Contains("'calibration'") && Contains("'t0_ns'"));
  sc["calibration"] = {{"length_m", -1.0}, {"t0_ns", 0.0}};
  CHECK_THAT(f.error_for(sc), Contains("'calibration.length_m'") && Contains("> 0"));
  sc["calibration"] = {{"length_m", 1.0}, {"t0_ns", 100.0}};  // bins at/before time zero
  CHECK_THAT(f.error_for(sc), Contains("case.json") && Contains("t0_ns") && Contains("not after"));
  sc["calibration"] = {{"length_m", 1.0}, {"t0_ns", 0.0}, {"voltage", 3}};
  CHECK_THAT(f.error_for(sc), Contains("'calibration.voltage'"));
  sc["calibration"] = {{"length_m", 1.0}, {"t0_ns", 0.0}, {"energy_offset_eV", 0.0}};
  write_text(f.dir / "tof_ok.json", sc.dump());
  CHECK_NOTHROW(sw::read_trace(f.dir / "tof_ok.json"));  // the same scan with a valid calibration
}
