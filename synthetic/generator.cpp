#include "synthetic/generator.h"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <sstream>

#include "retrieval/error.h"
#include "retrieval/gas.h"
#include "retrieval/pulse_metrics.h"
#include "retrieval/units.h"
#include "synthetic/noise.h"
#include "synthetic/random_streams.h"
#include "synthetic/sfa_quadrature.h"
#include "synthetic/truth.h"
#include "synthetic/xuv_source.h"

namespace sw::synthetic {

SyntheticScan generate_scan(const ScanConfig& c, unsigned long long seed) {
  const auto start = std::chrono::steady_clock::now();
  const std::string err = c.validate();
  if (!err.empty()) throw usage_error("synthetic scan configuration: " + err);

  const Gas& gas = find_gas(c.gas);
  const double ip = units::eV_to_au(gas.ionization_energy_eV);
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
  for (double w : W) detuning = std::max(detuning, std::abs(w + ip - wc));
  const double B = xuv_half_bandwidth_au(c.xuv);
  const double g = SfaQuadrature::gate_spread(ir, std::sqrt(2.0 * W.back()), max_factor);
  double h = std::min(SfaQuadrature::nyquist_step(detuning, B, g), units::kPi / B) /
             c.numerics.oversampling;
  if (!std::isfinite(h) || !(h > 0)) h = 1.0;  // degenerate spectrum: any step is alias-free
  const BuiltXuv built = build_xuv_auto(c.xuv, h, c.numerics.edge_tolerance);

  const double wref = xuv_carrier_au(c.xuv) - ip;
  const double kref = c.dipole_reference_momentum_au > 0 ? c.dipole_reference_momentum_au
                      : wref > 0                         ? std::sqrt(2.0 * wref)
                                                         : 1.0;
  QuadratureOptions qo;
  qo.node_threshold = c.numerics.node_threshold;
  qo.threads = c.numerics.threads;
  const SfaQuadrature sfa(built.field, ir, ip, DipoleModel(c.dipole, ip, kref), qo);
  const double work = static_cast<double>(sfa.active_nodes()) * static_cast<double>(W.size()) *
                      static_cast<double>(tau.size());
  if (work > 2e11) {
    std::ostringstream s;
    s << "synthetic scan: " << sfa.active_nodes() << " quadrature nodes x " << W.size()
      << " energies x " << tau.size() << " delays is too large to evaluate (> 2e11 terms); "
      << "shorten the XUV field (xuv.*), the energy axis (energy_eV) or the delay axis (delay_fs)";
    throw usage_error(s.str());
  }
  out.clean = sfa.density(tau_actual, W, mods);
  out.quadrature_step_au = built.field.grid().dt();
  out.quadrature_nodes = sfa.active_nodes();

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
  apply_noise(make_noise_pipeline(c.noise), counts, W_eV, streams);

  // Trace.
  Trace& t = out.trace;
  t.energy_au = W;
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
  if (c.noise.background_exp_counts == 0 && c.noise.background_counts > 0)
    t.meta.background = c.noise.background_counts;
  {
    std::ostringstream n;
    n << "synthetic scan" << (c.name.empty() ? "" : " '" + c.name + "'") << ", seed " << seed
      << ", SFA by direct quadrature (full momentum dependence)";
    if (c.noise.resolution == ResolutionKind::kRelative)
      n << ", energy resolution dE/E = " << c.noise.resolution_relative;
    t.meta.notes = n.str();
  }
  t.validate("synthetic scan");

  // Truth record from the exact field, sampled finely for the metrics.
  const double tl = transform_limited_fwhm(built.field);
  const double fine_step = tl > 0 ? c.numerics.truth_step_fraction * tl : built.field.grid().dt();
  // ... and with spectral bins of 1/32 of the spectral width (time window >= 2 pi / bin).
  const double min_window = units::kTwoPi / (xuv_spectral_scale_au(c.xuv) / 32.0);
  out.xuv = refine_xuv(c.xuv, built.field.grid(), fine_step, min_window);
  out.truth = make_truth(c, out.xuv, sfa.ir_table());
  out.parameters = generator_parameters(c, seed, out.quadrature_step_au, out.quadrature_nodes,
                                        built.field.grid().window(), out.rows);
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

}  // namespace sw::synthetic
