// Reading scans from sidecar + data files (io/trace_reader.h): every image format, both layouts,
// both axis forms, YAML, unknown keys, unit conversions (delay stage, time of flight), HDF5, and
// inputs left unchanged. Files are written here by hand (cv::imwrite, text) so the reader is
// checked independently of io/trace_writer.
#include <catch2/catch.hpp>

#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <random>
#include <sstream>

#include <opencv2/core.hpp>
#include <opencv2/imgcodecs.hpp>

#ifdef STREAKWRIGHT_HAVE_HDF5
#include <H5Cpp.h>
#endif

#include "io/atomic_file.h"
#include "io/tof_calibration.h"
#include "io/trace_reader.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "tests/check_support.h"
#include "tests/test_support.h"

namespace fs = std::filesystem;
using sw::units::au_to_eV;
using sw::units::au_to_fs;

namespace {

using sw::test::TempDir;
using sw::test::write_text;

/// Distinct integer counts per pixel: 10 + 7 r + 3 c (no two neighbours equal).
cv::Mat pattern16(int rows, int cols) {
  cv::Mat m(rows, cols, CV_16UC1);
  for (int r = 0; r < rows; ++r)
    for (int c = 0; c < cols; ++c)
      m.at<std::uint16_t>(r, c) = static_cast<std::uint16_t>(10 + 7 * r + 3 * c);
  return m;
}

double pattern(int r, int c) { return 10 + 7 * r + 3 * c; }

}  // namespace

TEST_CASE("16-bit PNG, delay_rows, {first, step, count} axes", "[io][reader]") {
  TempDir dir;
  // 5 delays x 8 energies; PNG (ISO/IEC 15948) stores 16-bit grey losslessly.
  REQUIRE(cv::imwrite(dir / "scan.png", pattern16(5, 8)));
  write_text(dir / "scan.json", R"({"streakwright": 1, "image": "scan.png", "layout": "delay_rows",
    "energy_eV": {"first": 40.0, "step": 0.25, "count": 8},
    "delay_fs": {"first": -6.0, "step": 0.1, "count": 5},
    "gas": "Ne", "ir_wavelength_nm": 800.0, "kind": "streaking"})");
  std::vector<std::string> warnings;
  const sw::Trace t = sw::read_trace(dir / "scan.json", &warnings);
  CHECK(warnings.empty());
  REQUIRE(t.num_delays() == 5);
  REQUIRE(t.num_energies() == 8);
  // Axes: eV and fs converted to atomic units and back (CODATA 2018 via units.h).
  CHECK(au_to_eV(t.energy_au[0]) == Approx(40.0).epsilon(1e-12));
  CHECK(au_to_eV(t.energy_au[7]) == Approx(41.75).epsilon(1e-12));
  CHECK(au_to_fs(t.delay_au[0]) == Approx(-6.0).epsilon(1e-12));
  CHECK(au_to_fs(t.delay_au[4]) == Approx(-5.6).epsilon(1e-12));
  for (int r = 0; r < 5; ++r)
    for (int c = 0; c < 8; ++c) CHECK(t.counts(r, c) == pattern(r, c));  // lossless PNG
  CHECK(t.meta.gas == "Ne");
  CHECK(t.meta.ir_wavelength_nm == 800.0);
  CHECK(t.meta.kind == sw::TraceKind::kStreaking);
  CHECK(t.meta.source == dir / "scan.json");
  CHECK(t.meta.image == "scan.png");
  CHECK(t.meta.extra_json.empty());
}

