// A seeded mutation loop around LLVMFuzzerTestOneInput for builds without libFuzzer: every
// seed file of the corpus runs once as is, then mutated copies (bit flips, byte changes,
// insertions and deletions, repeated chunks, splices of two seeds, and tokens that stress the
// readers: brackets, huge numbers, control and non-UTF-8 bytes) run until the time budget is
// spent. Deterministic for a given seed. Usage: fuzz_readers_loop CORPUS_DIR SECONDS [SEED]
// Exit 0 when no input crashed (a crash ends the process; the input is then in
// $TMPDIR/sw_fuzz_last_input for reproduction).
#include <algorithm>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "tests/program_support.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size);

namespace {

namespace fs = std::filesystem;

std::string slurp(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

const std::vector<std::string>& tokens() {
  static const std::vector<std::string> t = {
      "[",          "]",    "{",     "}",        "[[[[[[[[", "{\"a\":",     "1e999",
      "-1e308",     "nan",  "inf",   "0",        "-0",       "65536",       "1e7",
      "4294967295", "\"",   "\\",    ":",        ",",        "\n",          "- ",
      "  ",         "\x00", "\x1b",  "\xff\xfe", "\xc0\xaf", "%YAML:1.0\n", "&a [*a]",
      "count",      "step", "first", "image",    "tof_ns",   "calibration", "../",
      "/dev/zero",  "IHDR", "IDAT",  "II*\x00",  "MM\x00*"};
  return t;
}

std::string mutate(std::string s, const std::vector<std::string>& seeds, std::mt19937_64& rng) {
  auto pick = [&](std::size_t n) {
    return n == 0 ? std::size_t{0} : static_cast<std::size_t>(rng() % n);
  };
  const int rounds = 1 + static_cast<int>(rng() % 4);
  for (int r = 0; r < rounds; ++r) {
    const std::size_t body = s.size() > 1 ? s.size() - 1 : 0;  // keep the selector byte
    const std::size_t at = 1 + pick(body + 1);
    switch (rng() % 8) {
      case 0:  // bit flip
        if (body) s[1 + pick(body)] ^= static_cast<char>(1u << (rng() % 8));
        break;
      case 1:  // random byte
        if (body) s[1 + pick(body)] = static_cast<char>(rng() & 0xff);
        break;
      case 2:  // insert a token
        s.insert(std::min(at, s.size()), tokens()[pick(tokens().size())]);
        break;
      case 3:  // delete a range
        if (body) {
          const std::size_t from = 1 + pick(body);
          s.erase(from, 1 + pick(std::min<std::size_t>(16, s.size() - from)));
        }
        break;
      case 4:  // repeat a chunk many times (nesting, long lines)
        if (body) {
          const std::size_t from = 1 + pick(body);
          const std::string chunk = s.substr(from, 1 + pick(4));
          std::string rep;
          const std::size_t times = 1 + pick(2000);
          for (std::size_t k = 0; k < times && rep.size() < 200000; ++k) rep += chunk;
          s.insert(from, rep);
        }
        break;
      case 5:  // splice with another seed of the same reader
        if (!seeds.empty()) {
          const std::string& o = seeds[pick(seeds.size())];
          if (o.size() > 1 && o[0] == s[0]) s = s.substr(0, at) + o.substr(1 + pick(o.size() - 1));
        }
        break;
      case 6:  // change a digit
        for (std::size_t k = 0; k < 8 && body; ++k) {
          const std::size_t i = 1 + pick(body);
          if (s[i] >= '0' && s[i] <= '9') {
            s[i] = static_cast<char>('0' + rng() % 10);
            break;
          }
        }
        break;
      default:  // truncate
        if (body) s.resize(1 + pick(body));
        break;
    }
  }
  if (s.size() > 1000000) s.resize(1000000);
  return s;
}

}  // namespace

int main(int argc, char** argv) {
  if (!sw::test::has_arguments(argc, argv, 2, "CORPUS_DIR SECONDS [SEED]")) return 2;
  const fs::path corpus = argv[1];
  const double budget = std::stod(argv[2]);
  const std::uint64_t seed = argc > 3 ? std::stoull(argv[3]) : 1;
  std::vector<std::string> seeds;
  std::vector<fs::path> files;
  for (const auto& e : fs::directory_iterator(corpus))
    if (e.is_regular_file()) files.push_back(e.path());
  std::sort(files.begin(), files.end());
  for (const auto& f : files) seeds.push_back(slurp(f));
  if (seeds.empty()) {
    std::fprintf(stderr, "no seeds in %s\n", corpus.string().c_str());
    return 2;
  }
  const fs::path last = fs::temp_directory_path() / "sw_fuzz_last_input";
  auto run = [&](const std::string& input) {
    std::ofstream(last, std::ios::binary | std::ios::trunc) << input;
    LLVMFuzzerTestOneInput(reinterpret_cast<const std::uint8_t*>(input.data()), input.size());
  };
  for (const auto& s : seeds) run(s);
  std::mt19937_64 rng(seed);
  const auto t0 = std::chrono::steady_clock::now();
  std::size_t executions = seeds.size();
  while (std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count() < budget) {
    run(mutate(seeds[rng() % seeds.size()], seeds, rng));
    ++executions;
  }
  std::error_code ec;
  fs::remove(last, ec);
  std::printf("fuzz_readers_loop: %zu inputs (%zu seeds), seed %llu, no crash\n", executions,
              seeds.size(), static_cast<unsigned long long>(seed));
  return 0;
}
