#include "retrieval/analysis/classifier.h"

#include <algorithm>
#include <cmath>
#include <complex>
#include <optional>
#include <sstream>

#include <Eigen/Dense>

#include "retrieval/analysis/analysis_internal.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/statistics.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/pulse_metrics.h"
#include "retrieval/preprocess/preprocess.h"

namespace sw {

namespace {

struct SpectralEvidence {
  bool available = false;
  std::vector<double> r;  // r[k-1] = r_k
  int rows_used = 0;
  double effective_bursts = 1.0;
  double satellite_ratio = 0.0;
  bool comb = false;
  std::string note;
};

SpectralEvidence spectral_evidence(const Trace& t, double T, double bg, int max_lags) {
  SpectralEvidence ev;
  const std::size_t nd = t.num_delays(), ne = t.num_energies();
  const std::vector<double>& W = t.energy_au;
  std::vector<double> dW;
  for (std::size_t j = 1; j < ne; ++j) dW.push_back(W[j] - W[j - 1]);
  const double step = median(dW);
  const double nyquist_lag = units::kPi / step;
  int K = 0;
  while (K < max_lags && (K + 1) * 0.5 * T + 0.125 * T < nyquist_lag) ++K;
  if (K < 1) {
    ev.note = "the energy step (" + format_g(units::au_to_eV(step)) +
              " eV) is too coarse to resolve fringes of period 2 hbar omega";
    return ev;
  }
  // Per-row fringe contrasts r_k (noise-debiased, maximum over the lag window).
  const int lags_per_window = 13;
  std::vector<std::vector<double>> rk;  // per qualifying row
  std::vector<double> weight, noise;
  std::vector<std::size_t> rows;
  for (std::size_t i = 0; i < nd; ++i) {
    double tot = 0, var = 0;
    for (std::size_t j = 0; j < ne; ++j) {
      const double c = t.counts(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j));
      tot += c - bg;
      var += std::max(c, 0.0);
    }
    if (!(tot > 0)) continue;
    rows.push_back(i);
    weight.push_back(tot);
    noise.push_back(var);
    rk.emplace_back(static_cast<std::size_t>(K));
  }
  // The phase factors of one lag window, shared by every row.
  std::vector<std::complex<double>> factor(static_cast<std::size_t>(lags_per_window) * ne);
  std::vector<double> row(ne);
  for (int k = 1; k <= K; ++k) {
    for (int l = 0; l < lags_per_window; ++l) {
      const double s = k * 0.5 * T + (-0.125 + 0.25 * l / (lags_per_window - 1)) * T;
      for (std::size_t j = 0; j < ne; ++j)
        factor[static_cast<std::size_t>(l) * ne + j] = std::polar(1.0, -W[j] * s);
    }
    for (std::size_t q = 0; q < rows.size(); ++q) {
      for (std::size_t j = 0; j < ne; ++j)
        row[j] = t.counts(static_cast<Eigen::Index>(rows[q]), static_cast<Eigen::Index>(j)) - bg;
      double best = 0;
      for (int l = 0; l < lags_per_window; ++l) {
        const std::complex<double>* f = factor.data() + static_cast<std::size_t>(l) * ne;
        std::complex<double> F = 0.0;
        for (std::size_t j = 0; j < ne; ++j) F += row[j] * f[j];
        best = std::max(best, std::norm(F) - noise[q]);
      }
      rk[q][static_cast<std::size_t>(k - 1)] = std::sqrt(std::max(best, 0.0)) / weight[q];
    }
  }
  if (rk.empty()) {
    ev.note = "no delay row holds counts above the background";
    return ev;
  }
  // The quarter of the rows with the largest r_1: streaking shifts the spectra of bursts half a
  // cycle apart in opposite directions and hides their fringes except where they overlap.
  std::vector<std::size_t> order(rk.size());
  for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
  std::sort(order.begin(), order.end(),
            [&](std::size_t a, std::size_t b) { return rk[a][0] > rk[b][0]; });
  const std::size_t keep = std::max<std::size_t>(1, (rk.size() + 3) / 4);
  std::vector<double> num_k(static_cast<std::size_t>(K), 0.0);
  double den = 0;
  for (std::size_t n = 0; n < keep; ++n) {
    const std::size_t i = order[n];
    for (int k = 0; k < K; ++k)
      num_k[static_cast<std::size_t>(k)] += weight[i] * rk[i][static_cast<std::size_t>(k)];
    den += weight[i];
  }
  ev.rows_used = static_cast<int>(keep);
  ev.available = true;
  ev.r.resize(static_cast<std::size_t>(K));
  ev.effective_bursts = 1.0;
  for (int k = 0; k < K; ++k) {
    ev.r[static_cast<std::size_t>(k)] = num_k[static_cast<std::size_t>(k)] / den;
    ev.effective_bursts += 2.0 * ev.r[static_cast<std::size_t>(k)];
  }
  return ev;
}

struct DelayEvidence {
  bool available = false;
  double share = 0.0;
  double p1 = 0.0, p2 = 0.0;
  std::string note;
};

DelayEvidence delay_evidence(const Trace& t, double omega) {
  DelayEvidence ev;
  const std::size_t nd = t.num_delays(), ne = t.num_energies();
  const double T = units::kTwoPi / omega;
  if (nd < 8) {
    ev.note = "fewer than 8 delays";
    return ev;
  }
  const std::vector<double>& tau = t.delay_au;
  const double span = tau.back() - tau.front();
  if (span < T) {
    ev.note = "the scan is shorter than one IR period";
    return ev;
  }
  double max_step = 0;
  for (std::size_t i = 1; i < nd; ++i) max_step = std::max(max_step, tau[i] - tau[i - 1]);
  if (max_step > 0.25 * T) {
    ev.note = "delay steps exceed T/4: the 2 omega oscillation is undersampled";
    return ev;
  }
  const double mid = 0.5 * (tau.front() + tau.back()), hs = 0.5 * span;
  Eigen::MatrixXd X(static_cast<Eigen::Index>(nd), 7);
  for (std::size_t i = 0; i < nd; ++i) {
    const double u = (tau[i] - mid) / hs;
    const Eigen::Index r = static_cast<Eigen::Index>(i);
    X(r, 0) = 1.0;
    X(r, 1) = u;
    X(r, 2) = u * u;
    X(r, 3) = std::cos(omega * tau[i]);
    X(r, 4) = std::sin(omega * tau[i]);
    X(r, 5) = std::cos(2.0 * omega * tau[i]);
    X(r, 6) = std::sin(2.0 * omega * tau[i]);
  }
  double P1 = 0, P2 = 0, noise2 = 0;
  Eigen::VectorXd y(static_cast<Eigen::Index>(nd)), wv(static_cast<Eigen::Index>(nd));
  for (std::size_t j = 0; j < ne; ++j) {
    for (std::size_t i = 0; i < nd; ++i) {
      const double c = t.counts(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j));
      y(static_cast<Eigen::Index>(i)) = c;
      wv(static_cast<Eigen::Index>(i)) = 1.0 / std::max(c, 1.0);
    }
    const Eigen::MatrixXd N = X.transpose() * wv.asDiagonal() * X;
    const Eigen::VectorXd b = X.transpose() * (wv.asDiagonal() * y);
    const Eigen::LDLT<Eigen::MatrixXd> ldlt(N);
    if (ldlt.info() != Eigen::Success) continue;
    const Eigen::VectorXd c = ldlt.solve(b);
    const Eigen::MatrixXd C = ldlt.solve(Eigen::MatrixXd::Identity(7, 7));
    const double v1 = C(3, 3) + C(4, 4), v2 = C(5, 5) + C(6, 6);
    P1 += c(3) * c(3) + c(4) * c(4) - v1;
    P2 += c(5) * c(5) + c(6) * c(6) - v2;
    noise2 += v1 * v1 + v2 * v2;
  }
  ev.p1 = P1;
  ev.p2 = P2;
  P1 = std::max(P1, 0.0);
  P2 = std::max(P2, 0.0);
  if (!(P1 + P2 > 5.0 * std::sqrt(noise2))) {
    ev.note = "no significant oscillation at omega or 2 omega";
    return ev;
  }
  ev.available = true;
  ev.share = P2 / (P1 + P2);
  return ev;
}

