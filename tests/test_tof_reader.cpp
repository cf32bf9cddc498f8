// Time-of-flight scans whose calibration the sidecar asks to be fitted from the harmonic peaks
// ("calibration": {"fit": "harmonics", ...}; io/trace_reader.h, io/tof_fit.h). Synthetic scans of
// known truth: an energy-domain scan from the direct-quadrature generator (synthetic/), mapped
// onto a flight-time axis with a known drift length L and time zero t0 (counts per time bin =
// energy density * |dE/dt| * dt, then Poisson), written as a 16-bit PNG + JSON sidecar by hand and
// read back. Harmonic energies q hbar omega - Ip: hbar omega = h c / lambda with h c from
// retrieval/core/units.h (CODATA 2018), Ip from retrieval/physics/gas.h (NIST ASD). Calibrating a
// TOF spectrometer on the harmonic comb is common practice.
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <random>
#include <string>
#include <vector>

#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>
#include <opencv2/core.hpp>
#include <opencv2/imgcodecs.hpp>

#include "io/atomic_file.h"
#include "io/tof_calibration.h"
#include "io/trace_reader.h"
#include "retrieval/core/error.h"
#include "retrieval/core/result.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/gas.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "tests/test_support.h"

using json = nlohmann::json;
using Catch::Contains;
using sw::test::write_text;