TEST_CASE("energy_rows layout transposes; descending axes are flipped with the data",
          "[io][reader]") {
  TempDir dir;
  // Image rows = energies (6), columns = delays (4).
  REQUIRE(cv::imwrite(dir / "e.png", pattern16(6, 4)));
  write_text(dir / "e.json", R"({"streakwright": 1, "image": "e.png", "layout": "energy_rows",
    "energy_eV": {"first": 50.0, "step": -0.5, "count": 6},
    "delay_fs": [3.0, 2.0, 1.5, -1.0]})");
  const sw::Trace t = sw::read_trace(dir / "e.json");
  REQUIRE(t.num_energies() == 6);
  REQUIRE(t.num_delays() == 4);
  // Ascending after the flip: 47.5 ... 50 eV and -1 ... 3 fs.
  CHECK(au_to_eV(t.energy_au.front()) == Approx(47.5));
  CHECK(au_to_eV(t.energy_au.back()) == Approx(50.0));
  CHECK(au_to_fs(t.delay_au.front()) == Approx(-1.0));
  CHECK(au_to_fs(t.delay_au[2]) == Approx(2.0));
  CHECK(au_to_fs(t.delay_au.back()) == Approx(3.0));
  // counts(delay i, energy j) follows its axis values: image (row = energy index er,
  // column = delay index dc) with er = 5 - j and dc = 3 - i after both flips.
  for (int i = 0; i < 4; ++i)
    for (int j = 0; j < 6; ++j) CHECK(t.counts(i, j) == pattern(5 - j, 3 - i));
}

TEST_CASE("TIFF: 16-bit, 32-bit integer and 32-bit float samples; scale applied", "[io][reader]") {
  TempDir dir;
  // TIFF 6.0 with SampleFormat (1 = unsigned, 2 = signed integer, 3 = IEEE float).
  cv::Mat f(3, 4, CV_32FC1), i32(3, 4, CV_32SC1);
  for (int r = 0; r < 3; ++r)
    for (int c = 0; c < 4; ++c) {
      f.at<float>(r, c) = 0.5f + 0.25f * static_cast<float>(r * 4 + c);
      i32.at<int>(r, c) = 100000 + r * 4 + c;  // beyond 16 bits
    }
  REQUIRE(cv::imwrite(dir / "f.tiff", f));
  REQUIRE(cv::imwrite(dir / "i.tif", i32));
  REQUIRE(cv::imwrite(dir / "u.tiff", pattern16(3, 4)));
  const std::string axes = R"("energy_eV": {"first": 10, "step": 1, "count": 4},
      "delay_fs": {"first": 0, "step": 0.2, "count": 3})";
  write_text(dir / "f.json",
             R"({"streakwright": 1, "image": "f.tiff", "layout": "delay_rows", "scale": 4.0, )" +
                 axes + "}");
  write_text(dir / "i.json",
             R"({"streakwright": 1, "image": "i.tif", "layout": "delay_rows", )" + axes + "}");
  write_text(dir / "u.json",
             R"({"streakwright": 1, "image": "u.tiff", "layout": "delay_rows", )" + axes + "}");
  const sw::Trace tf = sw::read_trace(dir / "f.json");
  const sw::Trace ti = sw::read_trace(dir / "i.json");
  const sw::Trace tu = sw::read_trace(dir / "u.json");
  CHECK(tf.meta.scale == 4.0);
  for (int r = 0; r < 3; ++r)
    for (int c = 0; c < 4; ++c) {
      // "scale" = counts per image unit (file contract): counts = 4 * image value.
      CHECK(tf.counts(r, c) == 4.0 * (0.5 + 0.25 * (r * 4 + c)));
      CHECK(ti.counts(r, c) == 100000 + r * 4 + c);
      CHECK(tu.counts(r, c) == pattern(r, c));
    }
}

TEST_CASE("8-bit image accepted with a warning", "[io][reader]") {
  TempDir dir;
  cv::Mat m(2, 3, CV_8UC1, cv::Scalar(200));
  REQUIRE(cv::imwrite(dir / "b.png", m));
  write_text(dir / "b.json", R"({"streakwright": 1, "image": "b.png", "layout": "delay_rows",
    "energy_eV": [1, 2, 3], "delay_fs": [0, 1]})");
  std::vector<std::string> warnings;
  const sw::Trace t = sw::read_trace(dir / "b.json", &warnings);
  CHECK(t.counts(1, 2) == 200);
  REQUIRE(warnings.size() == 1);
  CHECK_THAT(warnings[0], Catch::Contains("8 bits"));
}

