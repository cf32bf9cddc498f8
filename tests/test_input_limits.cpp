// Hostile and mistaken inputs at the reader (issue 11, defects 2-7 and 10): every case must end
// in sw::Error(kInput) with a message naming the file and the limit, quickly, without crash,
// hang, unbounded allocation, or file contents and control bytes in the message.
#include <catch2/catch.hpp>

#include <sys/stat.h>
#include <unistd.h>

#include <chrono>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <future>

#include <nlohmann/json.hpp>
#include <opencv2/core.hpp>
#include <opencv2/imgcodecs.hpp>

#include "io/csv.h"
#include "io/input_guard.h"
#include "io/trace_reader.h"
#include "retrieval/core/error.h"
#include "tests/test_support.h"

namespace fs = std::filesystem;
using Catch::Contains;
using nlohmann::json;
using sw::test::TempDir;
using sw::test::write_text;

namespace {

/// A valid 4 delays x 5 energies scan (good.png) and helpers to break it.
struct Scan {
  TempDir dir{"limits"};
  json sidecar = {{"streakwright", 1},
                  {"image", "good.png"},
                  {"layout", "delay_rows"},
                  {"energy_eV", {{"first", 40.0}, {"step", 0.5}, {"count", 5}}},
                  {"delay_fs", {{"first", -1.0}, {"step", 0.5}, {"count", 4}}},
                  {"gas", "Ne"},
                  {"ir_wavelength_nm", 800.0}};
  Scan() {
    cv::Mat m(4, 5, CV_16UC1, cv::Scalar(100));
    REQUIRE(cv::imwrite(dir / "good.png", m));
  }
  std::string write(const json& sc, const std::string& name = "case.json") {
    write_text(dir / name, sc.dump());
    return dir / name;
  }
  /// Writes the sidecar's text with `members` (raw JSON text) appended inside its braces.
  std::string write_appended(const std::string& members, const std::string& name) {
    std::string t = sidecar.dump();
    t.pop_back();
    write_text(dir / name, t + members + "}");
    return dir / name;
  }
};

/// The kInput message of reading `path` (fails the test on anything else), within 10 s.
std::string input_error(const std::string& path, const sw::TraceReadPolicy& policy = {}) {
  auto f = std::async(std::launch::async, [&]() -> std::string {
    try {
      (void)sw::read_trace(path, nullptr, {}, policy);
    } catch (const sw::Error& e) {
      if (e.kind() != sw::ErrorKind::kInput) return std::string("WRONG KIND: ") + e.what();
      return e.what();
    } catch (const std::exception& e) {
      return std::string("NOT sw::Error: ") + e.what();
    }
    return "ACCEPTED";
  });
  // A hang is the defect: common practice, an interactive tool answers within seconds.
  REQUIRE(f.wait_for(std::chrono::seconds(10)) == std::future_status::ready);
  const std::string m = f.get();
  INFO(m);
  CHECK(m.rfind("WRONG KIND", 0) != 0);
  CHECK(m.rfind("NOT sw::Error", 0) != 0);
  CHECK(m != "ACCEPTED");
  return m;
}

void put_u16(std::string& s, std::uint16_t v) {
  s += static_cast<char>(v & 0xff);
  s += static_cast<char>(v >> 8);
}
void put_u32(std::string& s, std::uint32_t v) {
  for (int k = 0; k < 4; ++k) s += static_cast<char>((v >> (8 * k)) & 0xff);
}

/// A little-endian one-strip grey TIFF (TIFF 6.0 baseline tags) with `bits` per sample of
/// SampleFormat `format`, filled with 1s.
std::string tiff_bytes(int width, int height, int bits, int format) {
  const std::uint32_t data_bytes = static_cast<std::uint32_t>(width * height * bits / 8);
  std::string s = "II";
  put_u16(s, 42);
  put_u32(s, 8);
  const int n = 10;
  const std::uint32_t data_offset = 8 + 2 + 12 * n + 4;
  put_u16(s, n);
  auto entry = [&](std::uint16_t tag, std::uint16_t type, std::uint32_t value) {
    put_u16(s, tag);
    put_u16(s, type);
    put_u32(s, 1);
    if (type == 3) {
      put_u16(s, static_cast<std::uint16_t>(value));
      put_u16(s, 0);
    } else {
      put_u32(s, value);
    }
  };
  entry(256, 4, static_cast<std::uint32_t>(width));
  entry(257, 4, static_cast<std::uint32_t>(height));
  entry(258, 3, static_cast<std::uint32_t>(bits));
  entry(259, 3, 1);  // no compression
  entry(262, 3, 1);  // black is zero
  entry(273, 4, data_offset);
  entry(277, 3, 1);
  entry(278, 4, static_cast<std::uint32_t>(height));
  entry(279, 4, data_bytes);
  entry(339, 3, static_cast<std::uint32_t>(format));
  put_u32(s, 0);
  for (std::uint32_t i = 0; i < data_bytes; ++i)
    s += static_cast<char>((i % (bits / 8)) == 0 ? 1 : 0);
  return s;
}

}  // namespace

