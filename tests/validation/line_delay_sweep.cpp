// Two-line delay validation sweep: synthetic scans from the direct-quadrature generator with a
// second photoelectron line of known photoemission delay and strength; the relative delay is
// measured by the centre-of-energy method (retrieval/analysis/line_delays.h) on the lines that
// preprocessing finds, and on a subset the XUV pulse is retrieved (retrieve(), default engine
// chain, no bootstrap) and compared with the truth.
// Writes OUT/validation_line_delays.csv, OUT/validation_line_delays_table.md and
// OUT/figures/line_delay_*.png.
// With --joint B, every retrieved row runs retrieve() with default options and B bootstrap
// replicas: the joint fit of the lines (retrieval/analysis/multi_line_fit.h) gives the pulse and
// the delay with its sigma; written to OUT/validation_line_delays_joint.csv and _joint_table.md.
// Usage: line_delay_sweep OUT_DIR [--quick] [--retrieve-every N] [--bootstrap B] [--strength S]
// [--peak P] [--band F] [--band-iterations N] [--target Ne|Ar] [--joint B] [--delays LIST]
// [--strengths LIST] [--band-check F] [--shard I/N] [--row-estimator band|profile]
// --band-check F (default 2; 0 = off): the delay is measured again with band half width F x rms
// on the same replicas (LineDelayOptions::consistency_band_half_width_factor); the difference d
// and its paired sigma are written (band_difference_as, band_difference_sigma_as).
// --shard I/N: only the rows whose grid index n (1-based, over the whole grid) has
// (n - 1) % N == I; the seeds stay those of the whole grid, so N shards run in parallel give
// the rows of one run (their CSVs concatenated without the repeated header).
// --row-estimator: LineDelayOptions::row_estimator (default band).
// --shape S: the XUV and dipole of every scan made unlike the Gaussian targets, to test the
// row estimators' shape assumptions: gdd (GDD +8000 as^2), tod (TOD +2e5 as^3), dipole
// (hydrogenic dipole), satellites (bursts at -+T/2 with 10 % of the main burst's intensity:
// spectral fringes), skewed (a tabulated spectrum, the Gaussian times 1 + 0.7 tanh((E - E0) / w),
// w = half the FWHM: its peak moved and one flank steeper).
// --fwhm-as T: every scan's transform-limited FWHM (as), the gdd and tod phases scaled with it
// (apply_shape), to move the lines' separation in units of their width. --phase-scale F: a
// factor on those gdd and tod phases (default 1).
// --cramer-rao: each row's Cramér–Rao bound of the delay (line_delay_bound.h, from the
// generator's expected counts: the delay alone, and jointly with the nuisances), written as
// crb_delay_only_as and crb_delay_as; the summary counts rows whose sigma is below the bound
// (an understated sigma) and rows at >= 300 counts where the bound itself exceeds 5 as.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <utility>
#include <vector>

#include "io/figures.h"
#include "line_delay_bound.h"
#include "retrieval/analysis/line_delays.h"
#include "retrieval/analysis/quality.h"
#include "retrieval/analysis/retrieve.h"
#include "retrieval/core/units.h"
#include "retrieval/preprocess/preprocess.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "two_line_targets.h"

using namespace sw;