PulseClass class_from_ratio(double ratio, const ClassifierOptions& o) {
  if (ratio <= o.satellite_ratio.isolated_max) return PulseClass::kIsolated;
  if (ratio < o.satellite_ratio.satellites_max) return PulseClass::kIsolatedWithSatellites;
  return PulseClass::kTrain;
}

// Full-step contradiction: isolated against train.
bool contradicts(PulseClass a, PulseClass b) {
  return (a == PulseClass::kIsolated && b == PulseClass::kTrain) ||
         (a == PulseClass::kTrain && b == PulseClass::kIsolated);
}

}  // namespace

std::string ClassifierOptions::validate() const {
  if (!(ir_wavelength_nm >= 0.0) || !std::isfinite(ir_wavelength_nm))
    return invalid_value("ir_wavelength_nm", ir_wavelength_nm,
                         "0 (from the trace) or a wavelength > 0 nm");
  const auto [isolated_max, satellites_max] = satellite_ratio;
  if (!(isolated_max > 0.0 && isolated_max < satellites_max))
    return invalid_value("isolated_max_satellite_ratio", isolated_max,
                         "in (0, satellite_max_ratio = " + format_g(satellites_max) + ")");
  if (!(satellites_max <= 1.0))
    return invalid_value("satellite_max_ratio", satellites_max,
                         "in (isolated_max_satellite_ratio, 1]");
  if (train_min_comparable_bursts < 2)
    return invalid_value("train_min_comparable_bursts", train_min_comparable_bursts, ">= 2");
  if (!(comb_min_period_contrast > 1.0 / 3.0 && comb_min_period_contrast < 1.0))
    return invalid_value("comb_min_period_contrast", comb_min_period_contrast, "in (1/3, 1)");
  if (!(delay_train_min_share > 0.0 && delay_train_min_share < 1.0))
    return invalid_value("delay_train_min_share", delay_train_min_share, "in (0, 1)");
  if (!(delay_streaking_max_share > 0.0 && delay_streaking_max_share < delay_train_min_share))
    return invalid_value("delay_streaking_max_share", delay_streaking_max_share,
                         "in (0, delay_train_min_share = " + format_g(delay_train_min_share) + ")");
  if (!(min_total_counts > 0.0)) return invalid_value("min_total_counts", min_total_counts, "> 0");
  if (!(retrieval_max_trace_error_ratio > 1.0))
    return invalid_value("retrieval_max_trace_error_ratio", retrieval_max_trace_error_ratio, "> 1");
  if (!(hot_pixels.sigma > 0.0)) return invalid_value("hot_pixel_sigma", hot_pixels.sigma, "> 0");
  if (!(hot_pixels.ratio > 1.0)) return invalid_value("hot_pixel_ratio", hot_pixels.ratio, "> 1");
  return {};
}

