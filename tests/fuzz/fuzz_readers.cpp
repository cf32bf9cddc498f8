// Fuzz target over the input readers (issue 11): the trace sidecar (JSON and YAML), CSV
// matrices, PNG/TIFF images and HDF5 files, each read through sw::read_trace exactly as the
// command line does. Any sw::Error is a correct answer; any other exception, a crash, a hang
// or a sanitizer report is a defect.
//
// The first byte of the input chooses the reader, the rest is the file:
//   0 sidecar NAME.json   1 sidecar NAME.yaml   2 CSV data   3 image data (PNG or TIFF by its
//   bytes)   4 HDF5 data   5 CSV text straight into parse_csv_matrix.
// Built two ways (tests/fuzz/CMakeLists.txt): with the seeded mutation loop of
// mutation_driver.cpp (every build, bounded run in ctest), or with libFuzzer
// (STREAKWRIGHT_LIBFUZZER=ON with clang; `make fuzz`).
#include <unistd.h>

#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

#include "io/csv.h"
#include "io/trace_reader.h"
#include "retrieval/core/error.h"

namespace {

namespace fs = std::filesystem;

const fs::path& work_dir() {
  static const fs::path d = [] {
    fs::path p = fs::temp_directory_path() / ("sw_fuzz_" + std::to_string(::getpid()));
    fs::create_directories(p);
    std::atexit([] {
      std::error_code ec;
      fs::remove_all(fs::temp_directory_path() / ("sw_fuzz_" + std::to_string(::getpid())), ec);
    });
    return p;
  }();
  return d;
}

void write(const fs::path& p, const char* data, std::size_t n) {
  std::ofstream(p, std::ios::binary | std::ios::trunc).write(data, static_cast<std::streamsize>(n));
}

/// A valid sidecar naming `image` (4 delays x 5 energies), so the data readers are reached.
const char* const kSidecar =
    "{\"streakwright\": 1, \"image\": \"%s\", \"layout\": \"delay_rows\", "
    "\"energy_eV\": {\"first\": 40, \"step\": 0.5, \"count\": 5}, "
    "\"delay_fs\": {\"first\": -1, \"step\": 0.5, \"count\": 4}}";

void read_with_sidecar(const std::string& image_name) {
  const std::string pattern = kSidecar;
  const std::size_t at = pattern.find("%s");
  std::ostringstream t;
  t << pattern.substr(0, at) << image_name << pattern.substr(at + 2);
  const std::string text = t.str();
  const fs::path sc = work_dir() / "data_case.json";
  write(sc, text.data(), text.size());
  (void)sw::read_trace(sc.string());
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size == 0) return 0;
  const char* body = reinterpret_cast<const char*>(data + 1);
  const std::size_t n = size - 1;
  try {
    switch (data[0] % 6) {
      case 0:
        write(work_dir() / "case.json", body, n);
        (void)sw::read_trace((work_dir() / "case.json").string());
        break;
      case 1:
        write(work_dir() / "case.yaml", body, n);
        (void)sw::read_trace((work_dir() / "case.yaml").string());
        break;
      case 2:
        write(work_dir() / "data.csv", body, n);
        read_with_sidecar("data.csv");
        break;
      case 3:
        write(work_dir() / "data.img", body, n);
        read_with_sidecar("data.img");
        break;
      case 4:
        write(work_dir() / "data.h5", body, n);
        read_with_sidecar("data.h5:/counts");
        break;
      default:
        (void)sw::parse_csv_matrix(std::string_view(body, n), "fuzz.csv");
        break;
    }
  } catch (const sw::Error&) {
    // A precise refusal is the expected outcome for most inputs.
  }
  return 0;
}