namespace {

// Truth of the simulated spectrometer and its TOF axis: 1.1 m drift, t0 = 12 ns, bins of 0.5 ns
// from 335 ns (34 eV) to 1044.5 ns (3.2 eV), which covers H13..H31 of 800 nm in argon.
constexpr double kL = 1.1, kT0 = 12.0, kDt = 0.5, kTFirst = 335.0;
constexpr int kTBins = 1420;
// Output energy axis of the reader: 3.5 .. 33 eV in 590 bins of 0.05 eV (the generator's step).
constexpr double kEmin = 3.5, kEmax = 33.0;
constexpr int kECount = 590;
constexpr double kEStep = (kEmax - kEmin) / kECount;

sw::TofCalibration truth_calibration() {
  sw::TofCalibration c;
  c.length_m = kL;
  c.t0_ns = kT0;
  return c;
}

/// The argon-rabbitt preset (odd harmonics H13..H31 of 800 nm) on 21 delays, noise-free (the
/// Poisson draw is made per time bin below); with `xuv_only` the IR is removed and one row kept.
sw::Trace energy_scan(bool xuv_only) {
  sw::synthetic::ScanConfig c = sw::synthetic::find_preset("argon-rabbitt").config;
  c.noise.poisson = false;
  if (xuv_only) {
    c.kind = sw::TraceKind::kXuvOnly;
    c.ir.kind = sw::synthetic::IrKind::kNone;
    c.geometry.delay_fs = {0.0, 1.0, 1};
  } else {
    c.geometry.delay_fs = {-1.0, 0.1, 21};
  }
  return sw::synthetic::generate_scan(c, 7).trace;
}

/// Counts per TOF bin (rows = delays): the energy density (counts per energy bin / step,
/// linearly interpolated) at E(t) times the Jacobian |dE/dt| and the bin width, plus a flat
/// floor of 1 count per bin (detector dark counts), then a Poisson draw.
cv::Mat to_tof_image(const sw::Trace& e, const sw::TofCalibration& truth, unsigned seed) {
  std::vector<double> E(e.num_energies());
  for (std::size_t j = 0; j < E.size(); ++j) E[j] = sw::units::au_to_eV(e.energy_au[j]);
  const double dE = E[1] - E[0];
  std::mt19937_64 rng(seed);
  cv::Mat img(static_cast<int>(e.num_delays()), kTBins, CV_16UC1);
  for (int r = 0; r < img.rows; ++r)
    for (int i = 0; i < kTBins; ++i) {
      const double t = kTFirst + kDt * i;
      const double Et = sw::tof_to_energy_eV(t, truth);
      double density = 0.0;  // counts per eV
      if (Et > E.front() && Et < E.back()) {
        const auto j = static_cast<std::size_t>((Et - E.front()) / dE);
        const double f = (Et - E[j]) / dE;
        density = ((1 - f) * e.counts(r, j) + f * e.counts(r, j + 1)) / dE;
      }
      const double mean = density * sw::tof_energy_jacobian_eV_per_ns(t, truth) * kDt + 1.0;
      const double n = static_cast<double>(std::poisson_distribution<long long>(mean)(rng));
      img.at<std::uint16_t>(r, i) = static_cast<std::uint16_t>(std::min(n, 65535.0));
    }
  return img;
}

/// Sidecar of a TOF scan; `calibration` is the block, `extra` further top-level keys.
json tof_sidecar(const std::string& image, int rows, const json& calibration, bool rabbitt) {
  json sc = {{"streakwright", 1},
             {"image", image},
             {"layout", "delay_rows"},
             {"tof_ns", {{"first", kTFirst}, {"step", kDt}, {"count", kTBins}}},
             {"delay_fs", {{"first", rabbitt ? -1.0 : 0.0}, {"step", 0.1}, {"count", rows}}},
             {"calibration", calibration},
             {"gas", "Ar"},
             {"ir_wavelength_nm", 800.0},
             {"kind", rabbitt ? "rabbitt" : "xuv_only"}};
  return sc;
}

/// Initial guess: L 2.5 % long and t0 3 ns late (a tape-measured drift tube and an estimated
/// cable delay); both make the first-guess energies too high: H31 (32.3 eV) comes out at
/// 32.3 * 1.025^2 * (322 / 319)^2 = 34.5 eV, 1.4 orders of hbar omega = 1.55 eV too high.
json guess_block() {
  return {{"fit", "harmonics"},      {"length_m", kL * 1.025}, {"t0_ns", kT0 + 3.0},
          {"energy_offset_eV", 0.0}, {"energy_min_eV", kEmin}, {"energy_max_eV", kEmax},
          {"energy_count", kECount}};
}

const sw::Param& need(const sw::Trace& t, const std::string& key) {
  const sw::Param* p = sw::find_param(t.meta.calibration, key);
  INFO("record " << key);
  REQUIRE(p != nullptr);
  return *p;
}
double number(const sw::Trace& t, const std::string& key) {
  const auto v = sw::param_number(t.meta.calibration, key);
  INFO("record " << key);
  REQUIRE(v.has_value());
  return *v;
}

/// Checks that the harmonics q = q_lo..q_hi (odd) of the read trace's delay-summed spectrum
/// are centred at q hbar omega - Ip within one energy step: for each q, the maximum within
/// +-hbar omega / 2 of the expected energy, then the count-weighted centroid over +-0.3 eV
/// (about the line's FWHM of 0.23 eV, synthetic/presets.cpp) around it. Lines below 10 % of
/// the tallest are skipped (too few counts for a centroid to 0.05 eV). Returns lines checked.
int check_harmonic_energies(const sw::Trace& t, double ip, double hw) {
  const Eigen::VectorXd s = t.counts.colwise().sum().transpose();
  std::vector<double> E(t.num_energies());
  for (std::size_t j = 0; j < E.size(); ++j) E[j] = sw::units::au_to_eV(t.energy_au[j]);
  const double tallest = s.maxCoeff();
  int checked = 0;
  for (int q = 13; q <= 31; q += 2) {
    const double Eq = q * hw - ip;
    std::size_t jmax = 0;
    double vmax = -1;
    for (std::size_t j = 0; j < E.size(); ++j)
      if (std::abs(E[j] - Eq) < hw / 2 && s[static_cast<Eigen::Index>(j)] > vmax) {
        vmax = s[static_cast<Eigen::Index>(j)];
        jmax = j;
      }
    if (vmax < 0.1 * tallest) continue;
    double w = 0, we = 0;
    for (std::size_t j = 0; j < E.size(); ++j)
      if (std::abs(E[j] - E[jmax]) <= 0.3) {
        const double c = s[static_cast<Eigen::Index>(j)];
        w += c;
        we += c * E[j];
      }
    INFO("H" << q << ": centroid " << we / w << " eV, expected q hbar omega - Ip = " << Eq);
    CHECK(std::abs(we / w - Eq) < kEStep);
    ++checked;
  }
  return checked;
}

}  // namespace