TEST_CASE("a FIFO as data file or sidecar is refused by type, without blocking", "[io][limits]") {
  // Defect 3 (hangs). POSIX: open(2) of a FIFO for reading blocks until a writer appears.
  Scan s;
  REQUIRE(::mkfifo((s.dir / "pipe.png").c_str(), 0600) == 0);
  REQUIRE(::mkfifo((s.dir / "pipe.json").c_str(), 0600) == 0);
  json sc = s.sidecar;
  sc["image"] = "pipe.png";
  CHECK_THAT(input_error(s.write(sc)), Contains("FIFO") && Contains("only regular files"));
  CHECK_THAT(input_error(s.dir / "pipe.json"), Contains("FIFO"));
}

TEST_CASE("a symbolic link to /dev/zero is refused by type, not read", "[io][limits]") {
  // Defect 3 (memory exhaustion): /dev/zero is a character device that never ends (POSIX).
  Scan s;
  fs::create_symlink("/dev/zero", s.dir / "zero.png");
  json sc = s.sidecar;
  sc["image"] = "zero.png";
  sw::TraceReadPolicy anywhere;
  anywhere.allow_outside_data = true;  // even when outside paths are allowed
  CHECK_THAT(input_error(s.write(sc), anywhere), Contains("character device"));
}

TEST_CASE("deeply nested sidecars are refused before any parser recurses", "[io][limits]") {
  // Defect 2 (stack overflow): 100000 levels overflow any recursive parser's 8 MB stack.
  Scan s;
  const int n = 100000;
  CHECK_THAT(input_error(s.write_appended(",\"deep\":" + std::string(n, '[') + std::string(n, ']'),
                                          "valid_deep.json")),
             Contains("nests deeper than 64"));
  write_text(s.dir / "invalid_deep.json", "{\"streakwright\": 1, \"x\": " + std::string(n, '{'));
  CHECK_THAT(input_error(s.dir / "invalid_deep.json"), Contains("nests deeper than 64"));
  write_text(s.dir / "deep.yaml", "streakwright: 1\nx: " + std::string(n, '['));
  CHECK_THAT(input_error(s.dir / "deep.yaml"), Contains("nests deeper than 64"));
  std::string block = "streakwright: 1\n";
  for (int i = 0; i < 200; ++i) block += std::string(static_cast<std::size_t>(i), ' ') + "k:\n";
  write_text(s.dir / "deep_block.yaml", block);
  CHECK_THAT(input_error(s.dir / "deep_block.yaml"), Contains("nests deeper than 64"));
}

