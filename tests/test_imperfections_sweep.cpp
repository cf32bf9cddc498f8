// The imperfections validation set (tests/validation/imperfections.h): the case list, the
// scoring rules of issue 10, and a smoke run of two cases end to end through the sweep code.
#include <catch2/catch.hpp>

#include <cmath>
#include <set>
#include <string>
#include <vector>

#include "imperfections.h"
#include "retrieval/core/error.h"
#include "synthetic/config_fields.h"

using namespace sw;
using namespace sw::validation;

TEST_CASE("validation set: >= 30 distinct named scenarios, every imperfection present",
          "[validation]") {
  const std::vector<ValidationCase> cases = validation_cases();
  CHECK(cases.size() >= 30);
  std::set<std::string> names, groups;
  int good = 0, low = 0;
  for (const ValidationCase& k : cases) {
    CHECK(names.insert(k.name).second);
    groups.insert(k.imperfection);
    CHECK(k.config.validate().empty());
    good += k.good;
    low += k.config.noise.peak_counts <= 50;
  }
  for (const char* g :
       {"good", "low counts", "background", "low-energy electrons", "second line",
        "two-gas mixture", "time of flight", "resolution", "delay drift", "no field-free rows",
        "train", "satellites", "long wavelength", "hot pixels", "saturation"})
    CHECK(groups.count(g) == 1);
  CHECK(good >= 5);
  CHECK(low >= 4);
  // No case is another with one number changed: every pair differs in at least 3 generator
  // parameters besides the name (seeds differ too).
  std::vector<std::vector<Param>> p;
  for (const ValidationCase& k : cases) p.push_back(synthetic::config_parameters(k.config, ""));
  for (std::size_t a = 0; a < cases.size(); ++a)
    for (std::size_t b = a + 1; b < cases.size(); ++b) {
      int differ = 0;
      for (std::size_t i = 0; i < p[a].size(); ++i)
        if (p[a][i].key != "name" && p[a][i].value != p[b][i].value) ++differ;
      INFO(cases[a].name << " vs " << cases[b].name);
      CHECK(differ >= 3);
      CHECK(cases[a].seed != cases[b].seed);
    }
}

TEST_CASE("scoring follows the issue's targets", "[validation]") {
  // Issue 10, "Targets": 5 % at >= 100 counts; 8 % for 280-540 eV, no field-free rows and
  // saturated scans; 10 % at 20-50 counts.
  synthetic::ScanConfig c;
  c.noise.peak_counts = 500;
  CHECK(tolerance_for(c, false) == 0.05);
  CHECK(tolerance_for(c, true) == 0.08);
  c.xuv.gaussian.center_eV = 400;
  CHECK(tolerance_for(c, false) == 0.08);
  c.xuv.gaussian.center_eV = 95;
  c.noise.saturation_counts = 400;
  CHECK(tolerance_for(c, false) == 0.08);
  c.noise.peak_counts = 30;
  CHECK(tolerance_for(c, false) == 0.10);

  SweepRow r;
  r.tolerance = 0.05;
  r.truth_fwhm_as = 100;
  r.fwhm_as = 104;
  r.fwhm_sigma_as = 3;
  r.truth_a0 = 0.2;
  r.a0 = 0.203;
  r.truth_class = r.retrieved_class = "isolated";
  CHECK(!r.wrong());
  CHECK(!r.within(1));  // 4 as off with sigma 3 as
  CHECK(r.within(2));
  CHECK(r.pull() == Approx(4.0 / 3.0));
  r.fwhm_as = 106;  // 6 % > 5 %
  CHECK(r.wrong());
  CHECK(r.wrong_and_trusted());
  r.trusted = false;
  CHECK(!r.wrong_and_trusted());
  r.fwhm_as = 101;
  r.retrieved_class = "train";  // wrong class
  CHECK(r.wrong());
  r.retrieved_class = "isolated";
  r.a0 = 0.22;  // A0 10 % off
  CHECK(r.wrong());
  r.a0 = std::nan("");  // no A0 is not a right A0
  CHECK(r.wrong());
}

TEST_CASE("smoke run: two cases end to end through the sweep", "[validation]") {
  SweepOptions o;
  o.bootstrap = 2;
  o.jobs = 2;
  o.verbose = false;
  const std::vector<SweepRow> rows = run_sweep({"good-ne-150as", "tof-ne-1m"}, o);
  REQUIRE(rows.size() == 2);
  CHECK(rows[0].name == "good-ne-150as");
  CHECK(rows[1].name == "tof-ne-1m");
  for (const SweepRow& r : rows) {
    INFO(r.name << " " << r.error);
    CHECK(r.error.empty());
    // Truth of a 150 as transform-limited pulse (the generator's exact field).
    CHECK(r.truth_fwhm_as == Approx(150.0).epsilon(1e-3));
    CHECK(r.truth_class == "isolated");
    CHECK(std::isfinite(r.fwhm_as));
    CHECK(r.fwhm_sigma_as > 0);
  }
  // A clean, typical scan: the retrieval is right (the 5 % target).
  CHECK(!rows[0].wrong());
  const std::string csv = sweep_csv(rows);
  CHECK(std::count(csv.begin(), csv.end(), '\n') == 3);
  const std::string md = sweep_markdown(rows);
  CHECK(md.find("| good-ne-150as |") != std::string::npos);
  CHECK(md.find("coverage") != std::string::npos);
  CHECK(md.find("wrong and trusted") != std::string::npos);
  CHECK_THROWS_WITH(run_sweep({"no-such-case"}, o), Catch::Contains("known cases"));
  // A sweep option out of range is refused before any scan is made, naming its flag.
  SweepOptions bad = o;
  bad.full_model_patience = -1;
  CHECK_THROWS_WITH(run_sweep({"good-ne-150as"}, bad), Catch::Contains("--full-model-patience"));
}

TEST_CASE(
    "laplace's check on a scan where the linearised sigma is 4x too small: the full "
    "bootstrap runs and reuses its replicas",
    "[validation][slow]") {
  // low40-tof-ne (time of flight, 40 peak counts): the full bootstrap's FWHM sigma is 54.4 as,
  // about 4x the linearised one (docs/validation.md, "Checked linearised replicas" and "A
  // shorter settle window": chi2 31.8 against the limit 9.22). The two
  // checking replicas must fail the chi-square test (retrieval/analysis/uncertainty.h), and the
  // result must then be the full bootstrap's to the digit: the same replicas, the same seeds.
  SweepOptions o;
  o.bootstrap = 4;
  o.jobs = 1;
  o.verbose = false;
  o.uncertainty = "laplace";
  const std::vector<SweepRow> checked = run_sweep({"low40-tof-ne"}, o);
  o.uncertainty = "full";
  const std::vector<SweepRow> full = run_sweep({"low40-tof-ne"}, o);
  REQUIRE(checked.size() == 1);
  REQUIRE(full.size() == 1);
  INFO(checked[0].uncertainty_method);
  CHECK(checked[0].uncertainty_method.rfind(
            "full (laplace failed its check against 2 full-chain replicas: fwhm_as chi2 ", 0) == 0);
  CHECK(full[0].uncertainty_method == "full");
  CHECK(checked[0].fwhm_as == full[0].fwhm_as);
  CHECK(checked[0].fwhm_sigma_as == full[0].fwhm_sigma_as);
  CHECK(checked[0].trusted == full[0].trusted);
  // The method travels through the CSV (its last column).
  const std::vector<SweepRow> back = rows_from_csv(sweep_csv(checked), "test");
  REQUIRE(back.size() == 1);
  CHECK(back[0].uncertainty_method == checked[0].uncertainty_method);
}
