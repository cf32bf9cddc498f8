#include "synthetic/config_fields.h"

#include "retrieval/core/error.h"

namespace sw::synthetic {

namespace {

// Visits an enum through its name: to_string before, parse after (visitors keep the value in
// `allowed`, so the parse cannot fail for a well-behaved visitor).
template <class E, class ToString, class Parse>
void visit_enum(FieldVisitor& v, const std::string& key, E& e, ToString to_str, Parse parse,
                const std::vector<std::string>& allowed) {
  std::string s = to_str(e);
  v.choice(key, s, allowed);
  if (!parse(s, &e))
    throw Error(ErrorKind::kInternal, "visit_fields: '" + s + "' is not a value of " + key);
}

void visit_burst(FieldVisitor& v, const std::string& p, GaussianXuvPulse& b) {
  v.number(p + "center_eV", b.center_eV);
  v.number(p + "transform_limited_fwhm_as", b.transform_limited_fwhm_as);
  v.number(p + "gdd_as2", b.gdd_as2);
  v.number(p + "tod_as3", b.tod_as3);
  v.number(p + "center_time_as", b.center_time_as);
}

void visit_axis(FieldVisitor& v, const std::string& p, AxisSpec& a) {
  v.number(p + "first", a.first);
  v.number(p + "step", a.step);
  v.integer(p + "count", a.count);
}

}  // namespace

void visit_fields(ScanConfig& c, FieldVisitor& v) {
  v.text("name", c.name);
  v.text("gas", c.gas);
  visit_enum(
      v, "dipole", c.dipole, [](DipoleKind k) { return sw::to_string(k); },
      [](const std::string& s, DipoleKind* o) { return parse_dipole_kind(s, o); },
      {"constant", "hydrogenic"});
  v.number("dipole_reference_momentum_au", c.dipole_reference_momentum_au);
  visit_enum(
      v, "kind", c.kind, [](TraceKind k) { return sw::to_string(k); },
      [](const std::string& s, TraceKind* o) { return parse_trace_kind(s, o); },
      {"streaking", "rabbitt", "xuv_only", ""});
  visit_enum(
      v, "output_format", c.output_format, [](TraceFormat f) { return to_string(f); },
      [](const std::string& s, TraceFormat* o) { return parse_trace_format(s, o); },
      {"png16", "tiff", "csv"});

  visit_enum(
      v, "xuv.kind", c.xuv.kind, [](XuvKind k) { return to_string(k); },
      [](const std::string& s, XuvKind* o) { return parse_xuv_kind(s, o); },
      {"gaussian", "train", "satellites", "tabulated"});
  visit_burst(v, "xuv.gaussian.", c.xuv.gaussian);
  visit_burst(v, "xuv.train.burst.", c.xuv.train.burst);
  v.number("xuv.train.driver_wavelength_nm", c.xuv.train.driver_wavelength_nm);
  v.number("xuv.train.train_fwhm_fs", c.xuv.train.train_fwhm_fs);
  v.integer("xuv.train.max_bursts", c.xuv.train.max_bursts);
  visit_burst(v, "xuv.satellites.burst.", c.xuv.satellites.burst);
  v.number("xuv.satellites.driver_wavelength_nm", c.xuv.satellites.driver_wavelength_nm);
  v.number("xuv.satellites.satellite_intensity_ratio_before",
           c.xuv.satellites.satellite_intensity_ratio_before);
  v.number("xuv.satellites.satellite_intensity_ratio_after",
           c.xuv.satellites.satellite_intensity_ratio_after);
  v.number("xuv.tabulated.carrier_eV", c.xuv.tabulated.carrier_eV);
  v.numbers("xuv.tabulated.photon_energy_eV", c.xuv.tabulated.photon_energy_eV);
  v.numbers("xuv.tabulated.spectral_intensity", c.xuv.tabulated.spectral_intensity);
  v.numbers("xuv.tabulated.spectral_phase_rad", c.xuv.tabulated.spectral_phase_rad);

  visit_enum(
      v, "ir.kind", c.ir.kind, [](IrKind k) { return to_string(k); },
      [](const std::string& s, IrKind* o) { return parse_ir_kind(s, o); }, {"gaussian", "none"});
  v.number("ir.wavelength_nm", c.ir.pulse.wavelength_nm);
  v.number("ir.fwhm_fs", c.ir.pulse.fwhm_fs);
  v.number("ir.peak_intensity_Wcm2", c.ir.pulse.peak_intensity_Wcm2);
  v.number("ir.cep_rad", c.ir.pulse.cep_rad);
  v.number("ir.chirp_rad_per_fs2", c.ir.pulse.chirp_rad_per_fs2);
  v.number("ir.center_fs", c.ir.pulse.center_fs);

  visit_axis(v, "energy_eV.", c.geometry.energy_eV);
  visit_axis(v, "delay_fs.", c.geometry.delay_fs);
  v.numbers("delay_fs.values", c.geometry.delay_values_fs);

  v.lines("lines", c.lines);
  v.number("tof.length_m", c.tof.length_m);
  v.number("tof.t0_ns", c.tof.t0_ns);
  v.number("tof.energy_offset_eV", c.tof.energy_offset_eV);
  v.integer("tof.bins", c.tof.bins);

  NoiseConfig& n = c.noise;
  visit_enum(
      v, "noise.resolution", n.resolution, [](ResolutionKind k) { return to_string(k); },
      [](const std::string& s, ResolutionKind* o) { return parse_resolution_kind(s, o); },
      {"none", "constant", "relative"});
  v.number("noise.resolution_fwhm_eV", n.resolution_fwhm_eV);
  v.number("noise.resolution_relative", n.resolution_relative);
  v.number("noise.peak_counts", n.peak_counts);
  v.number("noise.background_counts", n.background_counts);
  v.number("noise.background_exp_counts", n.background_exp_counts);
  v.number("noise.background_exp_decay_eV", n.background_exp_decay_eV);
  v.number("noise.background_exp_onset_eV", n.background_exp_onset_eV);
  v.boolean("noise.poisson", n.poisson);
  v.number("noise.readout_rms_counts", n.readout_rms_counts);
  v.number("noise.saturation_counts", n.saturation_counts);
  v.integer("noise.hot_pixels", n.hot_pixels);
  v.number("noise.hot_pixel_factor_min", n.hot_pixel_factor_min);
  v.number("noise.hot_pixel_factor_max", n.hot_pixel_factor_max);
  v.number("noise.delay_jitter_rms_fs", n.delay_jitter_rms_fs);
  v.number("noise.delay_drift_fs_per_row", n.delay_drift_fs_per_row);
  v.number("noise.delay_walk_rms_fs", n.delay_walk_rms_fs);
  v.number("noise.ir_intensity_rms", n.ir_intensity_rms);
  v.number("noise.cep_jitter_rms_rad", n.cep_jitter_rms_rad);

  NumericsConfig& q = c.numerics;
  v.number("numerics.oversampling", q.oversampling);
  v.number("numerics.node_threshold", q.node_threshold);
  v.number("numerics.edge_tolerance", q.edge_tolerance);
  v.number("numerics.truth_step_fraction", q.truth_step_fraction);
  v.integer("numerics.threads", q.threads);
}

namespace {

class KeyCollector : public FieldVisitor {
 public:
  std::vector<std::string> keys;
  void number(const std::string& k, double&) override { keys.push_back(k); }
  void integer(const std::string& k, int&) override { keys.push_back(k); }
  void boolean(const std::string& k, bool&) override { keys.push_back(k); }
  void text(const std::string& k, std::string&) override { keys.push_back(k); }
  void choice(const std::string& k, std::string&, const std::vector<std::string>&) override {
    keys.push_back(k);
  }
  void numbers(const std::string& k, std::vector<double>&) override { keys.push_back(k); }
  void lines(const std::string& k, std::vector<LineSpec>&) override { keys.push_back(k); }
};

class ParamCollector : public FieldVisitor {
 public:
  explicit ParamCollector(std::string prefix) : prefix_(std::move(prefix)) {}
  std::vector<Param> params;
  void number(const std::string& k, double& v) override { params.push_back({prefix_ + k, v}); }
  void integer(const std::string& k, int& v) override {
    params.push_back({prefix_ + k, static_cast<long long>(v)});
  }
  void boolean(const std::string& k, bool& v) override { params.push_back({prefix_ + k, v}); }
  void text(const std::string& k, std::string& v) override { params.push_back({prefix_ + k, v}); }
  void choice(const std::string& k, std::string& v, const std::vector<std::string>&) override {
    params.push_back({prefix_ + k, v});
  }
  void numbers(const std::string& k, std::vector<double>& v) override {
    params.push_back({prefix_ + k, v});
  }
  // One record per line field as parallel lists: names and gases comma-separated, numbers as
  // arrays (empty lines = the gas's outer-valence line).
  void lines(const std::string& k, std::vector<LineSpec>& v) override {
    std::string names, gases;
    std::vector<double> ip, strength, delay;
    for (const LineSpec& l : v) {
      names += (names.empty() ? "" : ",") + l.name;
      gases += (gases.empty() ? "" : ",") + l.gas;
      ip.push_back(l.ionization_energy_eV);
      strength.push_back(l.relative_strength);
      delay.push_back(l.delay_as);
    }
    params.push_back({prefix_ + k + ".name", names});
    params.push_back({prefix_ + k + ".gas", gases});
    params.push_back({prefix_ + k + ".ionization_energy_eV", ip});
    params.push_back({prefix_ + k + ".relative_strength", strength});
    params.push_back({prefix_ + k + ".delay_as", delay});
  }

 private:
  std::string prefix_;
};

}  // namespace

std::vector<std::string> config_keys() {
  ScanConfig c;
  KeyCollector k;
  visit_fields(c, k);
  return k.keys;
}

std::vector<Param> config_parameters(const ScanConfig& config, const std::string& prefix) {
  ScanConfig c = config;  // visit_fields takes a mutable reference; the collector only reads
  ParamCollector p(prefix);
  visit_fields(c, p);
  return p.params;
}

}  // namespace sw::synthetic
