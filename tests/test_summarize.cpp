// `streakwright summarize` through the executable, on batch folders made of hand-written
// results with known numbers: merging result.json trees and shard summaries, and the
// "moved by more than the combined uncertainty" comparison of two runs.
#include <sys/wait.h>
#include <unistd.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <map>
#include <string>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "io/atomic_file.h"
#include "io/result_io.h"
#include "retrieval/core/result.h"
#include "tests/test_support.h"

namespace fs = std::filesystem;
using nlohmann::json;

namespace {

using namespace sw::test;

/// A retrieval result with the given headline numbers (sigma < 0 = absent).
sw::AnalysisResult retrieval(double fwhm, double fwhm_s, double gdd, double gdd_s, double a0,
                             const std::string& cls = "isolated", double G = 0.02) {
  sw::AnalysisResult r;
  r.input = "scan.json";
  r.analysis = "retrieve";
  r.engine = "ptychographic";
  r.xuv = sw::XuvSection{};
  r.xuv->fwhm_as = fwhm;
  if (fwhm_s >= 0) r.xuv->fwhm_as_sigma = fwhm_s;
  r.xuv->gdd_as2 = gdd;
  if (gdd_s >= 0) r.xuv->gdd_as2_sigma = gdd_s;
  r.ir = sw::IrSection{};
  r.ir->peak_vector_potential_au = a0;
  r.verdict = sw::VerdictSection{};
  sw::parse_pulse_class(cls, &r.verdict->pulse_class);
  r.verdict->satellite_intensity_ratio = 0.01;
  r.verdict->reason = "test";
  r.fit = sw::FitSection{};
  r.fit->trace_error = G;
  r.fit->converged = true;
  r.fit->seconds = 1.5;
  return r;
}

sw::AnalysisResult rabbitt(double chirp, double chirp_s) {
  sw::AnalysisResult r;
  r.input = "rb.json";
  r.analysis = "rabbitt";
  r.rabbitt = sw::RabbittSection{};
  r.rabbitt->attochirp_as_per_eV = chirp;
  r.rabbitt->attochirp_as_per_eV_sigma = chirp_s;
  return r;
}

void put(const fs::path& dir, const sw::AnalysisResult& r, bool report = false) {
  fs::create_directories(dir);
  sw::write_result_json((dir / "result.json").string(), r);
  if (report) std::ofstream(dir / "report.html") << "<html></html>";
}

std::map<std::string, json> rows_of(const fs::path& out) {
  const json s = json::parse(sw::read_file_bytes((out / "summary.json").string()));
  std::map<std::string, json> m;
  for (const auto& r : s["scans"]) m[r["scan"].get<std::string>()] = r;
  return m;
}

}  // namespace

TEST_CASE("summarize merges result.json trees into one summary with the written numbers",
          "[summarize]") {
  TempDir t("merge");
  put(t.path / "a/s1", retrieval(151.25, 3.5, 120.0, 300.0, 0.209), true);
  put(t.path / "a/nested/deeper/s2", rabbitt(15.2, 0.4));
  put(t.path / "b/s3", retrieval(98.0, -1, -50.0, -1, 0.31, "isolated_with_satellites", 0.05));
  const CliOutput c =
      run_cli_apart("summarize " + shell_quoted(t.path / "a") + " " + shell_quoted(t.path / "b") +
                    " --out " + shell_quoted(t.path / "m"));
  INFO(c.err);
  REQUIRE(c.status == 0);
  const auto rows = rows_of(t.path / "m");
  REQUIRE(rows.size() == 3);
  const json& s1 = rows.at("s1");
  CHECK(s1["status"] == "ok");
  CHECK(s1["fwhm_as"].get<double>() == 151.25);
  CHECK(s1["fwhm_as_sigma"].get<double>() == 3.5);
  CHECK(s1["gdd_as2_sigma"].get<double>() == 300.0);
  CHECK(s1["peak_vector_potential_au"].get<double>() == 0.209);
  CHECK(s1["class"] == "isolated");
  CHECK(s1["trace_error"].get<double>() == 0.02);
  CHECK(s1["seconds"].get<double>() == 1.5);
  // The merged index links into the input folder.
  CHECK(fs::exists(t.path / "m" / s1["report"].get<std::string>()));
  CHECK(rows.at("nested/deeper/s2")["attochirp_as_per_eV"].get<double>() == 15.2);
  CHECK(!rows.at("nested/deeper/s2").contains("fwhm_as"));  // absent, not zero
  CHECK(!rows.at("s3").contains("fwhm_as_sigma"));
  CHECK(rows.at("s3")["class"] == "isolated_with_satellites");
  // CSV: empty cells for absent values.
  const std::string csv = sw::read_file_bytes((t.path / "m/summary.csv").string());
  CHECK(csv.find("\ns3,ok,,retrieve,isolated_with_satellites,98,,-50,,") != std::string::npos);
  CHECK(fs::exists(t.path / "m/index.html"));
  CHECK(fs::exists(t.path / "m/trend_fwhm.png"));
}