TEST_CASE("declared sizes and physical ranges are checked before allocation", "[io][limits]") {
  // Defect 4 (unbounded resources). Limits: docs/file_formats.md (project contract).
  Scan s;
  json a = s.sidecar;
  a["delay_fs"]["count"] = 1e7;
  CHECK_THAT(input_error(s.write(a)), Contains("delay_fs.count") && Contains("limit of 65536"));
  json b = s.sidecar;
  b["delay_fs"]["step"] = 1e4;  // 4 delays spanning 30 ps
  CHECK_THAT(input_error(s.write(b)), Contains("delay_fs") && Contains("spans 30000 fs"));
  json c = s.sidecar;
  c["ir_wavelength_nm"] = 1e-6;
  CHECK_THAT(input_error(s.write(c)), Contains("ir_wavelength_nm") && Contains("[100, 20000] nm"));
  json c2 = s.sidecar;
  c2["ir_wavelength_nm"] = 1e6;  // 1 mm
  CHECK_THAT(input_error(s.write(c2)), Contains("ir_wavelength_nm"));
  json d = s.sidecar;
  d.erase("energy_eV");
  d["tof_ns"] = {{"first", 100.0}, {"step", 1.0}, {"count", 5}};
  d["calibration"] = {{"length_m", 1.0}, {"t0_ns", 0.0}, {"energy_count", 1e7}};
  CHECK_THAT(input_error(s.write(d)), Contains("calibration.energy_count") && Contains("65536"));
  json e = s.sidecar;
  e["energy_eV"]["step"] = 1e-9;
  CHECK_THAT(input_error(s.write(e)), Contains("energy_eV") && Contains("at least"));
  // A 1 MiB sidecar holds ~20000 line entries; the pairwise line analysis must never see them
  // (5000 here, to stay below the sidecar size limit).
  json f = s.sidecar;
  f["lines"] = json::array();
  for (int i = 0; i < 5000; ++i) {
    std::string name(1, 'l');  // built by appending: GCC 12 warns falsely on "l" + std::string
    name += std::to_string(i);
    f["lines"].push_back({{"name", name}, {"ionization_energy_eV", 20.0}});
  }
  CHECK_THAT(input_error(s.write(f)), Contains("lines") && Contains("limit of 16"));
}

TEST_CASE("image dimensions come from the header, before decoding", "[io][limits]") {
  // Defect 4: a 20000 x 20000 16-bit PNG would decode to 800 MB. PNG IHDR layout: ISO/IEC
  // 15948 section 11.2.2 (width, height as 4-byte big-endian after the chunk type).
  Scan s;
  std::string png = "\x89PNG\r\n\x1a\n";
  png += std::string("\0\0\0\x0d", 4) + "IHDR";
  for (std::uint32_t v : {20000u, 20000u})
    for (int k = 3; k >= 0; --k) png += static_cast<char>((v >> (8 * k)) & 0xff);
  png += std::string("\x10\0\0\0\0", 5) + std::string(4, '\0');  // 16-bit grey, CRC unchecked
  write_text(s.dir / "huge.png", png);
  json sc = s.sidecar;
  sc["image"] = "huge.png";
  CHECK_THAT(input_error(s.write(sc)), Contains("20000 x 20000") && Contains("not decoded"));
}

TEST_CASE("data paths stay inside the sidecar's tree and outside files are never quoted",
          "[io][limits]") {
  // Defect 5 (leaks). The secret is a line of a file outside the scan's folder.
  TempDir outer("outer");
  write_text(outer / "secret.csv", "1,2,3,4,5\nroot:x:0:0:secret-line\n");
  const fs::path scan_dir = outer.path / "scan";
  fs::create_directories(scan_dir);
  json sc = {{"streakwright", 1},
             {"layout", "delay_rows"},
             {"energy_eV", {{"first", 40.0}, {"step", 0.5}, {"count", 5}}},
             {"delay_fs", {{"first", -1.0}, {"step", 0.5}, {"count", 4}}}};
  auto sidecar_with = [&](const std::string& image) {
    json j = sc;
    j["image"] = image;
    write_text((scan_dir / "s.json").string(), j.dump());
    return (scan_dir / "s.json").string();
  };
  for (const std::string& image : {std::string("../secret.csv"), outer / "secret.csv"}) {
    const std::string m = input_error(sidecar_with(image));
    CHECK_THAT(m,
               Contains("outside the sidecar's folder tree") && Contains("--allow-outside-data"));
    CHECK_THAT(m, !Contains("secret-line"));
  }
  fs::create_symlink(outer.path / "secret.csv", scan_dir / "link.csv");
  CHECK_THAT(input_error(sidecar_with("link.csv")),
             Contains("outside") && !Contains("secret-line"));
  // Allowed explicitly: read, but the offending cell of an outside file is still not quoted.
  sw::TraceReadPolicy anywhere;
  anywhere.allow_outside_data = true;
  const std::string m = input_error(sidecar_with("../secret.csv"), anywhere);
  CHECK_THAT(m, Contains("not a number") && !Contains("secret-line") && !Contains("root:x"));
}