TEST_CASE("CSV matrices: comma, semicolon with decimal comma, white space, header line",
          "[io][reader]") {
  TempDir dir;
  // RFC 4180: comma separated, optional header line, CRLF line ends, quoted fields.
  write_text(dir / "c.csv", "\"e1\",\"e2\",\"e3\"\r\n1,2,3\r\n4,5,6.5\r\n");
  // Spreadsheet export with ';' separator and decimal comma (common practice in EU locales).
  write_text(dir / "s.csv", "a;b;c\n1;2;3\n4;5;6,5\n");
  // White-space separated, '#' comment line (common practice for lab text exports).
  write_text(dir / "w.txt", "# exported\n1 2\t3\n  4   5 6.5  \n\n");
  for (const char* name : {"c.csv", "s.csv", "w.txt"}) {
    write_text(dir / "m.json",
               std::string(R"({"streakwright": 1, "image": ")") + name +
                   R"(", "layout": "delay_rows", "energy_eV": [1, 2, 3], "delay_fs": [0, 1]})");
    const sw::Trace t = sw::read_trace(dir / "m.json");
    INFO(name);
    REQUIRE(t.counts.rows() == 2);
    REQUIRE(t.counts.cols() == 3);
    CHECK(t.counts(0, 0) == 1);
    CHECK(t.counts(0, 2) == 3);
    CHECK(t.counts(1, 2) == 6.5);
  }
}

TEST_CASE("YAML sidecar, with and without the %YAML directive", "[io][reader]") {
  TempDir dir;
  REQUIRE(cv::imwrite(dir / "y.png", pattern16(3, 4)));
  const std::string body =
      "streakwright: 1\nimage: y.png\nlayout: delay_rows\n"
      "energy_eV: {first: 20.0, step: 0.5, count: 4}\n"
      "delay_fs: [-1.0, 0.0, 1.0]\n"
      "kind: rabbitt\ngas: Ar\nbackground: auto\nnotes: \"beamtime 3, run 7\"\n"
      "operator: Jo\n";
  write_text(dir / "a.yaml", body);
  write_text(dir / "b.yml", "%YAML:1.0\n---\n" + body);
  for (const char* name : {"a.yaml", "b.yml"}) {
    INFO(name);
    const sw::Trace t = sw::read_trace(dir / name);
    CHECK(t.meta.kind == sw::TraceKind::kRabbitt);
    CHECK(t.meta.gas == "Ar");
    CHECK(t.meta.background_auto);
    CHECK(t.meta.notes == "beamtime 3, run 7");
    CHECK(au_to_eV(t.energy_au[3]) == Approx(21.5));
    CHECK(t.counts(2, 3) == pattern(2, 3));
    REQUIRE(t.meta.extra_json.count("operator") == 1);
    CHECK(t.meta.extra_json.at("operator") == "\"Jo\"");
  }
}

TEST_CASE("unknown keys are kept as JSON text; optional keys parsed", "[io][reader]") {
  TempDir dir;
  REQUIRE(cv::imwrite(dir / "x.png", pattern16(2, 3)));
  write_text(dir / "x.json", R"({"streakwright": 1, "image": "x.png", "layout": "delay_rows",
    "energy_eV": [1, 2, 3], "delay_fs": [0, 1],
    "background": 2.5, "energy_resolution_eV": 0.3, "notes": "n",
    "operator": "A. N. Other", "run": {"id": 17, "tags": ["a", "b"], "ok": true, "none": null},
    "attenuation": 0.125})");
  const sw::Trace t = sw::read_trace(dir / "x.json");
  CHECK(*t.meta.background == 2.5);
  CHECK(*t.meta.energy_resolution_eV == 0.3);
  REQUIRE(t.meta.extra_json.size() == 3);
  // Values are JSON text (RFC 8259); nested objects, booleans and null survive.
  CHECK(t.meta.extra_json.at("operator") == "\"A. N. Other\"");
  CHECK(t.meta.extra_json.at("run") == R"({"id":17,"none":null,"ok":true,"tags":["a","b"]})");
  CHECK(t.meta.extra_json.at("attenuation") == "0.125");
}