TEST_CASE("RABBITT TOF scan: calibration fitted from harmonics and sidebands", "[io][tof]") {
  sw::test::TempDir dir("tofrb");
  const sw::Trace e = energy_scan(false);
  REQUIRE(cv::imwrite(dir / "rb.png", to_tof_image(e, truth_calibration(), 3)));
  write_text(dir / "rb.json",
             tof_sidecar("rb.png", static_cast<int>(e.num_delays()), guess_block(), true).dump(1));
  std::vector<std::string> warnings;
  const sw::Trace t = sw::read_trace(dir / "rb.json", &warnings);
  INFO(sw::param_string(t.meta.calibration, "calibration.fit.message"));
  const double L = number(t, "calibration.length_m"), t0 = number(t, "calibration.t0_ns");
  std::printf("RABBITT TOF fit: L error %.2e relative, t0 error %+.3f ns (sigma %.3f ns)\n",
              L / kL - 1.0, t0 - kT0, number(t, "calibration.t0_ns_sigma"));
  // Tolerances: L within 0.5 % (common practice for a TOF calibration). t0 within half a time
  // bin (0.25 ns): peak centroids are located to a small fraction of a bin, and half a bin is
  // where the error on the fastest line (H31, t - t0 = 322 ns) reaches one energy step:
  // dE = 2 E dt0 / (t - t0) = 2 * 32.3 eV * 0.25 ns / 322 ns = 0.050 eV.
  CHECK(std::abs(L / kL - 1.0) < 0.005);
  CHECK(std::abs(t0 - kT0) < kDt / 2);
  // Records of the calibration actually used.
  CHECK(sw::param_string(t.meta.calibration, "calibration.source") == "fit: harmonics");
  CHECK(number(t, "calibration.fit.harmonic_step") == 1);  // default for kind rabbitt
  CHECK(number(t, "calibration.initial.length_m") == Approx(kL * 1.025));
  const double peaks = number(t, "calibration.fit.peaks");
  CHECK(peaks >= 10);  // the 10 harmonics (some sidebands too at 1e11 W/cm^2)
  const auto& orders = std::get<std::vector<double>>(need(t, "calibration.fit.peak_orders").value);
  const auto& res =
      std::get<std::vector<double>>(need(t, "calibration.fit.peak_residual_eV").value);
  CHECK(orders.size() == static_cast<std::size_t>(peaks));
  CHECK(res.size() == orders.size());
  CHECK(std::find(orders.begin(), orders.end(), 31.0) != orders.end());
  // Sidebands (even orders) between the harmonics are used: harmonic_step 1 assigns them.
  CHECK(std::any_of(orders.begin(), orders.end(), [](double q) { return std::fmod(q, 2.0) == 0; }));
  CHECK(number(t, "calibration.fit.rms_residual_eV") < kEStep);
  CHECK(number(t, "calibration.length_m_sigma") > 0);
  CHECK(number(t, "calibration.energy_step_eV") == Approx(kEStep).epsilon(1e-9));
  CHECK(sw::find_param(t.meta.calibration, "calibration.warning") == nullptr);
  // The converted energy axis puts the harmonics at q hbar omega - Ip (NIST ASD Ip of argon).
  const double ip = sw::find_gas("Ar").ionization_energy_eV;
  const double hw = sw::units::kPlanckC_eV_nm / 800.0;
  CHECK(check_harmonic_energies(t, ip, hw) >= 6);
  CHECK(t.num_delays() == e.num_delays());
  CHECK(t.meta.kind == sw::TraceKind::kRabbitt);
}