double satellite_ratio_from_fringes(double r1, double r2) {
  r1 = std::max(r1, 0.0);
  if (r2 < 0.0) {
    // Lag T not resolved: symmetric model, small root of r1 = 2a / (1 + 2a^2).
    const double rr = std::min(r1, std::sqrt(0.5));
    const double a =
        rr > 0 ? (1.0 - std::sqrt(std::max(1.0 - 2.0 * rr * rr, 0.0))) / (2.0 * rr) : 0.0;
    return a * a;
  }
  r2 = std::max(r2, 0.0);
  // Symmetric satellites from r2 alone: a^2 = r2 / (1 - 2 r2) (r2 < 1/2).
  const double a2_sym = r2 < 0.5 ? std::min(r2 / (1.0 - 2.0 * r2), 1.0) : 1.0;
  const double a_sym = std::sqrt(a2_sym);
  const double r1_sym = 2.0 * a_sym / (1.0 + 2.0 * a2_sym);
  // r1 at most 5 % above the symmetric value: symmetric satellites (streaking only lowers r1;
  // the inversion cannot separate mildly asymmetric from symmetric satellites).
  if (r1 <= 1.05 * r1_sym + 1e-12) return a2_sym;
  // Clearly asymmetric (e.g. one-sided) satellites: exact solution. D = 1 + a^2 + b^2 solves
  // r1^2 D^2 - (1 + 2 r2) D + 1 = 0, then a + b = r1 D, a b = r2 D; of the admissible roots
  // (D >= 1, real a, b <= 1) the one with less satellite energy.
  const double disc = (1.0 + 2.0 * r2) * (1.0 + 2.0 * r2) - 4.0 * r1 * r1;
  if (disc >= 0.0) {
    for (double sign : {-1.0, 1.0}) {
      const double D = ((1.0 + 2.0 * r2) + sign * std::sqrt(disc)) / (2.0 * r1 * r1);
      const double S = r1 * D, P = r2 * D, d2 = S * S - 4.0 * P;
      if (D < 1.0 || d2 < 0.0) continue;
      const double a = 0.5 * (S + std::sqrt(d2));
      if (a <= 1.0) return a * a;
    }
  }
  // No admissible exact solution: least squares on a grid over a >= b in [0, 1].
  const int n = 400;
  double best = 0, best_cost = 1e300;
  for (int i = 0; i <= n; ++i) {
    const double a = static_cast<double>(i) / n;
    for (int j = 0; j <= i; ++j) {
      const double b = static_cast<double>(j) / n, d = 1.0 + a * a + b * b;
      const double e1 = r1 - (a + b) / d, e2 = r2 - a * b / d;
      const double cost = e1 * e1 + e2 * e2;
      if (cost < best_cost) {
        best_cost = cost;
        best = a * a;
      }
    }
  }
  return best;
}

