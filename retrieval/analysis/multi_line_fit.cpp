#include "retrieval/analysis/multi_line_fit.h"

#include <algorithm>
#include <cmath>
#include <stdexcept>
#include <string>

#include "retrieval/analysis/quality.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/full_model_engine.h"

namespace sw {

JointLineProblem joint_line_problem(const Trace& trace, const PreprocessOptions& options,
                                    const RetrievalProblem& single, const PreprocessSummary& ss,
                                    const std::vector<LineEntry>& lines,
                                    const std::vector<char>& joint,
                                    const std::vector<double>& delay_as,
                                    const std::vector<double>& strength) {
  JointLineProblem J;
  for (std::size_t k = 0; k < lines.size(); ++k)
    if (lines[k].reference) J.reference = static_cast<int>(k);
  if (J.reference < 0) {
    J.why_not = "no reference line";
    return J;
  }
  if (joint.size() != lines.size() || delay_as.size() != lines.size() ||
      strength.size() != lines.size())
    throw Error(ErrorKind::kInternal, "joint_line_problem: per-line arrays differ from the lines");
  const LineEntry& ref = lines[static_cast<std::size_t>(J.reference)];
  const double axis_lo = units::au_to_eV(trace.energy_au.front()),
               axis_hi = units::au_to_eV(trace.energy_au.back());
  // 1. the reference's window moved by each joint line's offset (thresholds: exact spacing).
  const double w_lo = ss.window_hi_eV > ss.window_lo_eV ? ss.window_lo_eV : axis_lo;
  const double w_hi = ss.window_hi_eV > ss.window_lo_eV ? ss.window_hi_eV : axis_hi;
  double lo = w_lo, hi = w_hi;
  std::vector<int> use;
  for (std::size_t k = 0; k < lines.size(); ++k) {
    if (!joint[k] || lines[k].reference) continue;
    const double shift = ref.ionization_energy_eV - lines[k].ionization_energy_eV;
    lo = std::min(lo, w_lo + shift);
    hi = std::max(hi, w_hi + shift);
    use.push_back(static_cast<int>(k));
  }
  if (use.empty()) {
    J.why_not = "no other line to fit jointly";
    return J;
  }
  lo = std::max(lo, axis_lo);
  hi = std::min(hi, axis_hi);
  PreprocessOptions po = options;
  po.energy_window_lo_eV = lo;
  po.energy_window_hi_eV = hi;
  RetrievalProblem P = preprocess(trace, po, &J.summary);
  if (P.energy_au.size() < 2 || single.energy_au.size() < 2 ||
      std::abs((P.energy_au[1] - P.energy_au[0]) / (single.energy_au[1] - single.energy_au[0]) -
               1.0) > 1e-9) {
    J.why_not = "the joint window's energy step differs from the single-line problem's";
    return J;
  }
  // 2. the reference line's XUV support and carrier.
  const double s_lo =
      single.support_hi_au > single.support_lo_au ? single.support_lo_au : single.energy_au.front();
  const double s_hi =
      single.support_hi_au > single.support_lo_au ? single.support_hi_au : single.energy_au.back();
  P.support_lo_au = s_lo;
  P.support_hi_au = s_hi;
  P.central_momentum_au = single.central_momentum_au;
  P.ionization_energy_au = single.ionization_energy_au;
  P.dipole = single.dipole;
  P.field_free_spectrum.resize(P.energy_au.size(), 0.0);
  for (std::size_t j = 0; j < P.energy_au.size(); ++j)
    if (P.energy_au[j] < s_lo || P.energy_au[j] > s_hi) P.field_free_spectrum[j] = 0.0;
  // 3. the other lines over the columns whose photon energies the XUV grid holds.
  const double carrier = FullModelObjective::carrier_for(P);
  const double half_band = 0.45 * static_cast<double>(P.grid.size()) * P.grid.dw();
  for (int k : use) {
    const LineEntry& e = lines[static_cast<std::size_t>(k)];
    ExtraLine L;
    L.name = e.gas.empty() || e.gas == ref.gas ? e.name : e.gas + " " + e.name;
    L.ionization_energy_au = units::eV_to_au(e.ionization_energy_eV);
    L.energy_lo_au = std::max(P.energy_au.front(), carrier - L.ionization_energy_au - half_band);
    L.energy_hi_au = std::min(P.energy_au.back(), carrier - L.ionization_energy_au + half_band);
    if (!(L.energy_hi_au - L.energy_lo_au > 8 * P.grid.dw())) continue;
    L.strength = std::clamp(strength[static_cast<std::size_t>(k)], 1e-3, 1e3);
    L.delay_au = units::as_to_au(std::isfinite(delay_as[static_cast<std::size_t>(k)])
                                     ? delay_as[static_cast<std::size_t>(k)]
                                     : 0.0);
    P.extra_lines.push_back(L);
    J.line_index.push_back(k);
  }
  if (P.extra_lines.empty()) {
    J.why_not = "no other line falls inside the XUV grid's band";
    return J;
  }
  J.problem = std::move(P);
  J.ok = true;
  return J;
}

JointLineValues joint_line_values(const Reconstruction& r, std::size_t n) {
  JointLineValues v;
  v.delay_as.assign(n, NAN);
  v.strength.assign(n, NAN);
  v.dipole_strength.assign(n, NAN);
  v.delay_before_polish_as.assign(n, NAN);
  v.delay_curvature_sigma_as.assign(n, NAN);
  for (const auto& [key, value] : r.settings) {
    if (key.rfind("joint_line.", 0) != 0) continue;
    const std::size_t dot = key.find('.', 11);
    if (dot == std::string::npos) continue;
    const std::size_t l = std::stoul(key.substr(11, dot - 11));
    if (l >= n) continue;
    const std::string what = key.substr(dot + 1);
    if (what == "delay_as")
      v.delay_as[l] = std::stod(value);
    else if (what == "counts_ratio")
      v.strength[l] = std::stod(value);
    else if (what == "strength")
      v.dipole_strength[l] = std::stod(value);
    else if (what == "delay_before_polish_as")
      v.delay_before_polish_as[l] = std::stod(value);
    else if (what == "delay_curvature_sigma_as")
      v.delay_curvature_sigma_as[l] = std::stod(value);
  }
  for (std::size_t l = 0; l < n; ++l)
    if (!std::isfinite(v.delay_as[l]) || !std::isfinite(v.strength[l]))
      throw Error(ErrorKind::kInternal, "joint_line_values: the reconstruction (" + r.engine +
                                            ") carries no joint-line values for line " +
                                            std::to_string(l));
  return v;
}

namespace {

// Per line of ld.lines: joint flag, initial delay and strength (centre of energy).
void initial_values(const LineDelayResult& ld, const std::vector<int>* only,
                    std::vector<char>* flags, std::vector<double>* delay,
                    std::vector<double>* strength) {
  const std::size_t n = ld.lines.size();
  flags->assign(n, 0);
  delay->assign(n, 0.0);
  strength->assign(n, 0.3);
  for (std::size_t k = 0; k < n; ++k) {
    const LineEntry& e = ld.lines[k];
    if (e.reference || !e.relative_delay_as) continue;
    (*flags)[k] = 1;
    (*delay)[k] = *e.relative_delay_as;
    if (e.relative_strength && *e.relative_strength > 0) (*strength)[k] = *e.relative_strength;
  }
  if (only) {
    std::vector<char> f(n, 0);
    for (int k : *only) f[static_cast<std::size_t>(k)] = (*flags)[static_cast<std::size_t>(k)];
    *flags = f;
  }
}

// The full model's start on the joint problem `jp`: the single-line result, or (step 4 of the
// header) the joint CMA's result when `cma` asks for it, whose line delays and strengths then
// replace the centre-of-energy ones in jp.problem.extra_lines. Throws what the CMA run throws.
EngineOptions joint_start(JointLineProblem& jp, const Reconstruction& single_rec,
                          const EngineOptions& eo, const EngineOptions* cma,
                          const std::string& stage, const EngineRunner& run,
                          std::optional<Reconstruction>* cma_rec) {
  EngineOptions jo = eo;
  jo.initial_xuv = single_rec.xuv;
  jo.initial_ir = single_rec.ir;
  if (!cma || !cma->settings.ptychographic.joint_lines) return jo;
  EngineOptions co = *cma;
  co.initial_xuv = single_rec.xuv;
  co.initial_ir = single_rec.ir;
  Reconstruction c = run(jp.problem, "ptychographic", co, stage + " (joint lines, CMA)");
  const JointLineValues v = joint_line_values(c, jp.line_index.size());
  for (std::size_t l = 0; l < jp.problem.extra_lines.size(); ++l) {
    jp.problem.extra_lines[l].delay_au = units::as_to_au(v.delay_as[l]);
    if (std::isfinite(v.dipole_strength[l]))
      jp.problem.extra_lines[l].strength = std::clamp(v.dipole_strength[l], 1e-3, 1e3);
  }
  jo.initial_xuv = c.xuv;
  jo.initial_ir = c.ir;
  *cma_rec = std::move(c);
  return jo;
}

}  // namespace

JointLineStep joint_line_estimate(const Trace& trace, const PreprocessOptions& popt,
                                  const LineDelayOptions& lopt, const RetrievalProblem& single,
                                  const PreprocessSummary& summary,
                                  const Reconstruction& single_rec, const EngineOptions& eo,
                                  const EngineRunner& run, const EngineOptions* cma) {
  JointLineStep S;
  std::vector<double> bg(trace.energy_au.size());
  for (std::size_t j = 0; j < bg.size(); ++j)
    bg[j] = summary.background.at(units::au_to_eV(trace.energy_au[j]));
  S.centre_of_energy = measure_line_delays(trace, summary.lines, bg, lopt);
  const LineDelayResult& ld = *S.centre_of_energy;
  if (!ld.done || !lopt.joint_fit) return S;
  std::vector<char> flags;
  std::vector<double> delay, strength;
  initial_values(ld, nullptr, &flags, &delay, &strength);
  S.joint = joint_line_problem(trace, popt, single, summary, ld.lines, flags, delay, strength);
  if (!S.joint.ok) {
    S.warnings.push_back("joint fit of the lines not run: " + S.joint.why_not +
                         "; the centre-of-energy delays are reported");
    return S;
  }
  try {
    EngineOptions jo = eo;
    try {
      jo = joint_start(S.joint, single_rec, eo, cma, "joint lines", run, &S.cma_reconstruction);
    } catch (const Error& e) {
      jo = joint_start(S.joint, single_rec, eo, nullptr, "", run, &S.cma_reconstruction);
      S.warnings.push_back(std::string("joint CMA fit of the lines failed (") + e.what() +
                           "); the joint full model starts from the single-line result");
    }
    S.reconstruction = run(S.joint.problem, "full-model", jo, "joint lines");
    S.values = joint_line_values(S.reconstruction, S.joint.line_index.size());
    S.used = true;
  } catch (const Error& e) {
    S.warnings.push_back(std::string("joint fit of the lines failed (") + e.what() +
                         "); the single-line pulse and the centre-of-energy delays are reported");
  }
  return S;
}

std::optional<Reconstruction> joint_line_replica(
    JointLineStep& S, int index, const Trace& replica, const PreprocessOptions& popt,
    const RetrievalProblem& single, const PreprocessSummary& summary,
    const Reconstruction& single_rec, const EngineOptions& eo, const std::string& stage,
    const EngineRunner& run, const EngineOptions* cma) {
  if (!S.used) return std::nullopt;
  if (index < 0 || static_cast<std::size_t>(index) >= S.replicas.size())
    throw std::logic_error("joint_line_replica: replica index outside JointLineStep::replicas");
  std::vector<char> flags;
  std::vector<double> delay, strength;
  initial_values(*S.centre_of_energy, &S.joint.line_index, &flags, &delay, &strength);
  JointLineProblem jp = joint_line_problem(replica, popt, single, summary,
                                           S.centre_of_energy->lines, flags, delay, strength);
  if (!jp.ok || jp.line_index != S.joint.line_index) return std::nullopt;
  try {
    std::optional<Reconstruction> cma_rec;
    EngineOptions jo = eo;
    try {
      jo = joint_start(jp, single_rec, eo, cma, stage, run, &cma_rec);
    } catch (const Error&) {
      jo = joint_start(jp, single_rec, eo, nullptr, stage, run, &cma_rec);
    }
    Reconstruction r = run(jp.problem, "full-model", jo, stage + " (joint lines)");
    S.replicas[static_cast<std::size_t>(index)] = joint_line_values(r, jp.line_index.size());
    return r;
  } catch (const Error&) {
    return std::nullopt;
  }
}

void joint_line_report(const JointLineStep& S, int bootstrap, std::vector<LineEntry>* lines,
                       std::vector<Param>* extra, std::vector<LineCurve>* curves) {
  if (!S.centre_of_energy || !S.centre_of_energy->done) return;
  const LineDelayResult& ld = *S.centre_of_energy;
  *lines = ld.lines;
  for (const Param& p : ld.extra) extra->push_back(p);
  *curves = ld.curves;
  if (!S.used) return;
  extra->push_back({"line_delays.joint_fit.trace_error", S.reconstruction.trace_error});
  extra->push_back(
      {"line_delays.joint_fit.noise_floor_trace_error", S.reconstruction.noise_floor_trace_error});
  extra->push_back({"line_delays.joint_fit.window_lo_eV", S.joint.summary.window_lo_eV});
  extra->push_back({"line_delays.joint_fit.window_hi_eV", S.joint.summary.window_hi_eV});
  // The replicas' values per joint line, in replica order.
  const std::size_t nl = S.joint.line_index.size();
  std::vector<std::vector<double>> rep_delay(nl), rep_strength(nl);
  long long failed = 0;
  for (const std::optional<JointLineValues>& v : S.replicas) {
    if (!v) {
      ++failed;
      continue;
    }
    for (std::size_t l = 0; l < nl; ++l) {
      rep_delay[l].push_back(v->delay_as[l]);
      rep_strength[l].push_back(v->strength[l]);
    }
  }
  extra->push_back({"line_delays.joint_fit.replicas_failed", failed});
  for (std::size_t l = 0; l < S.joint.line_index.size(); ++l) {
    LineEntry& e = (*lines)[static_cast<std::size_t>(S.joint.line_index[l])];
    e.relative_delay_as_centre_of_energy = e.relative_delay_as;
    e.relative_delay_as_centre_of_energy_sigma = e.relative_delay_as_sigma;
    e.relative_strength_centre_of_energy = e.relative_strength;
    e.relative_strength_centre_of_energy_sigma = e.relative_strength_sigma;
    e.delay_method = "joint full-model fit";
    const std::string key =
        "line_delays.joint_fit." + (e.gas.empty() ? std::string() : e.gas + "_") + e.name;
    extra->push_back({key + ".delay_as_estimate", S.values.delay_as[l]});
    extra->push_back({key + ".dipole_strength", S.values.dipole_strength[l]});
    if (std::isfinite(S.values.delay_curvature_sigma_as[l])) {
      extra->push_back({key + ".delay_as_before_polish", S.values.delay_before_polish_as[l]});
      extra->push_back({key + ".delay_as_sigma_curvature", S.values.delay_curvature_sigma_as[l]});
    }
    const std::size_t reps = rep_delay[l].size();
    extra->push_back({key + ".replicas", static_cast<long long>(reps)});
    if (bootstrap >= 2 && reps >= 2) {
      // The same rule as the headline numbers (retrieval/analysis/quality.h, retrieve.h).
      const BootstrapEstimate bd = bootstrap_estimate(S.values.delay_as[l], rep_delay[l], 0.0);
      const BootstrapEstimate bs = bootstrap_estimate(S.values.strength[l], rep_strength[l], 0.0);
      // The delay's sigma is never below the curvature sigma of the joint fit (the cost's
      // curvature in the delay with the rest held: the Cramer-Rao bound at the fit, which no
      // unbiased estimate beats), since the spread of the few headline replicas is itself
      // uncertain by ~1/sqrt(2(B - 1)) (27 % at B = 8). Without a curvature sigma (the CMA),
      // never below the centre-of-energy sigma (24 replicas by default). The strength keeps the
      // centre-of-energy floor.
      e.relative_delay_as = bd.value;
      const double curvature = S.values.delay_curvature_sigma_as[l];
      e.relative_delay_as_sigma =
          std::max(bd.sigma, std::isfinite(curvature) && curvature > 0
                                 ? curvature
                                 : e.relative_delay_as_centre_of_energy_sigma.value_or(0.0));
      e.relative_strength = bs.value;
      e.relative_strength_sigma =
          std::max(bs.sigma, e.relative_strength_centre_of_energy_sigma.value_or(0.0));
      extra->push_back({key + ".delay_as_bias", bd.bias});
      extra->push_back({key + ".delay_as_sigma_bootstrap", bd.sigma});
      extra->push_back({key + ".delay_as_sigma_statistical", bd.sigma_statistical});
    } else {
      e.relative_delay_as = S.values.delay_as[l];
      e.relative_delay_as_sigma.reset();
      e.relative_strength = S.values.strength[l];
      e.relative_strength_sigma.reset();
    }
    if (e.clc_correction_as)
      e.relative_delay_as_corrected = *e.relative_delay_as - *e.clc_correction_as;
  }
}

}  // namespace sw