TEST_CASE("summarize --against lists exactly the values that moved beyond sqrt(s1^2 + s2^2)",
          "[summarize]") {
  TempDir t("against");
  const fs::path old_dir = t.path / "old", new_dir = t.path / "new";
  // s1: FWHM 150 +- 3 -> 158 +- 4: |8| > 5 (= sqrt(3^2 + 4^2)), moved by 1.6 combined sigma.
  put(old_dir / "s1", retrieval(150, 3, 100, 400, 0.2));
  put(new_dir / "s1", retrieval(158, 4, 100, 400, 0.2));
  // s2: 150 +- 3 -> 153 +- 4: within the combined sigma.
  put(old_dir / "s2", retrieval(150, 3, 100, 400, 0.2));
  put(new_dir / "s2", retrieval(153, 4, 100, 400, 0.2));
  // s8: exactly at the boundary |5| = 5: not moved (strictly more than the combined sigma).
  put(old_dir / "s8", retrieval(150, 3, 100, 400, 0.2));
  put(new_dir / "s8", retrieval(155, 4, 100, 400, 0.2));
  // s3: attochirp 15.0 +- 0.3 -> 16.0 +- 0.4: |1| > 0.5, moved by 2.0 combined sigma.
  put(old_dir / "s3", rabbitt(15.0, 0.3));
  put(new_dir / "s3", rabbitt(16.0, 0.4));
  // s4: class change only; s7: FWHM without any sigma differs (cannot be judged).
  put(old_dir / "s4", retrieval(150, 3, 100, 400, 0.2, "isolated"));
  put(new_dir / "s4", retrieval(150, 3, 100, 400, 0.2, "train"));
  put(old_dir / "s7", retrieval(100, -1, 100, -1, 0.2));
  put(new_dir / "s7", retrieval(101, -1, 100, -1, 0.2));
  put(new_dir / "s5", retrieval(150, 3, 100, 400, 0.2));  // only in the new run
  put(old_dir / "s6", retrieval(150, 3, 100, 400, 0.2));  // only in the old run

  const CliOutput c = run_cli_apart("summarize " + shell_quoted(new_dir) + " --against " +
                                    shell_quoted(old_dir) + " --out " + shell_quoted(t.path / "m"));
  INFO(c.out << c.err);
  REQUIRE(c.status == 0);
  CHECK(c.out.find("2 moved by more than their combined 1-sigma") != std::string::npos);
  CHECK(c.out.find("changed: s4: class isolated -> train") != std::string::npos);
  CHECK(c.out.find("only in the new run (1): s5") != std::string::npos);
  CHECK(c.out.find("only in the old run (1): s6") != std::string::npos);
  CHECK(c.out.find("1 value(s) differ but have no uncertainty") != std::string::npos);
  const std::string csv = sw::read_file_bytes((t.path / "m/comparison.csv").string());
  CHECK(csv ==
        "scan,quantity,old,old_sigma,new,new_sigma,difference,combined_sigma,sigmas\n"
        "s1,fwhm_as,150,3,158,4,8,5,1.6\n"
        "s3,attochirp_as_per_eV,15,0.3,16,0.4,1,0.5,2\n");
  const std::string html = sw::read_file_bytes((t.path / "m/index.html").string());
  CHECK(html.find("Changes against") != std::string::npos);
}

TEST_CASE("summarize merges shard summaries; an ok row wins over a failed one; bad input exits 3",
          "[summarize]") {
  TempDir t("shards");
  const fs::path p = t.path / "campaign";
  fs::create_directories(p / "shard-1");
  fs::create_directories(p / "shard-2");
  std::ofstream(p / "shard-1/summary.json") << R"({"streakwright_summary": 1, "scans": [
    {"scan": "day1/a", "status": "ok", "analysis": "retrieve", "fwhm_as": 140.5, "fwhm_as_sigma": 2.0},
    {"scan": "day1/b", "status": "failed", "analysis": "auto", "message": "sidecar 'b.json' is not valid JSON"}]})";
  std::ofstream(p / "shard-2/summary.json") << R"({"streakwright_summary": 1, "scans": [
    {"scan": "day2/c", "status": "ok", "analysis": "rabbitt", "attochirp_as_per_eV": 12.5},
    {"scan": "day1/b", "status": "ok", "analysis": "retrieve", "fwhm_as": 160.0}]})";
  const CliOutput c =
      run_cli_apart("summarize " + shell_quoted(p) + " --out " + shell_quoted(t.path / "m"));
  INFO(c.err);
  REQUIRE(c.status == 0);
  const auto rows = rows_of(t.path / "m");
  REQUIRE(rows.size() == 3);
  CHECK(rows.at("day1/a")["fwhm_as"].get<double>() == 140.5);
  CHECK(rows.at("day1/b")["status"] == "ok");
  CHECK(rows.at("day1/b")["fwhm_as"].get<double>() == 160.0);
  CHECK(rows.at("day2/c")["attochirp_as_per_eV"].get<double>() == 12.5);
  CHECK(c.err.find("day1/b appears in") != std::string::npos);

  CHECK(run_cli_apart("summarize " + shell_quoted(t.path / "nowhere")).status == 3);
  fs::create_directories(t.path / "empty");
  const CliOutput e = run_cli_apart("summarize " + shell_quoted(t.path / "empty"));
  CHECK(e.status == 3);
  CHECK(e.err.find("no summary.json") != std::string::npos);
}