TEST_CASE("XUV-only TOF comb: odd-harmonic fit, E_offset fitted, records and CLI result",
          "[io][tof][cli]") {
  sw::test::TempDir dir("tofxuv");
  const sw::Trace e = energy_scan(true);
  // A retarding/contact offset of 0.4 eV in the truth: E = E_drift + 0.4 eV.
  sw::TofCalibration truth = truth_calibration();
  truth.energy_offset_eV = 0.4;
  REQUIRE(cv::imwrite(dir / "x.png", to_tof_image(e, truth, 5)));
  json block = guess_block();
  block["fit_energy_offset"] = true;
  // With E_offset free the orders rest on the guess (a common shift of the orders is an offset
  // change, io/tof_fit.h): a guess 2 % long keeps H31 within one harmonic step (3.1 eV) / 2.
  block["length_m"] = kL * 1.02;
  // Slow, low harmonics separate t0 (an energy shift growing as E^1.5) from E_offset (constant);
  // on the time axis their counts per bin are spread thin by the t^3 Jacobian, so detect down to
  // 1 % of the tallest peak.
  block["min_peak_fraction"] = 0.01;
  write_text(dir / "x.json", tof_sidecar("x.png", 1, block, false).dump(1));
  const sw::Trace t = sw::read_trace(dir / "x.json");
  INFO(sw::param_string(t.meta.calibration, "calibration.fit.message"));
  CHECK(std::abs(number(t, "calibration.length_m") / kL - 1.0) < 0.005);
  // With E_offset free, t0 (whose error shifts energies as E^1.5) and E_offset (a constant)
  // are nearly degenerate over 7..32 eV, and the generator's lines are not exactly at
  // q hbar omega - Ip: the spectral envelope pulls each line centroid by sigma^2 d ln S / dE,
  // +5 meV at H13 to -3.5 meV at H31 for this comb (measured on the energy-domain scan). The fit
  // turns that into about 0.5 ns of t0, so here t0 is checked against its own reported
  // 1-sigma (within 3 sigma, the sigma below half a time bin) and the energy axis is checked
  // directly below. E_offset within one energy step.
  const double t0 = number(t, "calibration.t0_ns"), t0_sigma = number(t, "calibration.t0_ns_sigma");
  std::printf(
      "XUV-only TOF fit (E_offset free): L error %.2e relative, t0 error %+.3f ns "
      "(sigma %.3f ns), E_offset error %+.4f eV\n",
      number(t, "calibration.length_m") / kL - 1.0, t0 - kT0, t0_sigma,
      number(t, "calibration.energy_offset_eV") - 0.4);
  CHECK(std::abs(t0 - kT0) < 3 * t0_sigma);
  CHECK(t0_sigma < kDt / 2);
  CHECK(std::abs(number(t, "calibration.energy_offset_eV") - 0.4) < kEStep);
  CHECK(number(t, "calibration.energy_offset_eV_sigma") > 0);
  CHECK(number(t, "calibration.fit.harmonic_step") == 2);  // default for kind xuv_only
  const auto& orders = std::get<std::vector<double>>(need(t, "calibration.fit.peak_orders").value);
  for (double q : orders) CHECK(std::fmod(q, 2.0) == 1.0);  // odd harmonics only
  CHECK(check_harmonic_energies(t, sw::find_gas("Ar").ionization_energy_eV,
                                sw::units::kPlanckC_eV_nm / 800.0) >= 6);

  // The command line's result.json carries the records under calibration.* and, with a
  // resolution finer than the fit's residual, a warning. (classify: the analysis of xuv_only.)
  json sc = json::parse(sw::read_file_bytes(dir / "x.json"));
  sc["energy_resolution_eV"] = 1e-4;
  write_text(dir / "x.json", sc.dump(1));
  const std::string out = dir / "out";
  const std::string cmd = std::string("'") + STREAKWRIGHT_CLI_PATH + "' classify '" +
                          (dir / "x.json") + "' --out '" + out + "' -q > '" + (dir / "log") +
                          "' 2>&1";
  const int rc = std::system(cmd.c_str());
  INFO(sw::read_file_bytes(dir / "log"));
  REQUIRE(WIFEXITED(rc));
  REQUIRE(WEXITSTATUS(rc) == 0);
  const json r = json::parse(sw::read_file_bytes(out + "/result.json"));
  REQUIRE(r.contains("calibration"));
  const json& c = r["calibration"];
  CHECK(c["source"] == "fit: harmonics");
  CHECK(c["length_m"].get<double>() == Approx(number(t, "calibration.length_m")));
  CHECK(c["fit"]["peaks"].get<double>() == number(t, "calibration.fit.peaks"));
  CHECK(c["fit"]["peak_orders"].size() == orders.size());
  CHECK(c["fit"]["gas"] == "Ar");
  REQUIRE(c.contains("warning"));
  bool warned = false;
  for (const auto& w : r["warnings"])
    warned = warned || w.get<std::string>().find("energy_resolution_eV") != std::string::npos;
  CHECK(warned);
}