TEST_CASE("delay_um stage travel converts with 2 x / c = 6.671 fs per um", "[io][reader]") {
  TempDir dir;
  REQUIRE(cv::imwrite(dir / "d.png", pattern16(4, 3)));
  write_text(dir / "d.json", R"({"streakwright": 1, "image": "d.png", "layout": "delay_rows",
    "energy_eV": [1, 2, 3], "delay_um": {"first": -1.5, "step": 0.75, "count": 4}})");
  const sw::Trace t = sw::read_trace(dir / "d.json");
  // c = 299 792 458 m/s exactly (SI 2019); retro-reflector: path change 2x, dt = 2x/c.
  const double fs_per_um = 2.0 * 1e-6 / 299792458.0 * 1e15;
  CHECK(fs_per_um == Approx(6.671).margin(5e-4));  // textbook value 6.671 fs/um (from memory)
  for (int i = 0; i < 4; ++i)
    CHECK(au_to_fs(t.delay_au[i]) == Approx((-1.5 + 0.75 * i) * fs_per_um).epsilon(1e-12));
}

TEST_CASE("time-of-flight axis: energy of a known flight time, counts conserved, t^3 Jacobian",
          "[io][reader][tof]") {
  // Field-free drift: E = (m_e/2)(L/(t - t0))^2 (non-relativistic kinematics); m_e and e from
  // CODATA 2018 (m_e = 9.1093837015e-31 kg, e = 1.602176634e-19 C exact) written out here.
  const double me = 9.1093837015e-31, e = 1.602176634e-19;
  sw::TofCalibration cal;
  cal.length_m = 0.9;
  cal.t0_ns = 12.0;
  cal.energy_offset_eV = 1.5;
  const double E_peak = 25.0;  // eV
  const double t_peak = cal.t0_ns + 1e9 * cal.length_m / std::sqrt(2.0 * (E_peak - 1.5) * e / me);
  CHECK(sw::tof_to_energy_eV(t_peak, cal) == Approx(E_peak).epsilon(1e-12));

  // 1500 TOF bins of 0.1 ns from 250 ns; a Gaussian peak of 0.3 ns rms at t_peak plus a flat floor.
  const int n = 1500;
  std::vector<double> tof(n);
  Eigen::MatrixXd counts(2, n);
  for (int k = 0; k < n; ++k) {
    tof[k] = 250.0 + 0.1 * k;
    const double x = (tof[k] - t_peak) / 0.3;
    counts(0, k) = 1000.0 * std::exp(-0.5 * x * x);
    counts(1, k) = 5.0;  // flat in time
  }
  REQUIRE(t_peak > tof.front());
  REQUIRE(t_peak < tof.back());
  const sw::TofConversion conv = sw::tof_to_energy(counts, tof, cal, "test");
  // Count conservation (DESIGN.md pitfall "Resampling must conserve counts").
  CHECK(conv.counts.row(0).sum() == Approx(counts.row(0).sum()).epsilon(1e-10));
  CHECK(conv.counts.row(1).sum() == Approx(counts.row(1).sum()).epsilon(1e-10));
  CHECK(conv.fraction_outside < 1e-12);
  // The peak's energy centroid sits at E(t_peak) (narrow peak: curvature shift << bin).
  double s = 0, sw_ = 0;
  for (std::size_t j = 0; j < conv.energy_eV.size(); ++j) {
    s += conv.counts(0, j);
    sw_ += conv.counts(0, j) * conv.energy_eV[j];
  }
  const double step = conv.energy_eV[1] - conv.energy_eV[0];
  CHECK(sw_ / s == Approx(E_peak).margin(step));
  // Flat counts per time bin -> counts per energy bin proportional to |dt/dE| ~ (E - E_off)^(-3/2)
  // (t ~ (E - E_off)^(-1/2)); compare two energies far from the window edges.
  auto at = [&](double E) {
    REQUIRE(E > conv.energy_eV.front());
    REQUIRE(E < conv.energy_eV.back());
    const auto j = static_cast<std::size_t>((E - conv.energy_eV[0]) / step + 0.5);
    return std::pair<double, double>(conv.energy_eV[j], conv.counts(1, j));
  };
  const auto [E1, c1] = at(18.0);
  const auto [E2, c2] = at(36.0);
  CHECK(c1 / c2 == Approx(std::pow((E2 - 1.5) / (E1 - 1.5), 1.5)).epsilon(0.02));
  // Jacobian formula against a central finite difference of E(t).
  const double h = 1e-4;
  CHECK(sw::tof_energy_jacobian_eV_per_ns(300.0, cal) ==
        Approx((sw::tof_to_energy_eV(300.0 - h, cal) - sw::tof_to_energy_eV(300.0 + h, cal)) /
               (2 * h))
            .epsilon(1e-7));
}