namespace {

struct Row {
  std::string target;
  double inserted_as = 0, strength_in = 0, peak = 0;
  double truth_strength = 0;
  bool found = false;
  double delay_as = 0, sigma_as = 0, sigma_fit_as = 0, strength = 0, strength_sigma = 0, chi2 = 0;
  double truth_fwhm = 0, fwhm = 0;  // fwhm 0 = not retrieved
  // --joint: retrieve() with default options (joint fit when two lines are analysed).
  bool joint = false;
  std::string method;
  double j_delay = 0, j_sigma = 0, j_strength = 0, j_strength_sigma = 0, j_coe = 0, j_coe_sigma = 0;
  bool j_trusted = false;
  // The joint fit's bootstrap sigma, its curvature sigma and its delay before the line polish.
  double j_sigma_boot = 0, j_sigma_curv = 0, j_before_polish = 0;
  double band_diff = 0, band_diff_sigma = 0;  // --band-check (0 = not measured)
  double separation = 0;                      // LineDelayResult::separation_widths
  double crb_only = 0, crb = 0;               // --cramer-rao (0 = not computed)
  double seconds = 0;
};

std::string f(double v, int prec = 4) {
  std::ostringstream s;
  s.precision(prec);
  s << v;
  return s.str();
}

// --shape (header comment).
// fwhm_as > 0: the pulse's transform limit, with the gdd and tod phases scaled by (fwhm_as /
// the target's) squared and cubed, so that the phase at a given fraction of the bandwidth stays.
// phase_scale: a factor on the gdd and tod phases.
void apply_shape(const std::string& shape, double fwhm_as, double phase_scale,
                 synthetic::ScanConfig& c) {
  GaussianXuvPulse& g = c.xuv.gaussian;
  const double scale = fwhm_as > 0 ? fwhm_as / g.transform_limited_fwhm_as : 1.0;
  if (fwhm_as > 0) g.transform_limited_fwhm_as = fwhm_as;
  if (shape == "gdd") g.gdd_as2 = 8000.0 * phase_scale * scale * scale;
  if (shape == "tod") g.tod_as3 = 2e5 * phase_scale * scale * scale * scale;
  if (shape == "dipole") c.dipole = DipoleKind::kHydrogenic;
  if (shape == "satellites") {
    c.xuv.kind = synthetic::XuvKind::kSatellites;
    c.xuv.satellites.burst = g;
    c.xuv.satellites.driver_wavelength_nm = c.ir.pulse.wavelength_nm;
    c.xuv.satellites.satellite_intensity_ratio_before = 0.1;
    c.xuv.satellites.satellite_intensity_ratio_after = 0.1;
  }
  if (shape == "skewed") {
    // Intensity FWHM of the transform-limited Gaussian: 4 ln 2 hbar / tau (hbar = 658.2 eV as).
    const double fwhm_eV = 4.0 * std::log(2.0) * 658.2119569 / g.transform_limited_fwhm_as;
    const double w = 0.5 * fwhm_eV;
    synthetic::TabulatedSpectrum& t = c.xuv.tabulated;
    t.carrier_eV = g.center_eV;
    t.photon_energy_eV.clear();
    t.spectral_intensity.clear();
    t.spectral_phase_rad.clear();
    for (int i = -200; i <= 200; ++i) {
      const double e = g.center_eV + 0.02 * fwhm_eV * i;
      const double x = (e - g.center_eV) / fwhm_eV;
      t.photon_energy_eV.push_back(e);
      t.spectral_intensity.push_back(std::exp(-4.0 * std::log(2.0) * x * x) *
                                     (1.0 + 0.7 * std::tanh((e - g.center_eV) / w)));
      t.spectral_phase_rad.push_back(0.0);
    }
    c.xuv.kind = synthetic::XuvKind::kTabulated;
  }
}

}  // namespace