TEST_CASE("fixed TOF calibration is recorded as coming from the sidecar", "[io][tof]") {
  sw::test::TempDir dir("toffix");
  cv::Mat img(2, 100, CV_16UC1, cv::Scalar(5));
  REQUIRE(cv::imwrite(dir / "f.png", img));
  json block = {{"length_m", 1.0}, {"t0_ns", 2.0}, {"energy_offset_eV", 0.5}};
  json sc = tof_sidecar("f.png", 2, block, false);
  sc["tof_ns"] = {{"first", 400.0}, {"step", 1.0}, {"count", 100}};
  write_text(dir / "f.json", sc.dump());
  const sw::Trace t = sw::read_trace(dir / "f.json");
  CHECK(sw::param_string(t.meta.calibration, "calibration.source") == "sidecar");
  CHECK(number(t, "calibration.length_m") == 1.0);
  CHECK(number(t, "calibration.t0_ns") == 2.0);
  CHECK(number(t, "calibration.energy_offset_eV") == 0.5);
  CHECK(sw::find_param(t.meta.calibration, "calibration.fit.peaks") == nullptr);
}

TEST_CASE("bad harmonic-fit requests name the field", "[io][tof][bad]") {
  sw::test::TempDir dir("tofbad");
  // A single Gaussian line on a flat floor: one peak, too few for any fit.
  cv::Mat img(2, 400, CV_16UC1);
  for (int r = 0; r < 2; ++r)
    for (int i = 0; i < 400; ++i)
      img.at<std::uint16_t>(r, i) =
          static_cast<std::uint16_t>(3 + 2000 * std::exp(-0.5 * std::pow((i - 200) / 4.0, 2)));
  REQUIRE(cv::imwrite(dir / "b.png", img));
  json base = tof_sidecar("b.png", 2, guess_block(), false);
  base["tof_ns"] = {{"first", 400.0}, {"step", 0.5}, {"count", 400}};
  base["calibration"].erase("energy_min_eV");
  base["calibration"].erase("energy_max_eV");
  base["calibration"].erase("energy_count");
  auto error_for = [&](const json& sc) -> std::string {
    write_text(dir / "b.json", sc.dump());
    try {
      (void)sw::read_trace(dir / "b.json");
    } catch (const sw::Error& e) {
      CHECK(e.kind() == sw::ErrorKind::kInput);
      return e.what();
    }
    return "no error";
  };
  json sc = base;
  sc["calibration"]["fit"] = "nonsense";
  CHECK_THAT(error_for(sc), Contains("b.json") && Contains("'calibration.fit'") &&
                                Contains("'nonsense'") && Contains("\"harmonics\""));
  sc["calibration"]["fit"] = 1;
  CHECK_THAT(error_for(sc), Contains("'calibration.fit'") && Contains("a number"));
  sc = base;
  sc.erase("gas");
  CHECK_THAT(error_for(sc), Contains("'gas'") && Contains("calibration.fit") && Contains("Ip"));
  sc = base;
  sc["gas"] = "Unobtainium";
  CHECK_THAT(error_for(sc), Contains("'gas'") && Contains("Unobtainium"));
  sc = base;
  sc.erase("ir_wavelength_nm");
  CHECK_THAT(error_for(sc), Contains("'ir_wavelength_nm'") && Contains("calibration.fit"));
  sc = base;
  sc["calibration"]["harmonic_step"] = 3;
  CHECK_THAT(error_for(sc), Contains("'calibration.harmonic_step'") && Contains("is 3"));
  sc = base;
  sc["calibration"]["fit_energy_offset"] = "maybe";
  CHECK_THAT(error_for(sc),
             Contains("'calibration.fit_energy_offset'") && Contains("true or false"));
  sc = base;
  sc["calibration"].erase("fit");
  sc["calibration"]["harmonic_step"] = 2;
  CHECK_THAT(error_for(sc),
             Contains("'calibration.harmonic_step'") && Contains("\"fit\": \"harmonics\""));
  // One line only: the fit fails with what to do.
  CHECK_THAT(error_for(base), Contains("b.json") && Contains("'calibration.fit'") &&
                                  Contains("found 1 harmonic peak") &&
                                  Contains("fixed calibration") && Contains("ir_wavelength_nm"));
  // The overrides of the analysis (batch manifest, --gas) reach the fit.
  sc = base;
  sc.erase("gas");
  write_text(dir / "b.json", sc.dump());
  sw::TraceReadOverrides o;
  o.gas = "Ar";
  CHECK_THROWS_WITH(sw::read_trace(dir / "b.json", nullptr, o),
                    Contains("found 1 harmonic peak") && Contains("gas Ar"));
}