TEST_CASE("time-of-flight sidecar is converted on reading", "[io][reader][tof]") {
  TempDir dir;
  // Image rows = delays (3), columns = 400 TOF bins (descending time order, as some TDCs write).
  cv::Mat img(3, 400, CV_16UC1, cv::Scalar(7));
  REQUIRE(cv::imwrite(dir / "t.png", img));
  write_text(dir / "t.json", R"({"streakwright": 1, "image": "t.png", "layout": "delay_rows",
    "tof_ns": {"first": 600.0, "step": -0.5, "count": 400},
    "calibration": {"length_m": 1.0, "t0_ns": 0.0, "energy_offset_eV": 0.0, "energy_count": 200},
    "delay_fs": [0, 1, 2]})");
  const sw::Trace t = sw::read_trace(dir / "t.json");
  REQUIRE(t.num_energies() == 200);
  CHECK(t.counts.sum() == Approx(3 * 400 * 7.0).epsilon(1e-10));
  // Window edges: E at the outer time-bin edges 400.25 ns and 600.25 ns (1 m drift), 200 bins.
  const double me = 9.1093837015e-31, e = 1.602176634e-19;  // CODATA 2018
  auto E = [&](double t_ns) {
    const double v = 1.0 / (t_ns * 1e-9);
    return 0.5 * me * v * v / e;
  };
  const double step = (E(400.25) - E(600.25)) / 200;
  CHECK(au_to_eV(t.energy_au.front()) == Approx(E(600.25) + 0.5 * step).epsilon(1e-9));
  CHECK(au_to_eV(t.energy_au.back()) == Approx(E(400.25) - 0.5 * step).epsilon(1e-9));
}

TEST_CASE("reading leaves the input files unchanged", "[io][reader]") {
  TempDir dir;
  REQUIRE(cv::imwrite(dir / "h.png", pattern16(3, 4)));
  write_text(dir / "h.json", R"({"streakwright": 1, "image": "h.png", "layout": "delay_rows",
    "energy_eV": [1, 2, 3, 4], "delay_fs": [3, 2, 1], "extra": [1, 2]})");
  auto fingerprint = [&](const std::string& p) {
    return std::make_pair(sw::read_file_bytes(p), fs::last_write_time(p));
  };
  const auto png_before = fingerprint(dir / "h.png"), json_before = fingerprint(dir / "h.json");
  const auto listing = [&] {
    std::vector<std::string> names;
    for (const auto& entry : fs::directory_iterator(dir.path))
      names.push_back(entry.path().filename().string());
    std::sort(names.begin(), names.end());
    return names;
  };
  const auto before = listing();
  (void)sw::read_trace(dir / "h.json");
  CHECK(fingerprint(dir / "h.png") == png_before);
  CHECK(fingerprint(dir / "h.json") == json_before);
  CHECK(listing() == before);  // nothing created beside the inputs
}

