#include "synthetic/scan_config.h"

#include <cmath>
#include <sstream>

#include "retrieval/core/enum_names.h"
#include "retrieval/core/error.h"
#include "retrieval/physics/gas.h"

namespace sw::synthetic {

namespace {

template <class T>
std::string bad(const std::string& field, const T& value, const char* constraint) {
  std::ostringstream os;
  os << field << " = " << value << " is invalid: it must be " << constraint << ".";
  return os.str();
}

bool finite(double v) { return std::isfinite(v); }

// "name[i]" (built by appending: GCC 12 warns spuriously on literal + temporary string).
std::string indexed(const char* name, std::size_t i) {
  std::string s(name);
  s.append("[").append(std::to_string(i)).append("]");
  return s;
}

std::string check_axis(const char* key, const AxisSpec& a, bool positive_first) {
  const std::string k(key);
  if (!finite(a.first) || (positive_first && !(a.first > 0)))
    return bad(k + ".first", a.first, positive_first ? "a finite value > 0" : "finite");
  if (!finite(a.step) || !(a.step > 0)) return bad(k + ".step", a.step, "a finite value > 0");
  if (a.count < 1) return bad(k + ".count", a.count, "at least 1");
  return {};
}

}  // namespace

constexpr EnumNames<XuvKind, 4> kXuvKindNames{{{{XuvKind::kGaussian, "gaussian"},
                                                {XuvKind::kTrain, "train"},
                                                {XuvKind::kSatellites, "satellites"},
                                                {XuvKind::kTabulated, "tabulated"}}}};

SW_ENUM_NAME_FUNCTIONS(XuvKind, parse_xuv_kind, kXuvKindNames)

constexpr EnumNames<IrKind, 2> kIrKindNames{
    {{{IrKind::kNone, "none"}, {IrKind::kGaussian, "gaussian"}}}};

SW_ENUM_NAME_FUNCTIONS(IrKind, parse_ir_kind, kIrKindNames)

constexpr EnumNames<ResolutionKind, 3> kResolutionKindNames{
    {{{ResolutionKind::kNone, "none"},
      {ResolutionKind::kConstant, "constant"},
      {ResolutionKind::kRelative, "relative"}}}};

SW_ENUM_NAME_FUNCTIONS(ResolutionKind, parse_resolution_kind, kResolutionKindNames)

const GaussianXuvPulse* XuvConfig::burst() const {
  switch (kind) {
    case XuvKind::kGaussian:
      return &gaussian;
    case XuvKind::kTrain:
      return &train.burst;
    case XuvKind::kSatellites:
      return &satellites.burst;
    default:
      return nullptr;
  }
}

std::string XuvConfig::validate() const {
  std::string m;
  switch (kind) {
    case XuvKind::kGaussian:
      m = gaussian.validate();
      return m.empty() ? m : "xuv.gaussian." + m;
    case XuvKind::kTrain:
      m = train.validate();
      return m.empty() ? m : "xuv.train." + m;
    case XuvKind::kSatellites:
      m = satellites.validate();
      return m.empty() ? m : "xuv.satellites." + m;
    case XuvKind::kTabulated: {
      const TabulatedSpectrum& t = tabulated;
      if (!finite(t.carrier_eV) || !(t.carrier_eV > 0))
        return bad("xuv.tabulated.carrier_eV", t.carrier_eV, "a finite photon energy > 0 eV");
      const std::size_t n = t.photon_energy_eV.size();
      if (n < 2) return bad("xuv.tabulated.photon_energy_eV (length)", n, "at least 2");
      if (t.spectral_intensity.size() != n)
        return bad("xuv.tabulated.spectral_intensity (length)", t.spectral_intensity.size(),
                   "equal to the length of xuv.tabulated.photon_energy_eV");
      if (t.spectral_phase_rad.size() != n)
        return bad("xuv.tabulated.spectral_phase_rad (length)", t.spectral_phase_rad.size(),
                   "equal to the length of xuv.tabulated.photon_energy_eV");
      double imax = 0;
      for (std::size_t i = 0; i < n; ++i) {
        auto idx = [i](const char* name) { return indexed(name, i); };
        if (!finite(t.photon_energy_eV[i]) || !(t.photon_energy_eV[i] > 0))
          return bad(idx("xuv.tabulated.photon_energy_eV"), t.photon_energy_eV[i],
                     "a finite photon energy > 0 eV");
        if (i > 0 && !(t.photon_energy_eV[i] > t.photon_energy_eV[i - 1]))
          return bad(idx("xuv.tabulated.photon_energy_eV"), t.photon_energy_eV[i],
                     "larger than the previous value (strictly ascending)");
        if (!finite(t.spectral_intensity[i]) || t.spectral_intensity[i] < 0)
          return bad(idx("xuv.tabulated.spectral_intensity"), t.spectral_intensity[i],
                     "finite and >= 0");
        if (!finite(t.spectral_phase_rad[i]))
          return bad(idx("xuv.tabulated.spectral_phase_rad"), t.spectral_phase_rad[i], "finite");
        imax = std::max(imax, t.spectral_intensity[i]);
      }
      if (!(imax > 0))
        return "xuv.tabulated.spectral_intensity is zero everywhere: it must have a positive "
               "value.";
      return {};
    }
  }
  return {};
}

std::string IrConfig::validate() const {
  if (kind == IrKind::kNone) return {};
  const GaussianIrPulse& p = pulse;
  if (!finite(p.wavelength_nm) || !(p.wavelength_nm > 0))
    return bad("ir.wavelength_nm", p.wavelength_nm, "a finite wavelength > 0 nm");
  if (!finite(p.fwhm_fs) || !(p.fwhm_fs > 0))
    return bad("ir.fwhm_fs", p.fwhm_fs, "a finite duration > 0 fs");
  if (!finite(p.peak_intensity_Wcm2) || p.peak_intensity_Wcm2 < 0 || p.peak_intensity_Wcm2 > 1e16)
    return bad("ir.peak_intensity_Wcm2", p.peak_intensity_Wcm2,
               "finite, >= 0 and at most 1e16 W/cm^2 (the SFA streaking regime)");
  if (!finite(p.cep_rad)) return bad("ir.cep_rad", p.cep_rad, "finite");
  if (!finite(p.chirp_rad_per_fs2))
    return bad("ir.chirp_rad_per_fs2", p.chirp_rad_per_fs2, "finite");
  if (!finite(p.center_fs)) return bad("ir.center_fs", p.center_fs, "finite");
  return {};
}

std::vector<double> ScanGeometry::delays_fs() const {
  if (!delay_values_fs.empty()) return delay_values_fs;
  std::vector<double> d(static_cast<std::size_t>(std::max(delay_fs.count, 0)));
  for (int i = 0; i < delay_fs.count; ++i) d[static_cast<std::size_t>(i)] = delay_fs.value(i);
  return d;
}

std::vector<double> ScanGeometry::energies_eV() const {
  std::vector<double> e(static_cast<std::size_t>(std::max(energy_eV.count, 0)));
  for (int i = 0; i < energy_eV.count; ++i) e[static_cast<std::size_t>(i)] = energy_eV.value(i);
  return e;
}

std::string NoiseConfig::validate() const {
  if (resolution == ResolutionKind::kConstant &&
      (!finite(resolution_fwhm_eV) || !(resolution_fwhm_eV > 0)))
    return bad("noise.resolution_fwhm_eV", resolution_fwhm_eV,
               "a finite FWHM > 0 eV when noise.resolution = constant");
  if (resolution == ResolutionKind::kRelative &&
      (!finite(resolution_relative) || !(resolution_relative > 0) || !(resolution_relative < 1)))
    return bad("noise.resolution_relative", resolution_relative,
               "in (0, 1) when noise.resolution = relative");
  if (!finite(peak_counts) || !(peak_counts > 0))
    return bad("noise.peak_counts", peak_counts, "a finite count > 0");
  if (!finite(background_counts) || background_counts < 0)
    return bad("noise.background_counts", background_counts, "finite and >= 0");
  if (!finite(background_exp_counts) || background_exp_counts < 0)
    return bad("noise.background_exp_counts", background_exp_counts, "finite and >= 0");
  if (!finite(background_exp_decay_eV) || !(background_exp_decay_eV > 0))
    return bad("noise.background_exp_decay_eV", background_exp_decay_eV, "a finite energy > 0 eV");
  if (!finite(background_exp_onset_eV) || background_exp_onset_eV < 0)
    return bad("noise.background_exp_onset_eV", background_exp_onset_eV, "finite and >= 0 eV");
  if (hot_pixels < 0) return bad("noise.hot_pixels", hot_pixels, ">= 0");
  if (!finite(hot_pixel_factor_min) || !(hot_pixel_factor_min >= 2))
    return bad("noise.hot_pixel_factor_min", hot_pixel_factor_min,
               "finite and >= 2 (a hot pixel stands far above Poisson noise)");
  if (!finite(hot_pixel_factor_max) || !(hot_pixel_factor_max >= hot_pixel_factor_min))
    return bad("noise.hot_pixel_factor_max", hot_pixel_factor_max,
               ">= noise.hot_pixel_factor_min and finite");
  if (!finite(readout_rms_counts) || readout_rms_counts < 0)
    return bad("noise.readout_rms_counts", readout_rms_counts, "finite and >= 0");
  if (!finite(saturation_counts) || saturation_counts < 0)
    return bad("noise.saturation_counts", saturation_counts, "finite and >= 0 (0 = no saturation)");
  if (!finite(delay_jitter_rms_fs) || delay_jitter_rms_fs < 0)
    return bad("noise.delay_jitter_rms_fs", delay_jitter_rms_fs, "finite and >= 0");
  if (!finite(delay_drift_fs_per_row))
    return bad("noise.delay_drift_fs_per_row", delay_drift_fs_per_row, "finite");
  if (!finite(delay_walk_rms_fs) || delay_walk_rms_fs < 0)
    return bad("noise.delay_walk_rms_fs", delay_walk_rms_fs, "finite and >= 0");
  if (!finite(ir_intensity_rms) || ir_intensity_rms < 0 || !(ir_intensity_rms < 1))
    return bad("noise.ir_intensity_rms", ir_intensity_rms, "in [0, 1)");
  if (!finite(cep_jitter_rms_rad) || cep_jitter_rms_rad < 0)
    return bad("noise.cep_jitter_rms_rad", cep_jitter_rms_rad, "finite and >= 0");
  return {};
}

std::string NumericsConfig::validate() const {
  if (!finite(oversampling) || !(oversampling >= 1) || oversampling > 16)
    return bad("numerics.oversampling", oversampling, "in [1, 16]");
  if (!finite(node_threshold) || node_threshold < 0 || node_threshold > 1e-3)
    return bad("numerics.node_threshold", node_threshold, "in [0, 1e-3]");
  if (!finite(edge_tolerance) || !(edge_tolerance > 0) || edge_tolerance > 1e-2)
    return bad("numerics.edge_tolerance", edge_tolerance, "in (0, 1e-2]");
  if (!finite(truth_step_fraction) || !(truth_step_fraction > 0) || truth_step_fraction > 0.2)
    return bad("numerics.truth_step_fraction", truth_step_fraction, "in (0, 0.2]");
  if (threads < 0) return bad("numerics.threads", threads, ">= 0 (0 = OpenMP default)");
  return {};
}

std::string ScanConfig::validate() const {
  std::string m = xuv.validate();
  if (!m.empty()) return m;
  if (!(m = ir.validate()).empty()) return m;
  try {
    (void)find_gas(gas);
  } catch (const Error& e) {
    return std::string("gas = ") + gas + " is invalid: " + e.what();
  }
  if (!finite(dipole_reference_momentum_au) || dipole_reference_momentum_au < 0)
    return bad("dipole_reference_momentum_au", dipole_reference_momentum_au,
               "finite and >= 0 (0 = central momentum)");
  if (!(m = check_axis("energy_eV", geometry.energy_eV, true)).empty()) return m;
  if (geometry.energy_eV.count < 2)
    return bad("energy_eV.count", geometry.energy_eV.count, "at least 2");
  if (geometry.delay_values_fs.empty()) {
    if (!(m = check_axis("delay_fs", geometry.delay_fs, false)).empty()) return m;
  } else {
    const auto& d = geometry.delay_values_fs;
    for (std::size_t i = 0; i < d.size(); ++i) {
      const std::string k = indexed("delay_fs", i);
      if (!finite(d[i])) return bad(k, d[i], "finite");
      if (i > 0 && !(d[i] > d[i - 1]))
        return bad(k, d[i], "larger than the previous delay (strictly ascending)");
    }
  }
  if (ir.kind == IrKind::kNone && (kind == TraceKind::kStreaking || kind == TraceKind::kRabbitt))
    return std::string("kind = ") + sw::to_string(kind) +
           " is invalid with ir.kind = none: a streaking or RABBITT scan needs an IR field "
           "(use kind = xuv_only or give the IR pulse).";
  if (!(m = noise.validate()).empty()) return m;
  if (!(m = numerics.validate()).empty()) return m;
  for (std::size_t i = 0; i < lines.size(); ++i) {
    const LineSpec& l = lines[i];
    const std::string k = indexed("lines", i);
    if (!finite(l.ionization_energy_eV) || l.ionization_energy_eV < 0)
      return bad(k + ".ionization_energy_eV", l.ionization_energy_eV,
                 "finite and >= 0 eV (0 = the gas table's value of the line name)");
    if (!finite(l.relative_strength) || !(l.relative_strength > 0))
      return bad(k + ".relative_strength", l.relative_strength, "a finite factor > 0");
    if (!finite(l.delay_as) || std::abs(l.delay_as) > 1e5)
      return bad(k + ".delay_as", l.delay_as, "finite and within +-1e5 as");
  }
  try {
    (void)resolved_lines();
  } catch (const Error& e) {
    return e.what();
  }
  if (tof.length_m != 0.0 || tof.bins != 0) {
    if (!finite(tof.length_m) || !(tof.length_m > 0) || tof.length_m > 100)
      return bad("tof.length_m", tof.length_m, "a drift length in (0, 100] m");
    if (!finite(tof.t0_ns)) return bad("tof.t0_ns", tof.t0_ns, "finite");
    if (!finite(tof.energy_offset_eV))
      return bad("tof.energy_offset_eV", tof.energy_offset_eV, "finite");
    if (tof.bins != 0 && tof.bins < 2)
      return bad("tof.bins", tof.bins, "0 (as many as energy bins) or >= 2");
    const double lowest_edge = geometry.energy_eV.first - 0.5 * geometry.energy_eV.step;
    if (!(lowest_edge - tof.energy_offset_eV > 0))
      return bad("tof.energy_offset_eV", tof.energy_offset_eV,
                 "below the lowest energy bin edge (energy_eV.first - step/2): electrons need a "
                 "positive drift energy");
  }
  return {};
}

std::vector<ResolvedLine> ScanConfig::resolved_lines() const {
  const Gas& main = find_gas(gas);
  std::vector<ResolvedLine> out;
  if (lines.empty()) {
    out.push_back(
        {main.symbol, main.lines.front().name, main.lines.front().ionization_energy_eV, 1.0, 0.0});
    return out;
  }
  for (std::size_t i = 0; i < lines.size(); ++i) {
    const LineSpec& l = lines[i];
    const std::string k = indexed("lines", i);
    const Gas* g = &main;
    if (!l.gas.empty()) {
      try {
        g = &find_gas(l.gas);
      } catch (const Error& e) {
        throw input_error(k + ".gas = " + l.gas + " is invalid: " + e.what());
      }
    }
    ResolvedLine r{g->symbol, l.name, l.ionization_energy_eV, l.relative_strength, l.delay_as};
    if (r.ionization_energy_eV == 0.0) {
      std::string known;
      for (const GasLine& gl : g->lines) {
        known += (known.empty() ? "" : ", ") + gl.name;
        if (gl.name == l.name) r.ionization_energy_eV = gl.ionization_energy_eV;
      }
      if (r.ionization_energy_eV == 0.0)
        throw input_error(k + ".name = '" + l.name + "' is not a line of " + g->symbol +
                          " in the gas table (" + known +
                          "); give one of those or lines[i].ionization_energy_eV");
    }
    if (r.name.empty()) r.name = "line" + std::to_string(i);
    out.push_back(r);
  }
  return out;
}

}  // namespace sw::synthetic