TEST_CASE("control bytes of a CSV cell are escaped and the excerpt is short", "[io][limits]") {
  // Defect 5: ESC, CR and NUL must not reach a terminal (ECMA-48 control functions).
  const std::string cell = std::string("\x1b[2J\r\0evil", 10) + std::string(200, 'A');
  try {
    (void)sw::parse_csv_matrix("1,2\n3," + cell + "\n", "cells.csv");
    FAIL("accepted");
  } catch (const sw::Error& e) {
    const std::string m = e.what();
    CHECK_THAT(m, Contains("\\x1b[2J\\x0d\\x00evil") && Contains("..."));
    for (const char c : m) CHECK((static_cast<unsigned char>(c) >= 0x20 && c != 0x7f));
    CHECK(m.find(std::string(100, 'A')) == std::string::npos);
  }
}

TEST_CASE("number overflow and non-UTF-8 file names are input errors (exit 3)", "[io][limits]") {
  // Defect 6: these gave exit 1 ("internal error"). RFC 8259 section 6: numbers beyond the
  // implementation's range may be rejected.
  Scan s;
  CHECK_THAT(input_error(s.write_appended(",\"scale\": 1e999", "overflow.json")),
             Contains("does not fit a double"));
  const std::string bad_name = s.dir / std::string("scan\xff\xfe.json");
  write_text(bad_name, s.sidecar.dump());
  CHECK_THAT(input_error(bad_name), Contains("not valid UTF-8") && Contains("\\xff\\xfe"));
}

TEST_CASE("extreme counts and scale are refused before they become NaN or infinity",
          "[io][limits]") {
  // Defect 7: squares of 1e300 overflow and 1e-300 * 1e-300 underflow (IEEE 754 binary64).
  Scan s;
  json a = s.sidecar;
  a["scale"] = 1e-300;
  CHECK_THAT(input_error(s.write(a)), Contains("scale"));
  write_text(s.dir / "big.csv", "1e300,1,1,1,1\n1,1,1,1,1\n1,1,1,1,1\n1,1,1,1,1\n");
  json b = s.sidecar;
  b["image"] = "big.csv";
  CHECK_THAT(input_error(s.write(b)), Contains("largest count") && Contains("1e+15"));
  write_text(s.dir / "tiny.csv", "1e-200,0,0,0,0\n0,0,0,0,0\n0,0,0,0,0\n0,0,0,0,0\n");
  json c = s.sidecar;
  c["image"] = "tiny.csv";
  CHECK_THAT(input_error(s.write(c)), Contains("largest count"));
}

TEST_CASE("duplicate keys are an error in JSON and YAML sidecars", "[io][limits]") {
  // Defect 10. RFC 8259 section 4: names within an object SHOULD be unique; YAML 1.2 section
  // 3.2.1.1: mapping keys MUST be unique.
  Scan s;
  CHECK_THAT(input_error(s.write_appended(",\"gas\": \"Ar\"", "dup.json")),
             Contains("'gas' appears twice"));
  write_text(s.dir / "dup.yaml",
             "streakwright: 1\nimage: good.png\nlayout: delay_rows\nlayout: energy_rows\n");
  CHECK_THAT(input_error(s.dir / "dup.yaml"), Contains("'layout' appears twice"));
}

TEST_CASE("YAML syntax errors give the line of the file", "[io][limits]") {
  // Defect 10: the message had OpenCV's function name ("skipSpaces") instead of a position.
  Scan s;
  write_text(s.dir / "bad.yaml", "streakwright: 1\nimage: good.png\nlayout: [1,\n");
  CHECK_THAT(input_error(s.dir / "bad.yaml"), Contains("line 3:"));
}

TEST_CASE("a YAML mapping with an empty key is bad input, not a crash", "[io][limits]") {
  // Found by tests/fuzz (corpus/sidecar_yaml_empty_key): OpenCV 4.6's YAML parser throws
  // std::length_error on `{first: -1, step: 0.5, : 4}`; it ended the fuzz loop and gave exit 1
  // ("internal error") in the CLI.
  Scan s;
  write_text(s.dir / "empty_key.yaml",
             "streakwright: 1\nimage: good.png\nlayout: delay_rows\n"
             "delay_fs: {first: -1, step: 0.5, : 4}\n");
  CHECK_THAT(input_error(s.dir / "empty_key.yaml"), Contains("not valid YAML"));
}