#ifdef STREAKWRIGHT_HAVE_HDF5
TEST_CASE("HDF5 dataset named as FILE.h5:/group/dataset", "[io][reader][hdf5]") {
  TempDir dir;
  const int rows = 4, cols = 6;
  std::vector<double> data(rows * cols);
  for (int r = 0; r < rows; ++r)
    for (int c = 0; c < cols; ++c) data[r * cols + c] = 0.5 + r * 10 + c;
  {
    // Written with the HDF5 C++ API (The HDF Group): row-major 2-D dataset of doubles.
    H5::H5File f(dir / "run_17.h5", H5F_ACC_TRUNC);
    H5::Group g = f.createGroup("/scan");
    hsize_t dims[2] = {rows, cols};
    H5::DataSpace space(2, dims);
    H5::DataSet ds = g.createDataSet("counts", H5::PredType::NATIVE_DOUBLE, space);
    ds.write(data.data(), H5::PredType::NATIVE_DOUBLE);
    std::vector<std::uint16_t> raw(rows * cols, 4000);
    raw[5] = 65535;
    g.createDataSet("raw", H5::PredType::NATIVE_UINT16, space)
        .write(raw.data(), H5::PredType::NATIVE_UINT16);
    hsize_t dims1[1] = {3};
    H5::DataSpace space1(1, dims1);
    g.createDataSet("line", H5::PredType::NATIVE_INT, space1);
  }
  write_text(dir / "h5.json", R"({"streakwright": 1, "image": "run_17.h5:/scan/counts",
    "layout": "delay_rows", "energy_eV": {"first": 1, "step": 1, "count": 6},
    "delay_fs": {"first": 0, "step": 0.5, "count": 4}})");
  const sw::Trace t = sw::read_trace(dir / "h5.json");
  REQUIRE(t.counts.rows() == rows);
  REQUIRE(t.counts.cols() == cols);
  for (int r = 0; r < rows; ++r)
    for (int c = 0; c < cols; ++c) CHECK(t.counts(r, c) == data[r * cols + c]);

  // Integer datasets are converted by HDF5 to double on reading.
  write_text(dir / "raw.json", R"({"streakwright": 1, "image": "run_17.h5:/scan/raw",
    "layout": "energy_rows", "energy_eV": [1, 2, 3, 4], "delay_fs": [0, 1, 2, 3, 4, 5]})");
  const sw::Trace raw = sw::read_trace(dir / "raw.json");
  CHECK(raw.counts(5, 0) == 65535);  // file row 0 (energy 0), column 5 (delay 5): transposed
  CHECK(raw.counts(0, 0) == 4000);

  auto message = [&](const std::string& image) {
    write_text(
        dir / "bad.json",
        R"({"streakwright": 1, "image": ")" + image +
            R"(", "layout": "delay_rows", "energy_eV": [1,2,3,4,5,6], "delay_fs": [0,1,2,3]})");
    return sw::test::error_message([&] { (void)sw::read_trace(dir / "bad.json"); },
                                   sw::ErrorKind::kInput);
  };
  CHECK_THAT(message("run_17.h5:/scan/missing"), Catch::Contains("/scan/missing") &&
                                                     Catch::Contains("does not exist") &&
                                                     Catch::Contains("bad.json"));
  CHECK_THAT(message("run_17.h5:/scan/line"),
             Catch::Contains("1 dimensions") && Catch::Contains("2-D"));
  CHECK_THAT(message("run_17.h5:/scan"), Catch::Contains("group"));
  CHECK_THAT(message("nothere.h5:/scan/counts"),
             Catch::Contains("nothere.h5") && Catch::Contains("does not exist"));
}
#endif

TEST_CASE("a damaged HDF5 file that crashes the HDF5 library is an input error",
          "[io][reader][hdf5]") {
  // tests/fuzz/corpus/hdf5_crash_h5lexists: a mutated HDF5 file (after the fuzz harness's
  // selector byte) on which H5Lexists reads out of bounds inside libhdf5 (Debian 1.10). The
  // reader runs HDF5 in a child process: this process gets an input error naming the file.
  TempDir dir;
  std::ifstream in(std::string(STREAKWRIGHT_SOURCE_DIR) + "/tests/fuzz/corpus/hdf5_crash_h5lexists",
                   std::ios::binary);
  REQUIRE(in);
  std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  REQUIRE(bytes.size() > 1);
  write_text(dir / "damaged.h5", bytes.substr(1));
  write_text(dir / "d.json", R"({"streakwright": 1, "image": "damaged.h5:/scan/counts",
    "layout": "delay_rows", "energy_eV": [1,2,3,4,5,6], "delay_fs": [0,1,2,3]})");
  try {
    (void)sw::read_trace(dir / "d.json");
    FAIL("a damaged HDF5 file was read");
  } catch (const sw::Error& e) {
    CHECK(e.kind() == sw::ErrorKind::kInput);
    CHECK(std::string(e.what()).find("damaged.h5") != std::string::npos);
  }
}