VerdictSection classify(const Trace& raw, const ClassifierOptions& opt, const Reconstruction* rec) {
  {
    const std::string m = opt.validate();
    if (!m.empty()) throw usage_error("classifier options: " + m);
  }
  const std::string where = raw.meta.source.empty() ? "trace" : raw.meta.source;
  raw.validate(where);
  // The evidence is taken from the despiked counts (the engines' input): one hot pixel is a
  // delta in energy, whose fringe contrast is 1 at every lag.
  Trace trace = raw;
  std::size_t hot = 0;
  if (opt.hot_pixels.remove)
    hot = remove_hot_pixels(trace.counts, Eigen::MatrixXd(), opt.hot_pixels.sigma,
                            opt.hot_pixels.ratio);
  const double lambda = analysis_detail::ir_wavelength_nm_or_throw(
      opt.ir_wavelength_nm, trace, where,
      "classification needs the IR period (bursts repeat every T/2).");
  const double omega = units::wavelength_nm_to_omega_au(lambda);
  const double T = units::period_au(omega);
  const double bg = trace.meta.background.value_or(0.0);

  VerdictSection v;
  auto E = [&](const std::string& k, auto val) { v.evidence.push_back({k, val}); };
  const double total = trace.counts.sum();
  E("signal.total_counts", total);
  if (opt.hot_pixels.remove) E("signal.hot_pixels_replaced", static_cast<long long>(hot));
  E("thresholds.isolated_max_satellite_ratio", opt.satellite_ratio.isolated_max);
  E("thresholds.satellite_max_ratio", opt.satellite_ratio.satellites_max);
  E("thresholds.retrieval_max_trace_error_ratio", opt.retrieval_max_trace_error_ratio);
  E("thresholds.comb_min_period_contrast", opt.comb_min_period_contrast);

  // Spectral evidence.
  const SpectralEvidence se = spectral_evidence(trace, T, bg, 12);
  std::optional<PulseClass> spectral_class;
  double sat_spec = 0.0;
  if (se.available) {
    const double r1 = se.r[0], r2 = se.r.size() > 1 ? se.r[1] : -1.0;
    E("spectrum.fringe_contrast_half_period", r1);
    if (r2 >= 0) E("spectrum.fringe_contrast_period", r2);
    E("spectrum.fringe_contrast", se.r);
    E("spectrum.effective_burst_count", se.effective_bursts);
    E("spectrum.rows_used", static_cast<long long>(se.rows_used));
    if (r2 >= opt.comb_min_period_contrast) {
      spectral_class = PulseClass::kTrain;
      E("spectrum.harmonic_comb", true);
    } else {
      sat_spec = satellite_ratio_from_fringes(r1, r2);
      spectral_class = class_from_ratio(sat_spec, opt);
      E("spectrum.harmonic_comb", false);
      E("spectrum.satellite_intensity_ratio", sat_spec);
      E("spectrum.model", std::string("main burst with satellites of field ratios a, b at -+T/2 "
                                      "(opposite sign), fitted to r1, r2"));
    }
    E("spectrum.class", std::string(to_string(*spectral_class)));
  } else {
    E("spectrum.unavailable", se.note);
  }

  // Delay evidence.
  const DelayEvidence de = delay_evidence(trace, omega);
  enum class DelayKind { kNone, kTrainLike, kStreakingLike, kAmbiguous };
  DelayKind dk = DelayKind::kNone;
  if (de.available) {
    E("delay.two_omega_share", de.share);
    E("delay.power_omega", de.p1);
    E("delay.power_two_omega", de.p2);
    dk = de.share >= opt.delay_train_min_share       ? DelayKind::kTrainLike
         : de.share <= opt.delay_streaking_max_share ? DelayKind::kStreakingLike
                                                     : DelayKind::kAmbiguous;
    E("delay.class", std::string(dk == DelayKind::kTrainLike       ? "train-like"
                                 : dk == DelayKind::kStreakingLike ? "streaking-like"
                                                                   : "ambiguous"));
  } else {
    E("delay.unavailable", de.note);
  }
  const bool delay_contradicts_train = dk == DelayKind::kStreakingLike;
  const bool delay_contradicts_isolated = dk == DelayKind::kTrainLike;

  // Retrieval evidence.
  std::optional<PulseClass> retrieval_class;
  std::optional<double> retrieval_ratio;
  std::string untrusted_note;
  if (rec) {
    const BurstStructure b = burst_structure(rec->xuv, T);
    E("retrieval.satellite_intensity_ratio", b.satellite_intensity_ratio);
    E("retrieval.main_burst_energy_fraction", b.main_burst_energy_fraction);
    E("retrieval.comparable_bursts", static_cast<long long>(b.comparable_bursts));
    E("retrieval.engine", rec->engine);
    const double ratio =
        rec->noise_floor_trace_error > 0 ? rec->trace_error / rec->noise_floor_trace_error : 0.0;
    const bool trusted = !(ratio > opt.retrieval_max_trace_error_ratio);
    E("retrieval.trace_error_ratio", ratio);
    E("retrieval.trusted", trusted);
    const PulseClass rc = b.comparable_bursts >= opt.train_min_comparable_bursts
                              ? PulseClass::kTrain
                              : class_from_ratio(b.satellite_intensity_ratio, opt);
    E("retrieval.class", std::string(to_string(rc)));
    v.main_burst_energy_fraction = b.main_burst_energy_fraction;
    retrieval_ratio = b.satellite_intensity_ratio;
    if (trusted)
      retrieval_class = rc;
    else
      untrusted_note = "the reconstruction (" + rec->engine + ", G = " + format_g(ratio) +
                       " x the noise floor) did not explain the data and is not used";
  }
  // The satellite ratio reported: the deciding reconstruction's, else the spectral estimate
  // (not for a comb), else an untrusted reconstruction's.
  if (retrieval_class)
    v.satellite_intensity_ratio = retrieval_ratio;
  else if (spectral_class && *spectral_class != PulseClass::kTrain)
    v.satellite_intensity_ratio = sat_spec;
  else if (retrieval_ratio)
    v.satellite_intensity_ratio = retrieval_ratio;

  std::ostringstream why;
  auto describe_spectrum = [&]() {
    std::ostringstream os;
    if (!se.available) return std::string("spectral fringes unavailable (") + se.note + ")";
    os << "spectral fringe contrast r1 = " << format_g(se.r[0]);
    if (se.r.size() > 1) os << ", r2 = " << format_g(se.r[1]);
    os << " (effective burst count " << format_g(se.effective_bursts) << ")";
    if (spectral_class == PulseClass::kTrain && se.r.size() > 1 &&
        se.r[1] >= opt.comb_min_period_contrast)
      os << ", a harmonic comb";
    else if (spectral_class)
      os << ", satellite ratio estimate " << format_g(100.0 * sat_spec) << " %";
    return os.str();
  };
  auto describe_delay = [&]() {
    if (!de.available) return std::string("delay oscillation unavailable (") + de.note + ")";
    return "2 omega share of the delay oscillation " + format_g(de.share) +
           (dk == DelayKind::kTrainLike       ? " (train-like)"
            : dk == DelayKind::kStreakingLike ? " (streaking-like)"
                                              : " (ambiguous)");
  };

  if (total < opt.min_total_counts) {
    v.pulse_class = PulseClass::kUndetermined;
    why << "signal too weak: " << format_g(total) << " counts in the trace, below "
        << format_g(opt.min_total_counts);
  } else if (retrieval_class) {
    const PulseClass R = *retrieval_class;
    const bool spec_contra = spectral_class && contradicts(R, *spectral_class);
    const bool delay_contra = (R == PulseClass::kIsolated && delay_contradicts_isolated) ||
                              (R == PulseClass::kTrain && delay_contradicts_train);
    std::ostringstream rs;
    rs << "reconstruction: largest satellite " << format_g(100.0 * *v.satellite_intensity_ratio)
       << " % of the main burst, " << rec->engine;
    if (spec_contra || delay_contra) {
      v.pulse_class = PulseClass::kUndetermined;
      why << "evidence disagrees: " << rs.str() << " says " << to_string(R) << ", but "
          << (spec_contra ? describe_spectrum() + " says " + to_string(*spectral_class)
                          : describe_delay());
    } else {
      v.pulse_class = R;
      why << to_string(R) << ": " << rs.str() << "; " << describe_spectrum() << "; "
          << describe_delay();
      if (spectral_class && *spectral_class != R)
        why << " (the spectral estimate says " << to_string(*spectral_class)
            << "; the reconstruction is preferred)";
    }
  } else if (spectral_class) {
    const PulseClass S = *spectral_class;
    if (S == PulseClass::kTrain && delay_contradicts_train) {
      v.pulse_class = PulseClass::kUndetermined;
      why << "evidence disagrees: " << describe_spectrum() << " suggests a train, but "
          << describe_delay();
    } else if (S == PulseClass::kIsolated && delay_contradicts_isolated) {
      v.pulse_class = PulseClass::kUndetermined;
      why << "evidence disagrees: " << describe_spectrum() << " suggests an isolated pulse, but "
          << describe_delay();
    } else {
      v.pulse_class = S;
      why << to_string(S) << ": " << describe_spectrum() << "; " << describe_delay();
    }
  } else if (dk == DelayKind::kTrainLike) {
    v.pulse_class = PulseClass::kTrain;
    why << "train: " << describe_delay() << "; " << describe_spectrum();
  } else {
    v.pulse_class = PulseClass::kUndetermined;
    why << "not enough evidence: " << describe_spectrum() << "; " << describe_delay();
  }
  if (!untrusted_note.empty()) why << " (" << untrusted_note << ")";
  v.reason = why.str();
  return v;
}

}  // namespace sw
