// Imperfections validation sweep (issue 10): the named cases of imperfections.h simulated,
// retrieved with default options and scored against the truth. Writes OUT_DIR/
// validation_imperfections.csv and OUT_DIR/validation_imperfections_table.md (table and summary
// lines) and prints the summary; OUT_DIR/validation_imperfections.partial.csv grows row by row
// while the sweep runs.
// Usage: imperfections_sweep [OUT_DIR] [--cases a,b,c] [--bootstrap N] [--jobs N]
//        [--engine NAME] [--uncertainty full|warm|laplace] [--list]
//        [--check-scans] (generate only: truth and whether the energy window holds the signal)
//        [--from-csv FILE] (tables, summary and figures again from a finished run's CSV)
//        [--write-scans DIR] (the cases' scans as files, to analyse with the command line)
//        [--held-out N] [--held-out-seed S] (N random held-out cases instead of the named set;
//        the files are then named validation_heldout*)
//        [--full-model-patience N] (retrieve's full_model_patience; 0 = its default)
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <utility>
#include <vector>

#include "imperfections.h"
#include "retrieval/core/error.h"

using namespace sw;

namespace {

// The sweep options that one flag sets from its value.
const std::pair<const char*, int validation::SweepOptions::*> kIntegerFlags[] = {
    {"--bootstrap", &validation::SweepOptions::bootstrap},
    {"--jobs", &validation::SweepOptions::jobs},
    {"--held-out", &validation::SweepOptions::held_out},
    {"--energy-refine", &validation::SweepOptions::energy_refine},
    {"--energy-combine", &validation::SweepOptions::energy_combine},
    {"--full-model-patience", &validation::SweepOptions::full_model_patience}};
const std::pair<const char*, std::string validation::SweepOptions::*> kTextFlags[] = {
    {"--engine", &validation::SweepOptions::engine},
    {"--uncertainty", &validation::SweepOptions::uncertainty},
    {"--work", &validation::SweepOptions::work_dir}};

}  // namespace

int main(int argc, char** argv) {
  std::string out = "docs";
  validation::SweepOptions o;
  std::vector<std::string> names;
  bool list = false, check = false;
  std::string from_csv, write_dir;
  try {
    for (int i = 1; i < argc; ++i) {
      const std::string a = argv[i];
      auto value = [&](const char* flag) {
        if (i + 1 >= argc) throw usage_error(std::string(flag) + " needs a value");
        return std::string(argv[++i]);
      };
      auto integer = [&](const char* flag) {
        const std::string v = value(flag);
        char* end = nullptr;
        const long n = std::strtol(v.c_str(), &end, 10);
        if (v.empty() || *end != '\0')
          throw usage_error(std::string(flag) + " " + v + ": expected an integer");
        return static_cast<int>(n);
      };
      // A flag of one of the tables sets its field from its value.
      auto from_table = [&](const auto& table, const auto& read) {
        for (const auto& [flag, field] : table)
          if (a == flag) {
            o.*field = read(flag);
            return true;
          }
        return false;
      };
      if (from_table(kIntegerFlags, integer) || from_table(kTextFlags, value)) continue;
      if (a == "--list") {
        list = true;
      } else if (a == "--check-scans") {
        check = true;
      } else if (a == "--cases") {
        std::string v = value("--cases");
        std::size_t p = 0;
        while (p <= v.size()) {
          const std::size_t q = v.find(',', p);
          const std::string n = v.substr(p, q == std::string::npos ? std::string::npos : q - p);
          if (!n.empty()) names.push_back(n);
          if (q == std::string::npos) break;
          p = q + 1;
        }
      } else if (a == "--from-csv") {
        from_csv = value("--from-csv");
      } else if (a == "--held-out-seed") {
        o.held_out_seed = static_cast<unsigned long long>(integer("--held-out-seed"));
      } else if (a == "--write-scans") {
        write_dir = value("--write-scans");
      } else if (a == "-h" || a == "--help") {
        std::printf(
            "usage: imperfections_sweep [OUT_DIR] [--cases a,b,c] [--bootstrap N (4)] "
            "[--jobs N (1)] [--engine NAME (auto)] [--uncertainty full|warm|laplace (full)] "
            "[--work DIR] "
            "[--list] [--check-scans] [--write-scans DIR] [--held-out N [--held-out-seed S]] "
            "[--energy-refine F (1)] [--energy-combine K (0 = auto)] "
            "[--full-model-patience N (0 = retrieve's default)]\n");
        return 0;
      } else if (!a.empty() && a[0] == '-') {
        throw usage_error("unknown option " + a);
      } else {
        out = a;
      }
    }
    if (list) {
      for (const validation::ValidationCase& k : validation::sweep_cases(o))
        std::printf("%-28s %-22s tol %2.0f %%  %s%s\n", k.name.c_str(), k.imperfection.c_str(),
                    100 * k.tolerance, k.description.c_str(), k.good ? " [good scan]" : "");
      return 0;
    }
    if (!from_csv.empty()) {  // tables and figures again from a finished run's CSV
      std::ifstream in(from_csv);
      if (!in) throw input_error("cannot read " + from_csv);
      std::ostringstream text;
      text << in.rdbuf();
      const std::vector<validation::SweepRow> rows =
          validation::rows_from_csv(text.str(), from_csv);
      std::filesystem::create_directories(out);
      std::ofstream(out + "/validation_imperfections_table.md") << validation::sweep_markdown(rows);
      validation::sweep_figures(rows, out + "/figures");
      std::printf("%s", validation::sweep_summary(rows).c_str());
      return 0;
    }
    if (!write_dir.empty()) {  // the scans as files, for the command line
      for (const std::string& f : validation::write_scans(names, o, write_dir))
        std::printf("%s\n", f.c_str());
      return 0;
    }
    if (check) {
      std::printf("%s", validation::check_scans(names, o).c_str());
      return 0;
    }
    std::filesystem::create_directories(out);
    const std::string base =
        out + (o.held_out > 0 ? "/validation_heldout" : "/validation_imperfections");
    // Rows are appended to the partial CSV as they finish (a long run can be inspected early).
    std::ofstream partial(base + ".partial.csv");
    partial << validation::sweep_csv_header() << "\n" << std::flush;
    const std::vector<validation::SweepRow> rows =
        validation::run_sweep(names, o, [&](const validation::SweepRow& r) {
          partial << validation::sweep_csv_line(r) << "\n" << std::flush;
        });
    std::ofstream(base + ".csv") << validation::sweep_csv(rows);
    std::ofstream(base + "_table.md") << validation::sweep_markdown(rows);
    if (o.held_out == 0) validation::sweep_figures(rows, out + "/figures");
    std::printf("%s", validation::sweep_summary(rows).c_str());
    return 0;
  } catch (const Error& e) {
    std::fprintf(stderr, "imperfections_sweep: %s\n", e.what());
    return 2;
  }
}
