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

#include <nlohmann/json.hpp>
#include <opencv2/core.hpp>
#include <opencv2/imgcodecs.hpp>

#include "io/trace_reader.h"
#include "retrieval/core/error.h"
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
  static std::string error_for_file(const std::string& path) {
    try {
      (void)sw::read_trace(path);
    } catch (const sw::Error& e) {
      CHECK(e.kind() == sw::ErrorKind::kInput);
      return e.what();
    } catch (const std::exception& e) {
      FAIL("expected sw::Error, got std::exception: " << e.what());
    }
    FAIL("expected sw::Error for " << path << ", but the file was accepted");
    return {};
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
  // RFC 8259: an object must be closed.
  write_text(f.dir / "broken.json", R"({"streakwright": 1, "image": )");
  CHECK_THAT(Fixture::error_for_file(f.dir / "broken.json"),
             Contains("broken.json") && Contains("not valid JSON"));
  write_text(f.dir / "empty.json", "");
  CHECK_THAT(Fixture::error_for_file(f.dir / "empty.json"),
             Contains("empty.json") && Contains("not valid JSON"));
  write_text(f.dir / "broken.yaml", "streakwright: 1\nimage: [unclosed\n");
  CHECK_THAT(Fixture::error_for_file(f.dir / "broken.yaml"),
             Contains("broken.yaml") && Contains("not valid YAML"));
  write_text(f.dir / "case.ini", "streakwright=1");
  CHECK_THAT(Fixture::error_for_file(f.dir / "case.ini"),
             Contains("case.ini") && Contains(".json"));
  write_text(f.dir / "list.json", "[1, 2]");
  CHECK_THAT(Fixture::error_for_file(f.dir / "list.json"),
             Contains("list.json") && Contains("top level"));
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
  json sc = f.sidecar;
  sc["streakwright"] = 2;
  CHECK_THAT(f.error_for(sc), Contains("case.json") && Contains("'streakwright'") &&
                                  Contains("version 2") && Contains("expected 1"));
  sc = f.sidecar;
  sc["layout"] = "rows";
  CHECK_THAT(f.error_for(sc),
             Contains("'layout'") && Contains("'rows'") && Contains("delay_rows, energy_rows"));
  sc = f.sidecar;
  sc["kind"] = "frog";
  CHECK_THAT(f.error_for(sc),
             Contains("'kind'") && Contains("'frog'") && Contains("streaking, rabbitt, xuv_only"));
  sc = f.sidecar;
  sc["energy_eV"]["step"] = "0.5";
  CHECK_THAT(f.error_for(sc), Contains("case.json") && Contains("'energy_eV.step'") &&
                                  Contains("expected a number"));
  sc = f.sidecar;
  sc["energy_eV"]["step"] = 0;
  CHECK_THAT(f.error_for(sc), Contains("'energy_eV.step'") && Contains("non-zero"));
  sc = f.sidecar;
  sc["delay_fs"]["count"] = 2.5;
  CHECK_THAT(f.error_for(sc), Contains("'delay_fs.count'") && Contains("whole number"));
  sc = f.sidecar;
  sc["delay_fs"].erase("first");
  CHECK_THAT(f.error_for(sc), Contains("'delay_fs'") && Contains("'first'"));
  sc = f.sidecar;
  sc["delay_fs"]["last"] = 1.0;
  CHECK_THAT(f.error_for(sc), Contains("'delay_fs'") && Contains("'last'"));
  sc = f.sidecar;
  sc["energy_eV"] = "40..42";
  CHECK_THAT(f.error_for(sc), Contains("'energy_eV'") && Contains("{first, step, count}"));
  sc = f.sidecar;
  sc["image"] = 5;
  CHECK_THAT(f.error_for(sc), Contains("'image'") && Contains("string"));
  sc = f.sidecar;
  sc["scale"] = -2;
  CHECK_THAT(f.error_for(sc), Contains("'scale'") && Contains("> 0"));
  sc = f.sidecar;
  sc["background"] = "median";
  CHECK_THAT(f.error_for(sc), Contains("'background'") && Contains("\"auto\""));
  sc = f.sidecar;
  sc["ir_wavelength_nm"] = 0;
  CHECK_THAT(f.error_for(sc), Contains("'ir_wavelength_nm'"));
  sc = f.sidecar;
  sc["energy_resolution_eV"] = -0.1;
  CHECK_THAT(f.error_for(sc), Contains("'energy_resolution_eV'"));
  sc = f.sidecar;
  sc["tof_ns"] = sc["energy_eV"];
  CHECK_THAT(f.error_for(sc), Contains("'tof_ns'") && Contains("energy_eV"));
  sc = f.sidecar;
  sc["delay_um"] = sc["delay_fs"];
  CHECK_THAT(f.error_for(sc), Contains("'delay_um'") && Contains("delay_fs"));
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
  json sc = f.sidecar;
  // IEEE 754 NaN stored in a float TIFF (TIFF 6.0 SampleFormat 3).
  cv::Mat m(4, 5, CV_32FC1, cv::Scalar(1.0f));
  m.at<float>(2, 3) = std::numeric_limits<float>::quiet_NaN();
  REQUIRE(cv::imwrite(f.dir / "nan.tiff", m));
  sc["image"] = "nan.tiff";
  CHECK_THAT(f.error_for(sc), Contains("case.json") && Contains("nan.tiff") && Contains("NaN") &&
                                  Contains("row 2, column 3"));
  m.at<float>(2, 3) = 1.0f;
  m.at<float>(0, 4) = std::numeric_limits<float>::infinity();
  REQUIRE(cv::imwrite(f.dir / "inf.tiff", m));
  sc["image"] = "inf.tiff";
  CHECK_THAT(f.error_for(sc),
             Contains("inf.tiff") && Contains("infinite") && Contains("row 0, column 4"));
  write_text(f.dir / "neg.csv", "1,1,1,1,1\n1,1,1,1,1\n1,1,1,-2,1\n1,1,1,1,1\n");
  sc["image"] = "neg.csv";
  CHECK_THAT(f.error_for(sc),
             Contains("neg.csv") && Contains("negative") && Contains("row 2, column 3"));
  cv::Mat zero(4, 5, CV_16UC1, cv::Scalar(0));
  REQUIRE(cv::imwrite(f.dir / "zero.png", zero));
  sc["image"] = "zero.png";
  CHECK_THAT(f.error_for(sc), Contains("zero.png") && Contains("zero") && Contains("'image'"));
  write_text(f.dir / "header_only.csv", "e1,e2,e3\n");
  sc["image"] = "header_only.csv";
  CHECK_THAT(f.error_for(sc), Contains("header_only.csv") && Contains("no numbers"));
}

TEST_CASE("non-numeric and ragged CSV cells are located (RFC 4180 fields)", "[io][bad]") {
  Fixture f;
  json sc = f.sidecar;
  write_text(f.dir / "text.csv", "1,2,3,4,5\n1,2,3,4,5\n1,2,abc,4,5\n1,2,3,4,5\n");
  sc["image"] = "text.csv";
  CHECK_THAT(f.error_for(sc), Contains("case.json") && Contains("text.csv") &&
                                  Contains("'image'") && Contains("line 3, column 3") &&
                                  Contains("'abc'"));
  write_text(f.dir / "hole.csv", "1,2,3,4,5\n1,,3,4,5\n1,2,3,4,5\n1,2,3,4,5\n");
  sc["image"] = "hole.csv";
  CHECK_THAT(f.error_for(sc),
             Contains("hole.csv") && Contains("line 2, column 2") && Contains("empty"));
  write_text(f.dir / "ragged.csv", "1,2,3,4,5\n1,2,3,4\n1,2,3,4,5\n1,2,3,4,5\n");
  sc["image"] = "ragged.csv";
  CHECK_THAT(f.error_for(sc), Contains("ragged.csv") && Contains("line 2 has 4 cells"));
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
