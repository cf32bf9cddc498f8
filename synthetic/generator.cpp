#include "synthetic/generator.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <sstream>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/gas.h"
#include "retrieval/physics/pulse_metrics.h"
#include "synthetic/noise.h"
#include "synthetic/random_streams.h"
#include "synthetic/sfa_quadrature.h"
#include "synthetic/tof_recording.h"
#include "synthetic/truth.h"
#include "synthetic/xuv_source.h"

namespace sw::synthetic {

SyntheticScan generate_scan(const ScanConfig& c, unsigned long long seed) {
  const auto start = std::chrono::steady_clock::now();
  const std::string err = c.validate();
  if (!err.empty()) throw usage_error("synthetic scan configuration: " + err);

  const Gas& gas = find_gas(c.gas);
  const std::vector<ResolvedLine> lines = c.resolved_lines();
  // The reference line (the first) sets the central photoelectron energy of the records.
  const double ip = units::eV_to_au(lines.front().ionization_energy_eV);
  const std::vector<double> W_eV = c.geometry.energies_eV();
  const std::vector<double> tau_fs = c.geometry.delays_fs();
  std::vector<double> W(W_eV.size()), tau(tau_fs.size());
  for (std::size_t j = 0; j < W.size(); ++j) W[j] = units::eV_to_au(W_eV[j]);
  for (std::size_t i = 0; i < tau.size(); ++i) tau[i] = units::fs_to_au(tau_fs[i]);

  // Per-row perturbations, drawn before anything runs in parallel.
  RandomStreams streams(seed);
  SyntheticScan out;
  out.rows = draw_row_perturbations(c.noise, tau.size(), streams);
  std::vector<double> tau_actual(tau.size());
  std::vector<IrModifier> mods;
  double max_factor = 1.0;
  for (std::size_t i = 0; i < tau.size(); ++i) {
    tau_actual[i] = tau[i] + units::fs_to_au(out.rows[i].delay_offset_fs);
    max_factor = std::max(max_factor, out.rows[i].intensity_factor);
  }
  if (has_row_perturbations(c.noise))
    for (const RowPerturbation& r : out.rows)
      mods.push_back({r.intensity_factor, r.cep_offset_rad});

  std::optional<GaussianIrPulse> ir;
  if (c.ir.kind == IrKind::kGaussian) ir = c.ir.pulse;

  // Quadrature grid: step from the detuning, the XUV bandwidth and the gate spread.
  const double wc = xuv_carrier_au(c.xuv);
  double detuning = 0;
  for (const ResolvedLine& l : lines)
    for (double w : W)
      detuning = std::max(detuning, std::abs(w + units::eV_to_au(l.ionization_energy_eV) - wc));
  const double B = xuv_half_bandwidth_au(c.xuv);
  const double g = SfaQuadrature::gate_spread(ir, std::sqrt(2.0 * W.back()), max_factor);
  double h = std::min(SfaQuadrature::nyquist_step(detuning, B, g), units::kPi / B) /
             c.numerics.oversampling;
  if (!std::isfinite(h) || !(h > 0)) h = 1.0;  // degenerate spectrum: any step is alias-free
  const BuiltXuv built = build_xuv_auto(c.xuv, h, c.numerics.edge_tolerance);

  const double wref = xuv_carrier_au(c.xuv) - ip;
  QuadratureOptions qo;
  qo.node_threshold = c.numerics.node_threshold;
  qo.threads = c.numerics.threads;
  out.clean = Eigen::MatrixXd::Zero(static_cast<Eigen::Index>(tau.size()),
                                    static_cast<Eigen::Index>(W.size()));
  for (const ResolvedLine& l : lines) {
    const double ip_l = units::eV_to_au(l.ionization_energy_eV);
    const double w_l = wc - ip_l;
    const double kref = c.dipole_reference_momentum_au > 0 ? c.dipole_reference_momentum_au
                        : w_l > 0                          ? std::sqrt(2.0 * w_l)
                                                           : 1.0;
    const SfaQuadrature sfa(built.field, ir, ip_l, DipoleModel(c.dipole, ip_l, kref), qo);
    const double work = static_cast<double>(sfa.active_nodes()) * static_cast<double>(W.size()) *
                        static_cast<double>(tau.size()) * static_cast<double>(lines.size());
    if (work > 2e11) {
      std::ostringstream s;
      s << "synthetic scan: " << sfa.active_nodes() << " quadrature nodes x " << W.size()
        << " energies x " << tau.size() << " delays x " << lines.size()
        << " lines is too large to evaluate (> 2e11 terms); shorten the XUV field (xuv.*), the "
        << "energy axis (energy_eV) or the delay axis (delay_fs)";
      throw usage_error(s.str());
    }
    // E_X(t - tau - d): the line's amplitude at delay tau is the plain amplitude at tau + d.
    std::vector<double> tau_l = tau_actual;
    for (double& x : tau_l) x += units::as_to_au(l.delay_as);
    const Eigen::MatrixXd d = l.relative_strength * sfa.density(tau_l, W, mods);
    out.line_totals.push_back(d.sum());
    out.clean += d;
    out.quadrature_nodes = std::max(out.quadrature_nodes, sfa.active_nodes());
  }
  out.quadrature_step_au = built.field.grid().dt();
  std::optional<VolkovTable> ir_table;
  if (ir) ir_table.emplace(*ir);

  // Detector noise.
  Eigen::MatrixXd counts = out.clean;
  if (!(counts.maxCoeff() > 0)) {
    std::ostringstream s;
    s << "synthetic scan: the photoelectron spectrum is zero on the energy axis " << W_eV.front()
      << ".." << W_eV.back() << " eV; with the XUV centred at " << units::au_to_eV(wc)
      << " eV and Ip(" << gas.symbol << ") = " << gas.ionization_energy_eV
      << " eV the electrons appear near " << units::au_to_eV(wref)
      << " eV: adjust energy_eV.first/step/count";
    throw input_error(s.str());
  }
  std::vector<double> axis_eV = W_eV;  // column axis of the recorded counts
  if (c.tof.enabled()) {
    // Energy resolution acts in energy; then counts per energy bin move to flight-time bins.
    if (c.noise.resolution != ResolutionKind::kNone)
      EnergyResolution(
          c.noise.resolution == ResolutionKind::kConstant ? c.noise.resolution_fwhm_eV : 0.0,
          c.noise.resolution == ResolutionKind::kRelative ? c.noise.resolution_relative : 0.0)
          .apply(counts, W_eV, streams);
    const TofRecorder rec(c.tof, W_eV);
    counts = rec.rebin(counts * c.geometry.energy_eV.step);
    // Constant background per time bin + the low-energy tail (counts per energy bin) moved.
    const Background tail(0.0, c.noise.background_exp_counts, c.noise.background_exp_decay_eV,
                          c.noise.background_exp_onset_eV);
    Eigen::MatrixXd tail_e(1, static_cast<Eigen::Index>(W_eV.size()));
    for (std::size_t j = 0; j < W_eV.size(); ++j)
      tail_e(0, static_cast<Eigen::Index>(j)) = tail.level(W_eV[j]);
    const Eigen::MatrixXd tail_t = rec.rebin(tail_e);
    std::vector<double> level(static_cast<std::size_t>(counts.cols()));
    for (std::size_t k = 0; k < level.size(); ++k)
      level[k] = c.noise.background_counts + tail_t(0, static_cast<Eigen::Index>(k));
    out.hot_pixels = draw_hot_pixels(c.noise, counts.rows(), counts.cols(), streams);
    axis_eV = rec.energy_eV();
    apply_noise(make_time_bin_pipeline(c.noise, level, out.hot_pixels), counts, axis_eV, streams);
    TofRecording tr;
    tr.tof_ns = rec.tof_ns();
    tr.length_m = c.tof.length_m;
    tr.t0_ns = c.tof.t0_ns;
    tr.energy_offset_eV = c.tof.energy_offset_eV;
    out.tof = tr;
  } else {
    out.hot_pixels = draw_hot_pixels(c.noise, counts.rows(), counts.cols(), streams);
    apply_noise(make_noise_pipeline(c.noise, out.hot_pixels), counts, W_eV, streams);
  }

  // Trace.
  Trace& t = out.trace;
  t.energy_au.resize(axis_eV.size());
  for (std::size_t j = 0; j < axis_eV.size(); ++j) t.energy_au[j] = units::eV_to_au(axis_eV[j]);
  t.delay_au = tau;
  t.counts = std::move(counts);
  t.meta.gas = gas.symbol;
  t.meta.ir_wavelength_nm = ir ? ir->wavelength_nm : 0.0;
  t.meta.kind = c.kind;
  t.meta.scale = 1.0;
  if (c.noise.resolution == ResolutionKind::kConstant)
    t.meta.energy_resolution_eV = c.noise.resolution_fwhm_eV;
  else if (c.noise.resolution == ResolutionKind::kRelative)
    t.meta.energy_resolution_eV =
        c.noise.resolution_relative *
        (wref > 0 ? units::au_to_eV(wref) : 0.5 * (W_eV.front() + W_eV.back()));
  if (c.noise.background_exp_counts == 0 && c.noise.background_counts > 0 && !c.tof.enabled())
    t.meta.background = c.noise.background_counts;
  {
    std::ostringstream n;
    n << "synthetic scan" << (c.name.empty() ? "" : " '" + c.name + "'") << ", seed " << seed
      << ", SFA by direct quadrature (full momentum dependence)";
    if (c.noise.resolution == ResolutionKind::kRelative)
      n << ", energy resolution dE/E = " << c.noise.resolution_relative;
    if (c.tof.enabled())
      n << ", recorded on " << axis_eV.size() << " flight-time bins (drift " << c.tof.length_m
        << " m)";
    t.meta.notes = n.str();
  }
  t.validate("synthetic scan");

  // Truth record from the exact field, sampled finely for the metrics.
  const double tl = transform_limited_fwhm(built.field);
  const double fine_step = tl > 0 ? c.numerics.truth_step_fraction * tl : built.field.grid().dt();
  // ... and with spectral bins of 1/32 of the spectral width (time window >= 2 pi / bin).
  const double min_window = units::kTwoPi / (xuv_spectral_scale_au(c.xuv) / 32.0);
  out.xuv = refine_xuv(c.xuv, built.field.grid(), fine_step, min_window);
  out.truth = make_truth(c, out.xuv, ir_table ? &*ir_table : nullptr);
  out.truth.lines = truth_lines(
      lines, out.line_totals, out.truth.xuv->center_photon_energy_eV.value_or(units::au_to_eV(wc)));
  out.parameters = generator_parameters(c, seed, out.quadrature_step_au, out.quadrature_nodes,
                                        built.field.grid().window(), out.rows);
  if (!out.hot_pixels.empty()) {
    std::vector<double> r, k, f;
    for (const HotPixel& hp : out.hot_pixels) {
      r.push_back(static_cast<double>(hp.row));
      k.push_back(static_cast<double>(hp.col));
      f.push_back(hp.factor);
    }
    out.parameters.push_back({"generator.realized.hot_pixel_row", r});
    out.parameters.push_back({"generator.realized.hot_pixel_column", k});
    out.parameters.push_back({"generator.realized.hot_pixel_factor", f});
  }
  out.truth.extra = out.parameters;
  if (!built.edges_ok) {
    std::ostringstream s;
    s << "the XUV field still reaches " << built.edge_level
      << " of its peak at the edges of the largest time window ("
      << units::au_to_fs(built.field.grid().window())
      << " fs); the simulated trace may carry wrap-around artefacts";
    out.truth.warnings.push_back(s.str());
  }
  out.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  return out;
}

Trace redraw_counts(const SyntheticScan& scan, double peak_counts, unsigned long long seed) {
  if (scan.tof || scan.clean.rows() != static_cast<Eigen::Index>(scan.trace.num_delays()) ||
      scan.clean.cols() != static_cast<Eigen::Index>(scan.trace.num_energies()))
    throw usage_error("redraw_counts: the scan is not recorded on its energy axis.");
  NoiseConfig noise;
  noise.peak_counts = peak_counts;
  RandomStreams streams(seed);
  Trace t = scan.trace;
  t.counts = scan.clean;
  apply_noise(make_noise_pipeline(noise), t.counts, {}, streams);
  return t;
}

}  // namespace sw::synthetic