int main(int argc, char** argv) {
  auto usage = [](int code) {
    std::fprintf(code ? stderr : stdout,
                 "usage: line_delay_sweep OUT_DIR [--quick] [--retrieve-every N] [--bootstrap B] "
                 "[--strength S] [--peak P] [--band F] [--band-iterations N] [--target Ne|Ar] "
                 "[--joint B] [--delays LIST] [--strengths LIST] [--band-check F] [--shard I/N] "
                 "[--row-estimator band|profile] [--shape gdd|tod|dipole|satellites|skewed] "
                 "[--fwhm-as T] [--phase-scale F] [--cramer-rao]\n");
    return code;
  };
  const std::string out = argc > 1 ? argv[1] : "docs";
  // An option in place of the output folder is a mistake, not a folder name.
  if (out == "--help" || out == "-h") return usage(0);
  if (!out.empty() && out[0] == '-') return usage(2);
  bool quick = false, cramer_rao = false;
  int retrieve_every = 5, bootstrap = 24;
  double only_strength = 0, only_peak = 0;  // restrict the grid (0 = all)
  double band_factor = LineDelayOptions().band_half_width_factor;
  int band_iterations = LineDelayOptions().band_iterations;
  std::string only_target;
  int joint_bootstrap = -1;  // -1: no joint rows
  std::vector<double> only_delays, only_strengths;
  double band_check = 2.0;
  int shard = 0, shards = 1;
  std::string row_estimator = LineDelayOptions().row_estimator;
  std::string shape;       // empty: the targets as they are
  double fwhm_as = 0;      // > 0: --fwhm-as, the transform limit of every scan
  double phase_scale = 1;  // --phase-scale: factor on the gdd and tod phases
  // The flags followed by one integer or one number, and where each value goes.
  const std::pair<const char*, int*> integer_flags[] = {{"--retrieve-every", &retrieve_every},
                                                        {"--bootstrap", &bootstrap},
                                                        {"--band-iterations", &band_iterations},
                                                        {"--joint", &joint_bootstrap}};
  const std::pair<const char*, double*> number_flags[] = {{"--strength", &only_strength},
                                                          {"--peak", &only_peak},
                                                          {"--band", &band_factor},
                                                          {"--fwhm-as", &fwhm_as},
                                                          {"--phase-scale", &phase_scale}};
  // The flags followed by a comma-separated list of numbers.
  const std::pair<const char*, std::vector<double>*> list_flags[] = {
      {"--delays", &only_delays}, {"--strengths", &only_strengths}};
  for (int i = 2; i < argc; ++i) {
    const std::string a = argv[i];
    // Where the value after `a` goes when `a` is one of `flags` and a value follows; else null.
    auto destination = [&](const auto& flags) {
      decltype(flags[0].second) to = nullptr;
      for (const auto& [flag, where] : flags)
        if (a == flag && i + 1 < argc) to = where;
      return to;
    };
    if (a == "--quick")
      quick = true;
    else if (a == "--cramer-rao")
      cramer_rao = true;
    else if (int* n = destination(integer_flags))
      *n = std::atoi(argv[++i]);
    else if (double* x = destination(number_flags))
      *x = std::atof(argv[++i]);
    else if (a == "--target" && i + 1 < argc)
      only_target = argv[++i];
    else if (std::vector<double>* list = destination(list_flags)) {
      std::stringstream ds(argv[++i]);
      for (std::string t; std::getline(ds, t, ',');) list->push_back(std::atof(t.c_str()));
    } else if (a == "--band-check" && i + 1 < argc) {
      char* end = nullptr;
      const char* text = argv[++i];
      band_check = std::strtod(text, &end);
      if (end == text || *end != '\0' || !(band_check == 0 || band_check > 1)) {
        std::fprintf(stderr,
                     "line_delay_sweep: --band-check %s: expected 0 (off) or a number > 1\n", text);
        return 2;
      }
    } else if (a == "--row-estimator" && i + 1 < argc) {
      row_estimator = argv[++i];
      if (row_estimator != "band" && row_estimator != "profile") return usage(2);
    } else if (a == "--shape" && i + 1 < argc) {
      shape = argv[++i];
      if (shape != "gdd" && shape != "tod" && shape != "dipole" && shape != "satellites" &&
          shape != "skewed")
        return usage(2);
    } else if (a == "--shard" && i + 1 < argc) {
      if (std::sscanf(argv[++i], "%d/%d", &shard, &shards) != 2 || shards < 1 || shard < 0 ||
          shard >= shards)
        return usage(2);
    } else {
      return usage(2);
    }
  }
  std::filesystem::create_directories(out + "/figures");
  std::vector<std::string> targets =
      quick ? std::vector<std::string>{"Ne"} : std::vector<std::string>{"Ne", "Ar"};
  if (!only_target.empty()) targets = {only_target};
  std::vector<double> delays = {-50, -20, 0, 20, 50};
  if (!only_delays.empty()) delays = only_delays;
  std::vector<double> strengths =
      quick ? std::vector<double>{0.3} : std::vector<double>{0.1, 0.3, 1.0};
  std::vector<double> peaks =
      quick ? std::vector<double>{300} : std::vector<double>{100, 300, 1000};
  if (only_strength > 0) strengths = {only_strength};
  if (!only_strengths.empty()) strengths = only_strengths;
  if (only_peak > 0) peaks = {only_peak};
  std::vector<Row> rows;
  int n = 0;
  for (const std::string& tg : targets)
    for (double peak : peaks)
      for (double st : strengths)
        for (double d : delays) {
          ++n;
          if ((n - 1) % shards != shard) continue;
          synthetic::ScanConfig c = validation::two_line_target(tg);
          c.lines[1].delay_as = d;
          c.lines[1].relative_strength = st;
          c.noise.peak_counts = peak;
          apply_shape(shape, fwhm_as, phase_scale, c);
          const auto t0 = std::chrono::steady_clock::now();
          const synthetic::SyntheticScan s =
              synthetic::generate_scan(c, 7000 + static_cast<unsigned long long>(n));
          Row r;
          r.target = tg;
          r.inserted_as = d;
          r.strength_in = st;
          r.peak = peak;
          for (const LineEntry& l : s.truth.lines)
            if (!l.reference && l.relative_strength) r.truth_strength = *l.relative_strength;
          r.truth_fwhm = *s.truth.xuv->fwhm_as;
          PreprocessSummary ps;
          try {
            if (cramer_rao) {
              const validation::DelayBound b = validation::line_delay_cramer_rao(c);
              r.crb_only = b.delay_only_as;
              r.crb = b.with_nuisances_as;
            }
            (void)preprocess(s.trace, PreprocessOptions{}, &ps);
            std::vector<double> bg(s.trace.energy_au.size());
            for (std::size_t j = 0; j < bg.size(); ++j)
              bg[j] = ps.background.at(units::au_to_eV(s.trace.energy_au[j]));
            LineDelayOptions o;
            o.bootstrap = bootstrap;
            o.band_half_width_factor = band_factor;
            o.band_iterations = band_iterations;
            o.consistency_band_half_width_factor = band_check;
            o.row_estimator = row_estimator;
            o.seed = static_cast<unsigned long long>(n);
            const LineDelayResult ld = measure_line_delays(s.trace, ps.lines, bg, o);
            for (const LineEntry& l : ld.lines)
              if (!l.reference && l.relative_delay_as) {
                r.found = true;
                r.delay_as = *l.relative_delay_as;
                r.sigma_as = *l.relative_delay_as_sigma;
                r.strength = l.relative_strength.value_or(0);
                r.strength_sigma = l.relative_strength_sigma.value_or(0);
              }
            if (ld.delay_cov_sigma_as.size() >= 2) r.sigma_fit_as = ld.delay_cov_sigma_as[1];
            if (ld.band_difference_as.size() >= 2) {
              r.band_diff = ld.band_difference_as[1];
              r.band_diff_sigma = ld.band_difference_sigma_as[1];
            }
            if (!r.found) {
              for (const auto& w : ld.warnings) std::fprintf(stderr, "  warning: %s\n", w.c_str());
              for (const auto& l : ps.lines)
                std::fprintf(
                    stderr, "  line %s at %.2f eV, strength %.3f +- %.3f%s\n", l.name.c_str(),
                    l.kinetic_energy_eV.value_or(0), l.relative_strength.value_or(-1),
                    l.relative_strength_sigma.value_or(-1), l.reference ? " (reference)" : "");
            }
            r.chi2 = ld.reduced_chi2;
            r.separation = ld.separation_widths;
            if (retrieve_every > 0 && (n - 1) % retrieve_every == 0) {
              RetrieveOptions ro;
              ro.bootstrap = 0;
              if (joint_bootstrap >= 0) {
                ro.bootstrap = joint_bootstrap;  // default line options: the joint fit
              } else {
                ro.line_delays.names = {"none"};
              }
              const RetrieveOutput rr = retrieve(s.trace, ro);
              r.fwhm = rr.result.xuv->fwhm_as.value_or(0);
              r.j_trusted = rr.result.quality && rr.result.quality->trusted;
              for (const LineEntry& l : rr.result.lines)
                if (joint_bootstrap >= 0 && !l.reference && l.relative_delay_as) {
                  r.joint = true;
                  r.method = l.delay_method;
                  r.j_delay = *l.relative_delay_as;
                  r.j_sigma = l.relative_delay_as_sigma.value_or(0);
                  r.j_strength = l.relative_strength.value_or(0);
                  r.j_strength_sigma = l.relative_strength_sigma.value_or(0);
                  r.j_coe = l.relative_delay_as_centre_of_energy.value_or(0);
                  r.j_coe_sigma = l.relative_delay_as_centre_of_energy_sigma.value_or(0);
                  const std::string key = "line_delays.joint_fit." +
                                          (l.gas.empty() ? std::string() : l.gas + "_") + l.name;
                  const auto& ex = rr.result.extra;
                  r.j_sigma_boot = param_number(ex, key + ".delay_as_sigma_bootstrap").value_or(0);
                  r.j_sigma_curv = param_number(ex, key + ".delay_as_sigma_curvature").value_or(0);
                  r.j_before_polish = param_number(ex, key + ".delay_as_before_polish").value_or(0);
                }
            }
          } catch (const std::exception& e) {
            std::fprintf(stderr, "  failed: %s\n", e.what());
          }
          r.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
          std::fprintf(stderr,
                       "%s peak %5.0f strength %.1f delay %+4.0f: %s %7.2f +- %5.2f as (fit %5.2f) "
                       "strength %.3f/%.3f chi2 %.2f sep %.2f band d %+.2f +- %.2f FWHM %.1f/%.1f "
                       "CRB %.2f/%.2f "
                       "as %.1f s\n",
                       tg.c_str(), peak, st, d, r.found ? "found" : "MISSED", r.delay_as,
                       r.sigma_as, r.sigma_fit_as, r.strength, r.truth_strength, r.chi2,
                       r.separation, r.band_diff, r.band_diff_sigma, r.fwhm, r.truth_fwhm,
                       r.crb_only, r.crb, r.seconds);
          if (r.joint)
            std::fprintf(stderr,
                         "   joint (%s): %7.2f +- %5.2f as, strength %.3f +- %.3f, centre of "
                         "energy %7.2f +- %5.2f as, %s; sigma bootstrap %.2f, curvature %.2f; "
                         "before the polish %.2f as\n",
                         r.method.c_str(), r.j_delay, r.j_sigma, r.j_strength, r.j_strength_sigma,
                         r.j_coe, r.j_coe_sigma, r.j_trusted ? "trusted" : "not trusted",
                         r.j_sigma_boot, r.j_sigma_curv, r.j_before_polish);
          rows.push_back(r);
        }

  // CSV and a summary table.
  {
    std::ofstream csv(out + "/validation_line_delays.csv");
    csv << "target,peak_counts,strength_inserted,strength_truth,delay_inserted_as,found,delay_as,"
           "delay_sigma_as,"
           "delay_sigma_fit_as,strength,strength_sigma,reduced_chi2,xuv_fwhm_truth_as,xuv_fwhm_as,"
           "seconds,band_difference_as,band_difference_sigma_as,separation_widths,crb_delay_only_"
           "as,"
           "crb_delay_as\n";
    for (const Row& r : rows)
      csv << r.target << "," << r.peak << "," << r.strength_in << "," << r.truth_strength << ","
          << r.inserted_as << "," << (r.found ? 1 : 0) << "," << r.delay_as << "," << r.sigma_as
          << "," << r.sigma_fit_as << "," << r.strength << "," << r.strength_sigma << "," << r.chi2
          << "," << r.truth_fwhm << "," << r.fwhm << "," << r.seconds << "," << r.band_diff << ","
          << r.band_diff_sigma << "," << r.separation << "," << r.crb_only << "," << r.crb << "\n";
  }
  std::ofstream md(out + "/validation_line_delays_table.md");
  // The quality checks line_delay_fit_chi2 and line_separation_widths
  // (retrieval/analysis/quality.h) that a retrieve result applies to its centre-of-energy delays.
  const double chi2_limit = QualityOptions().max_line_delay_chi2;
  const double separation_limit = QualityOptions().min_line_separation_widths;
  auto passes = [&](const Row& r) {
    return r.found && r.chi2 <= chi2_limit && r.separation >= separation_limit;
  };
  md << "| target | peak counts | strength | rows | delay written | passes the quality checks | "
        "delay within 3 sigma | median sigma (as) | max "
        "sigma (as) | "
        "mean (measured - inserted) (as) | strength within 3 sigma | XUV FWHM within 5 % "
        "|\n|---|---|---|---|---|---|---|---|---|---|---|---|\n";
  int total = 0, within = 0, sig_ok = 0, sig_n = 0, fw_n = 0, fw_ok = 0;
  int written = 0, passed = 0, within_passed = 0;
  for (const std::string& tg : targets)
    for (double peak : peaks)
      for (double st : strengths) {
        std::vector<double> sig;
        int m = 0, w = 0, sw3 = 0, fn = 0, fo = 0, wr = 0, pa = 0;
        double bias = 0;
        for (const Row& r : rows) {
          if (r.target != tg || r.peak != peak || r.strength_in != st) continue;
          ++m;
          const bool in3 = r.found && std::abs(r.delay_as - r.inserted_as) <= 3 * r.sigma_as;
          if (in3) ++w;
          if (r.found) ++wr;
          if (passes(r)) {
            ++pa;
            if (in3) ++within_passed;
          }
          if (r.found) {
            sig.push_back(r.sigma_as);
            bias += r.delay_as - r.inserted_as;
          }
          if (r.found && std::abs(r.strength - r.truth_strength) <= 3 * r.strength_sigma) ++sw3;
          if (r.fwhm > 0) {
            ++fn;
            if (std::abs(r.fwhm / r.truth_fwhm - 1) <= 0.05) ++fo;
          }
          if (peak >= 300 && r.found) {
            ++sig_n;
            if (r.sigma_as <= 5) ++sig_ok;
          }
        }
        total += m;
        within += w;
        written += wr;
        passed += pa;
        fw_n += fn;
        fw_ok += fo;
        std::sort(sig.begin(), sig.end());
        const double med = sig.empty() ? 0 : sig[sig.size() / 2], mx = sig.empty() ? 0 : sig.back();
        md << "| " << tg << " | " << peak << " | " << st << " | " << m << " | " << wr << " | " << pa
           << " | " << w << "/" << m << " | " << f(med, 3) << " | " << f(mx, 3) << " | "
           << f(sig.empty() ? 0 : bias / static_cast<double>(sig.size()), 3) << " | " << sw3 << "/"
           << m << " | " << (fn ? std::to_string(fo) + "/" + std::to_string(fn) : std::string("-"))
           << " |\n";
      }
  md << "\nAll rows: a delay written in " << written << "/" << total << "; passing "
     << "line_delay_fit_chi2 (reduced chi^2 <= " << chi2_limit
     << ") and line_separation_widths (>= " << separation_limit << ") " << passed
     << ", of which within 3 sigma " << within_passed << " ("
     << f(100.0 * within_passed / std::max(passed, 1), 3) << " %); delay within 3 sigma in "
     << within << "/" << total << " (" << f(100.0 * within / std::max(total, 1), 3)
     << " %); sigma <= 5 as in " << sig_ok << "/" << sig_n
     << " rows at >= 300 peak counts; XUV FWHM within 5 % in " << fw_ok << "/" << fw_n
     << " retrieved rows.\n";
  if (cramer_rao) {
    // The reported sigma against the bound: below it the sigma is understated; a bound above
    // 5 as at >= 300 counts is a row where the sigma target cannot be met by any unbiased method.
    int below = 0, bound_over_5 = 0, bounded = 0;
    std::vector<double> efficiency;  // sigma / bound with nuisances
    for (const Row& r : rows) {
      if (!r.found || !(r.crb > 0)) continue;
      ++bounded;
      if (r.sigma_as < r.crb) ++below;
      if (r.peak >= 300 && r.crb > 5) ++bound_over_5;
      efficiency.push_back(r.sigma_as / r.crb);
    }
    std::sort(efficiency.begin(), efficiency.end());
    const double med = efficiency.empty() ? 0 : efficiency[efficiency.size() / 2];
    md << "\nCramér–Rao bound (with nuisances): sigma below it in " << below << "/" << bounded
       << " rows; the bound above 5 as in " << bound_over_5
       << " rows at >= 300 peak counts; median sigma / bound " << f(med, 3) << ".\n";
    std::fprintf(stderr,
                 "Cramer-Rao: sigma below the bound in %d/%d rows; bound > 5 as in %d rows at >= "
                 "300 counts; median sigma / bound %.2f\n",
                 below, bounded, bound_over_5, med);
  }
  std::fprintf(stderr,
               "delay written: %d/%d; passing the quality checks: %d, within 3 sigma %d; delay "
               "within 3 sigma: %d/%d; sigma <= 5 as at >= 300 counts: %d/%d; FWHM within 5 "
               "%%: %d/%d\n",
               written, total, passed, within_passed, within, total, sig_ok, sig_n, fw_ok, fw_n);

  if (joint_bootstrap >= 0) {
    // Joint rows: retrieve() with default options.
    std::ofstream jc(out + "/validation_line_delays_joint.csv");
    jc << "target,peak_counts,strength_inserted,strength_truth,delay_inserted_as,delay_method,"
          "delay_as,delay_sigma_as,"
          "strength,strength_sigma,delay_centre_of_energy_as,delay_centre_of_energy_sigma_as,xuv_"
          "fwhm_truth_as,xuv_fwhm_as,"
          "trusted,seconds,delay_sigma_bootstrap_as,delay_sigma_curvature_as,"
          "delay_before_polish_as\n";
    int jn = 0, jw = 0, jf = 0, js_n = 0, js_ok = 0, jt = 0, cw = 0, rows_run = 0;
    for (const Row& r : rows) {
      if (!(r.fwhm > 0)) continue;
      ++rows_run;
      jc << r.target << "," << r.peak << "," << r.strength_in << "," << r.truth_strength << ","
         << r.inserted_as << "," << (r.joint ? r.method : std::string("none")) << "," << r.j_delay
         << "," << r.j_sigma << "," << r.j_strength << "," << r.j_strength_sigma << "," << r.j_coe
         << "," << r.j_coe_sigma << "," << r.truth_fwhm << "," << r.fwhm << ","
         << (r.j_trusted ? 1 : 0) << "," << r.seconds << "," << r.j_sigma_boot << ","
         << r.j_sigma_curv << "," << r.j_before_polish << "\n";
      if (!r.joint) continue;
      ++jn;
      if (r.j_sigma > 0 && std::abs(r.j_delay - r.inserted_as) <= 3 * r.j_sigma) ++jw;
      if (r.j_coe_sigma > 0 && std::abs(r.j_coe - r.inserted_as) <= 3 * r.j_coe_sigma) ++cw;
      if (std::abs(r.fwhm / r.truth_fwhm - 1) <= 0.05) ++jf;
      if (r.j_trusted) ++jt;
      if (r.peak >= 300) {
        ++js_n;
        if (r.j_sigma > 0 && r.j_sigma <= 5) ++js_ok;
      }
    }
    std::ofstream jm(out + "/validation_line_delays_joint_table.md");
    jm << "| target | peak counts | strength | inserted (as) | joint delay (as) | centre of energy "
          "(as) | strength (truth) | "
          "XUV FWHM / truth (as) | trusted |\n|---|---|---|---|---|---|---|---|---|\n";
    for (const Row& r : rows) {
      if (!(r.fwhm > 0)) continue;
      jm << "| " << r.target << " | " << r.peak << " | " << r.strength_in << " | " << r.inserted_as
         << " | " << (r.joint ? f(r.j_delay, 4) + " ± " + f(r.j_sigma, 2) : std::string("-"))
         << " | " << (r.joint ? f(r.j_coe, 4) + " ± " + f(r.j_coe_sigma, 2) : std::string("-"))
         << " | "
         << (r.joint ? f(r.j_strength, 3) + " ± " + f(r.j_strength_sigma, 2) : std::string("-"))
         << " (" << f(r.truth_strength, 3) << ") | " << f(r.fwhm, 4) << " / " << f(r.truth_fwhm, 4)
         << " | " << (r.j_trusted ? "yes" : "no") << " |\n";
    }
    jm << "\nJoint rows (retrieve, default options, " << joint_bootstrap << " replicas): " << jn
       << " of " << rows_run << " retrieved rows fitted jointly; delay within 3 sigma in " << jw
       << "/" << jn << " (centre of energy: " << cw << "/" << jn << "); sigma <= 5 as in " << js_ok
       << "/" << js_n << " rows at >= 300 peak counts; XUV FWHM within 5 % in " << jf << "/" << jn
       << "; trusted " << jt << "/" << jn << ".\n";
    std::fprintf(
        stderr,
        "joint: %d/%d rows jointly fitted; delay within 3 sigma %d/%d (centre of energy %d/%d); "
        "sigma <= 5 as at >= 300 counts %d/%d; FWHM within 5 %% %d/%d; trusted %d/%d\n",
        jn, rows_run, jw, jn, cw, jn, js_ok, js_n, jf, jn, jt, jn);
  }

  // Figures: measured - inserted with error bars per row; sigma versus peak counts.
  LinePlot p;
  p.title = "second-line delay: measured - inserted (centre of energy), error bars 1 sigma";
  p.x_label = "scan index";
  p.y_label = "measured - inserted delay (as)";
  p.zero_line = true;
  for (const std::string& tg : targets) {
    Series s;
    for (std::size_t i = 0; i < rows.size(); ++i)
      if (rows[i].target == tg && rows[i].found) {
        s.x.push_back(static_cast<double>(i));
        s.y.push_back(rows[i].delay_as - rows[i].inserted_as);
        s.y_err.push_back(rows[i].sigma_as);
      }
    s.label = tg == "Ne" ? "neon 2s vs 2p" : "argon 3s vs 3p";
    s.line = false;
    s.markers = true;
    p.series.push_back(s);
  }
  plot_lines(p, out + "/figures/line_delay_residuals.png");
  LinePlot q;
  q.title = "second-line delay sigma versus peak counts";
  q.x_label = "peak counts per bin";
  q.y_label = "delay sigma (as)";
  q.log_y = true;
  for (const std::string& tg : targets)
    for (double st : strengths) {
      Series s;
      for (double peak : peaks) {
        std::vector<double> v;
        for (const Row& r : rows)
          if (r.target == tg && r.peak == peak && r.strength_in == st && r.found)
            v.push_back(r.sigma_as);
        if (v.empty()) continue;
        std::sort(v.begin(), v.end());
        s.x.push_back(peak);
        s.y.push_back(v[v.size() / 2]);
      }
      s.label = tg + ", strength " + f(st, 2) + " (median)";
      s.markers = true;
      q.series.push_back(s);
    }
  plot_lines(q, out + "/figures/line_delay_sigma.png");
  return 0;
}
