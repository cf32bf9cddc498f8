// The time-of-flight axis of a sidecar (tof_ns with a 'calibration' block): the block read and
// checked, the optional fit of the calibration to the harmonic peaks (io/tof_fit.h), and the
// conversion of the counts onto an energy axis (io/tof_calibration.h).
#include <algorithm>
#include <cmath>
#include <optional>
#include <sstream>

#include "io/tof_fit.h"
#include "io/trace_reader_internal.h"
#include "retrieval/core/format.h"
#include "retrieval/physics/gas.h"

namespace sw::reader_detail {

namespace {

/// Fit-only keys of the calibration block (accepted only with "fit": "harmonics").
bool is_fit_key(const std::string& k) {
  return k == "harmonic_step" || k == "fit_energy_offset" || k == "min_peak_fraction";
}

/// The delay-summed TOF spectrum (ascending flight time) of counts (rows = delays, columns =
/// TOF bins at tof_ns).
void summed_spectrum(const Eigen::MatrixXd& counts, const std::vector<double>& tof_ns,
                     std::vector<double>* t, std::vector<double>* c) {
  const Eigen::VectorXd sum = counts.colwise().sum().transpose();
  t->assign(tof_ns.begin(), tof_ns.end());
  c->assign(sum.data(), sum.data() + sum.size());
  if (descending(*t)) {
    std::reverse(t->begin(), t->end());
    std::reverse(c->begin(), c->end());
  }
}

}  // namespace

void read_tof_calibration_block(const Sidecar& sc, TofCalibration& cal,
                                TofFitRequest& fit_request) {
  if (!sc.has("calibration"))
    sc.fail("tof_ns",
            "needs a 'calibration' block {length_m, t0_ns, energy_offset_eV} to "
            "convert flight times to energies");
  const json& c = sc.at("calibration");
  if (!c.is_object())
    sc.fail("calibration",
            std::string("is ") + type_name(c) + "; expected {length_m, t0_ns, energy_offset_eV}");
  if (c.contains("fit")) {
    const json& v = c.at("fit");
    if (!v.is_string() || v.get<std::string>() != "harmonics")
      sc.fail("calibration.fit",
              "is " +
                  (v.is_string() ? "'" + v.get<std::string>() + "'" : std::string(type_name(v))) +
                  "; expected \"harmonics\" (fit L, t0 to the harmonic peaks of the scan, "
                  "starting from length_m and t0_ns) or leave 'fit' out for a fixed calibration");
    fit_request.fit = true;
  }
  for (auto it = c.begin(); it != c.end(); ++it) {
    const std::string& k = it.key();
    const std::string f = "calibration." + k;
    if (is_fit_key(k) && !fit_request.fit)
      sc.fail(f,
              "is an option of the harmonic fit; add \"fit\": \"harmonics\" to the "
              "calibration block or remove it");
    if (k == "fit") {
      // checked above
    } else if (k == "harmonic_step") {
      const double n = sc.number(*it, f);
      if (n != 1 && n != 2)
        sc.fail(f, "is " + format_g(n) +
                       "; expected 1 (every order: harmonics and RABBITT sidebands) or 2 "
                       "(odd harmonics only)");
      fit_request.harmonic_step = static_cast<int>(n);
    } else if (k == "fit_energy_offset") {
      fit_request.fit_energy_offset = sc.boolean(*it, f);
    } else if (k == "min_peak_fraction") {
      const double v = sc.number(*it, f);
      if (!(v > 0 && v < 1))
        sc.fail(f, "is " + format_g(v) + "; expected a fraction of the tallest peak in (0, 1)");
      fit_request.min_peak_fraction = v;
    } else if (k == "length_m") {
      cal.length_m = sc.number(*it, f);
      if (!(cal.length_m > 0 && cal.length_m <= 100))
        sc.fail(f, "is " + format_g(cal.length_m) + "; expected a flight length > 0 and <= 100 m");
    } else if (k == "t0_ns") {
      cal.t0_ns = sc.number(*it, f);
      if (!(std::abs(cal.t0_ns) <= ranges::kMaxTofNs))
        sc.fail(f, "is " + format_g(cal.t0_ns) +
                       "; expected |t0| <= " + format_g(ranges::kMaxTofNs) + " ns");
    } else if (k == "energy_offset_eV") {
      cal.energy_offset_eV = sc.number(*it, f);
      if (!(std::abs(cal.energy_offset_eV) <= ranges::kMaxEnergyEV))
        sc.fail(f, "is " + format_g(cal.energy_offset_eV) +
                       "; expected |offset| <= " + format_g(ranges::kMaxEnergyEV) + " eV");
    } else if (k == "energy_count") {
      const double n = sc.number(*it, f);
      if (n < 1 || n != std::floor(n) || n > static_cast<double>(limits::kMaxAxisCount))
        sc.fail(f, "is " + format_g(n) + "; expected a whole number of energy bins in [1, " +
                       std::to_string(limits::kMaxAxisCount) + "]");
      cal.energy_count = static_cast<int>(n);
    } else if (k == "energy_min_eV" || k == "energy_max_eV") {
      const double e = sc.number(*it, f);
      if (!(e >= ranges::kMinEnergyEV && e <= ranges::kMaxEnergyEV))
        sc.fail(f, "is " + format_g(e) + "; expected an energy in [" +
                       format_g(ranges::kMinEnergyEV) + ", " + format_g(ranges::kMaxEnergyEV) +
                       "] eV");
      (k == "energy_min_eV" ? cal.energy_min_eV : cal.energy_max_eV) = e;
    } else
      sc.fail(f,
              "is not a calibration key; expected length_m, t0_ns, energy_offset_eV "
              "(optional: energy_count, energy_min_eV, energy_max_eV; fit, harmonic_step, "
              "fit_energy_offset, min_peak_fraction)");
  }
  for (const char* k : {"length_m", "t0_ns"})
    if (!c.contains(k))
      sc.fail("calibration", std::string("is missing '") + k + "'; expected {length_m, t0_ns, " +
                                 "energy_offset_eV}" +
                                 (fit_request.fit ? " as the initial guess of the fit" : ""));
  if (const std::string bad = cal.validate(); !bad.empty()) {
    const auto dot = bad.find(' ');
    sc.fail(bad.substr(0, dot), bad.substr(dot + 1));
  }
}

double harmonic_fit_ionization_energy_eV(const Sidecar& sc, const TraceMeta& meta) {
  // The harmonic energies q hbar omega - Ip need both the gas (Ip) and the IR wavelength.
  const std::string why =
      " is needed by calibration.fit = \"harmonics\": the peaks are assigned the known "
      "energies q hbar omega - Ip";
  if (meta.gas.empty())
    sc.fail("gas", "is missing;" + why +
                       " (Ip of the gas); give e.g. \"gas\": \"Ar\" (or a gas override of "
                       "the command line or batch manifest), or a fixed calibration");
  if (!(meta.ir_wavelength_nm > 0))
    sc.fail("ir_wavelength_nm",
            "is missing;" + why +
                " (hbar omega = h c / lambda); give e.g. \"ir_wavelength_nm\": 800 (or a "
                "wavelength override), or a fixed calibration");
  try {
    return find_gas(meta.gas).ionization_energy_eV;
  } catch (const Error& e) {
    sc.fail("gas", std::string(e.what()) + " (needed by calibration.fit)");
  }
}

void calibrate_tof_axis(const Sidecar& sc, const TofFitRequest& fit_request, TofCalibration cal,
                        double fit_ip_eV, std::vector<std::string>* warnings, TraceMeta& meta,
                        std::vector<double>& energy_axis, Eigen::MatrixXd& counts) {
  const std::string where = printable_path(sc.path());
  std::vector<Param>& rec = meta.calibration;
  auto R = [&](const std::string& k, auto v) { rec.push_back({"calibration." + k, v}); };
  std::optional<TofCalibrationFit> fit;
  if (fit_request.fit) {
    TofFitOptions fo;
    // Default step: the delay-summed spectrum of a RABBITT scan holds the sidebands (even
    // orders) between the odd harmonics; an XUV-only or streaking comb has odd orders only.
    fo.harmonic_step = fit_request.harmonic_step.value_or(meta.kind == TraceKind::kRabbitt ? 1 : 2);
    fo.fit_energy_offset = fit_request.fit_energy_offset.value_or(false);
    if (fit_request.min_peak_fraction) fo.min_peak_fraction = *fit_request.min_peak_fraction;
    std::vector<double> t, c;
    summed_spectrum(counts, energy_axis, &t, &c);
    try {
      fit = fit_tof_calibration(t, c, fit_ip_eV, meta.ir_wavelength_nm, cal, fo);
    } catch (const Error& e) {
      sc.fail("calibration.fit",
              "the harmonic fit of the time-of-flight calibration failed (" +
                  std::string(e.what()) + "; gas " + meta.gas + ", Ip " + format_g(fit_ip_eV) +
                  " eV, ir_wavelength_nm " + format_g(meta.ir_wavelength_nm) + ", harmonic_step " +
                  std::to_string(fo.harmonic_step) +
                  "); give a fixed calibration (leave 'fit' out), or check gas, "
                  "ir_wavelength_nm, the initial length_m / t0_ns and harmonic_step");
    }
    const TofCalibration initial = cal;
    cal = fit->calibration;
    R("source", std::string("fit: harmonics"));
    R("length_m", cal.length_m);
    R("length_m_sigma", fit->length_m_sigma);
    R("t0_ns", cal.t0_ns);
    R("t0_ns_sigma", fit->t0_ns_sigma);
    R("energy_offset_eV", cal.energy_offset_eV);
    if (fo.fit_energy_offset) R("energy_offset_eV_sigma", fit->energy_offset_eV_sigma);
    R("initial.length_m", initial.length_m);
    R("initial.t0_ns", initial.t0_ns);
    R("initial.energy_offset_eV", initial.energy_offset_eV);
    R("fit.gas", meta.gas);
    R("fit.ionization_energy_eV", fit_ip_eV);
    R("fit.ir_wavelength_nm", meta.ir_wavelength_nm);
    R("fit.photon_energy_eV", fit->photon_energy_eV);
    R("fit.harmonic_step", static_cast<long long>(fo.harmonic_step));
    R("fit.energy_offset_fitted", fo.fit_energy_offset);
    R("fit.peaks", static_cast<long long>(fit->peaks.size()));
    R("fit.rms_residual_eV", fit->rms_residual_eV);
    R("fit.converged", fit->converged);
    R("fit.iterations", static_cast<long long>(fit->iterations));
    R("fit.order_shift", static_cast<long long>(fit->order_shift));
    std::vector<double> orders, times, res_eV, res_ns;
    for (const TofPeak& p : fit->peaks) {
      orders.push_back(p.order);
      times.push_back(p.time_ns);
      res_eV.push_back(p.residual_eV);
      res_ns.push_back(p.residual_ns);
    }
    R("fit.peak_orders", orders);
    R("fit.peak_time_ns", times);
    R("fit.peak_residual_eV", res_eV);
    R("fit.peak_residual_ns", res_ns);
    R("fit.message", fit->message);
  } else {
    R("source", std::string("sidecar"));
    R("length_m", cal.length_m);
    R("t0_ns", cal.t0_ns);
    R("energy_offset_eV", cal.energy_offset_eV);
  }
  TofConversion conv = tof_to_energy(counts, energy_axis, cal, "sidecar '" + where + "'");
  if (conv.fraction_outside > 1e-9 && warnings) {
    std::ostringstream s;
    s.precision(3);
    s << "sidecar '" << where << "': " << 100.0 * conv.fraction_outside
      << " % of the counts fall outside the calibration energy window and were dropped";
    warnings->push_back(s.str());
  }
  const double step = conv.energy_eV.size() >= 2 ? conv.energy_eV[1] - conv.energy_eV[0] : 0.0;
  R("energy_step_eV", step);
  R("counts_outside_fraction", conv.fraction_outside);
  if (fit) {
    // A calibration error beyond the spectrometer's resolution (or, without one, beyond the
    // energy bin) moves features by more than the data can resolve.
    const bool have_res = meta.energy_resolution_eV && *meta.energy_resolution_eV > 0;
    const double limit = have_res ? *meta.energy_resolution_eV : step;
    if (fit->rms_residual_eV > limit) {
      std::ostringstream s;
      s.precision(3);
      s << "the time-of-flight calibration fitted to " << fit->peaks.size()
        << " harmonic peaks has an rms residual of " << fit->rms_residual_eV << " eV, above "
        << (have_res ? "the spectrometer resolution energy_resolution_eV = "
                     : "the energy step (no energy_resolution_eV given) of ")
        << limit << " eV: check gas, ir_wavelength_nm and harmonic_step, or give a fixed "
        << "calibration";
      R("warning", s.str());
      if (warnings) warnings->push_back("sidecar '" + where + "': " + s.str());
    }
  }
  energy_axis = std::move(conv.energy_eV);
  counts = std::move(conv.counts);
}

}  // namespace sw::reader_detail