TEST_CASE("unknown keys too deep or too large to echo are dropped with a warning", "[io][limits]") {
  // Defect 10: a deep unknown key made result.json unreadable for Python's json module, whose
  // default recursion limit is 1000 (Python documentation, sys.getrecursionlimit).
  Scan s;
  json sc = s.sidecar;
  json deep = 1;
  for (int i = 0; i < 40; ++i) deep = json::array({deep});
  sc["deep"] = deep;
  sc["big"] = std::string(40000, 'x');
  sc["fine"] = {{"operator", "A"}};
  std::vector<std::string> warnings;
  const sw::Trace t = sw::read_trace(s.write(sc), &warnings);
  CHECK(t.meta.extra_json.count("deep") == 0);
  CHECK(t.meta.extra_json.count("big") == 0);
  CHECK(t.meta.extra_json.at("fine") == "{\"operator\":\"A\"}");
  int dropped = 0;
  for (const auto& w : warnings) dropped += w.find("is not echoed") != std::string::npos;
  CHECK(dropped == 2);
}

TEST_CASE("unsigned 32-bit and multi-page TIFFs get accurate messages", "[io][limits]") {
  // Defect 10. TIFF 6.0 section 19: SampleFormat 1 = unsigned integer; a file may hold
  // several IFDs (pages).
  Scan s;
  write_text(s.dir / "u32.tif", tiff_bytes(5, 4, 32, 1));
  json a = s.sidecar;
  a["image"] = "u32.tif";
  CHECK_THAT(input_error(s.write(a)), Contains("unsigned 32-bit integer samples"));
  std::vector<cv::Mat> pages(3, cv::Mat(4, 5, CV_16UC1, cv::Scalar(7)));
  REQUIRE(cv::imwritemulti(s.dir / "stack.tif", pages));
  json b = s.sidecar;
  b["image"] = "stack.tif";
  CHECK_THAT(input_error(s.write(b)), Contains("3 pages") && Contains("one page"));
  // The header reader agrees with OpenCV on a valid single-page TIFF (cross-check).
  REQUIRE(cv::imwrite(s.dir / "one.tif", pages[0]));
  const sw::ImageHeader h = sw::read_image_header(s.dir / "one.tif");
  CHECK(h.width == 5);
  CHECK(h.height == 4);
  CHECK(h.bits_per_sample == 16);
  CHECK(h.pages == 1);
}

TEST_CASE("input guard helpers", "[io][limits]") {
  // UTF-8 validity: RFC 3629 section 3 (overlong forms and surrogates are invalid).
  CHECK(sw::is_valid_utf8("plain"));
  CHECK(
      sw::is_valid_utf8("\xce\xbc"
                        "m"));                     // U+03BC
  CHECK_FALSE(sw::is_valid_utf8("\xc0\xaf"));      // overlong '/'
  CHECK_FALSE(sw::is_valid_utf8("\xed\xa0\x80"));  // surrogate U+D800
  CHECK_FALSE(sw::is_valid_utf8("\xe2\x82"));      // truncated
  CHECK(sw::escape_excerpt("a\x1b"
                           "b",
                           10) == "a\\x1bb");
  // Nesting: common practice (count of open brackets outside strings).
  CHECK(sw::nesting_depth("{\"a\": [[1]], \"b\": \"[[[[\"}", false, 64) == 3);
  CHECK(sw::nesting_depth("a:\n  b:\n    c: 1\n", true, 64) == 3);
  TempDir d("guard");
  fs::create_directories(d.path / "in" / "sub");
  CHECK(sw::path_inside(d / "in/sub/x.png", d / "in"));
  CHECK_FALSE(sw::path_inside(d / "in/../x.png", d / "in"));
  CHECK_FALSE(sw::path_inside(d / "inner/x.png", d / "in"));  // a prefix is not a parent
}

TEST_CASE("a sidecar that is not UTF-8 is an input error with its line", "[io][limits]") {
  // RFC 8259 section 8.1 (JSON exchanged between systems is UTF-8); result.json echoes
  // sidecar text, so a Latin-1 byte would make the writer fail (exit 1).
  Scan s;
  write_text(s.dir / "latin1.yaml",
             "streakwright: 1\nimage: good.png\nlayout: delay_rows\nnotes: \"caf\xe9\"\n");
  CHECK_THAT(input_error(s.dir / "latin1.yaml"), Contains("not valid UTF-8") && Contains("line 4"));
}
