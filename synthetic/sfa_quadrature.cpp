#include "synthetic/sfa_quadrature.h"

#include <algorithm>
#include <cmath>
#include <complex>

#include <omp.h>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"

namespace sw::synthetic {

SfaQuadrature::SfaQuadrature(XuvField xuv, const std::optional<GaussianIrPulse>& ir, double ip_au,
                             DipoleModel dipole, QuadratureOptions options)
    : xuv_(std::move(xuv)), ip_(ip_au), dipole_(dipole), options_(options) {
  if (ir) table_.emplace(*ir);
  const CVec& e = xuv_.envelope();
  double emax = 0;
  for (const cdouble& v : e) emax = std::max(emax, std::abs(v));
  const double thr = options_.node_threshold * emax;
  for (std::size_t k = 0; k < e.size(); ++k)
    if (std::abs(e[k]) > thr && std::abs(e[k]) > 0) nodes_.push_back(k);
}

double SfaQuadrature::nyquist_step(double detuning, double half_bandwidth, double gate_spread) {
  return units::kTwoPi / (std::abs(detuning) + std::abs(half_bandwidth) + std::abs(gate_spread));
}

double SfaQuadrature::gate_spread(const std::optional<GaussianIrPulse>& ir, double p_max,
                                  double max_intensity_factor) {
  if (!ir) return 0.0;
  const double w = units::wavelength_nm_to_omega_au(ir->wavelength_nm);
  const double fs = units::fs_to_au(1.0);
  const double b = ir->chirp_rad_per_fs2 / (fs * fs);
  const double w_max = w + 2.0 * std::abs(b) * 5.5 * units::fs_to_au(ir->fwhm_fs);
  const double A0 = units::intensity_to_peak_field_au(ir->peak_intensity_Wcm2 *
                                                      std::max(max_intensity_factor, 1.0)) /
                    w;
  // Instantaneous frequency of the Volkov phase (p A + A^2/2) plus the IR sidebands that the
  // periodic modulation adds around it, and the dipole's modulation at the IR frequency.
  return p_max * A0 + 0.5 * A0 * A0 + 6.0 * w_max;
}

Eigen::MatrixXcd SfaQuadrature::amplitude(const std::vector<double>& delay,
                                          const std::vector<double>& W,
                                          const std::vector<IrModifier>& mods) const {
  if (!mods.empty() && mods.size() != delay.size())
    throw Error(ErrorKind::kInternal, "SfaQuadrature: one IR modifier per delay is required");
  const std::size_t nw = W.size(), nk = nodes_.size();
  Eigen::MatrixXcd out(static_cast<Eigen::Index>(delay.size()), static_cast<Eigen::Index>(nw));
  if (delay.empty() || nw == 0) return out;
  for (double w : W)
    if (!(w > 0)) throw Error(ErrorKind::kInternal, "SfaQuadrature: kinetic energies must be > 0");

  const TimeGrid& g = xuv_.grid();
  const double h = g.dt(), wc = xuv_.carrier_au();
  std::vector<double> p(nw), detune(nw);
  for (std::size_t j = 0; j < nw; ++j) {
    p[j] = std::sqrt(2.0 * W[j]);
    detune[j] = W[j] + ip_ - wc;
  }
  std::vector<double> s(nk);
  for (std::size_t k = 0; k < nk; ++k) s[k] = g.time(nodes_[k]);
  const bool flat_dipole = dipole_.kind() == DipoleKind::kConstant;
  const auto nd = static_cast<long>(delay.size());
  const int threads = options_.threads > 0 ? options_.threads : omp_get_max_threads();

  // On a uniform energy axis the phasors exp(i [w_j s_k - p_j I1_k]) are advanced from energy
  // j-1 to j by the factor exp(i dW s_k) exp(-i (p_j - p_{j-1}) I1_k), the second from its
  // Taylor series (|angle| <= kMaxStepAngle: truncation < angle^6/720 = 2e-11), and recomputed
  // exactly every kRefresh energies; otherwise every phasor is computed directly.
  constexpr std::size_t kRefresh = 32;
  constexpr double kMaxStepAngle = 0.05;
  bool uniform = nw >= 2;
  const double dW = nw >= 2 ? W[1] - W[0] : 0.0;
  double dp_max = 0;
  for (std::size_t j = 1; j < nw && uniform; ++j) {
    uniform = std::abs((W[j] - W[j - 1]) - dW) <= 1e-9 * std::abs(dW);
    dp_max = std::max(dp_max, std::abs(p[j] - p[j - 1]));
  }

#pragma omp parallel num_threads(threads)
  {
    std::vector<double> cr(nk), ci(nk), A(nk), I1(nk), zr(nk), zi(nk), er(nk), ei(nk), d(nk, 1.0);
#pragma omp for schedule(dynamic, 1)
    for (long i = 0; i < nd; ++i) {
      const double tau = delay[static_cast<std::size_t>(i)];
      const VolkovTable::Mix mix =
          mods.empty() ? VolkovTable::Mix{} : VolkovTable::mix(mods[static_cast<std::size_t>(i)]);
      double i1_max = 0;
      for (std::size_t k = 0; k < nk; ++k) {
        VolkovValues v;
        if (table_) v = table_->at(s[k] + tau, mix);
        A[k] = v.A;
        I1[k] = v.I1;
        i1_max = std::max(i1_max, std::abs(v.I1));
        const cdouble ck = h * xuv_.envelope()[nodes_[k]] * std::polar(1.0, -0.5 * v.I2);
        cr[k] = ck.real();
        ci[k] = ck.imag();
      }
      const bool recur = uniform && dp_max * i1_max <= kMaxStepAngle;
      if (recur)
        for (std::size_t k = 0; k < nk; ++k) {
          er[k] = std::cos(dW * s[k]);
          ei[k] = std::sin(dW * s[k]);
        }
      for (std::size_t j = 0; j < nw; ++j) {
        const double pj = p[j], wj = detune[j];
        if (!recur || j % kRefresh == 0) {
          for (std::size_t k = 0; k < nk; ++k) {
            const double ph = wj * s[k] - pj * I1[k];
            zr[k] = std::cos(ph);
            zi[k] = std::sin(ph);
          }
        } else {
          const double dp = pj - p[j - 1];
#pragma omp simd
          for (std::size_t k = 0; k < nk; ++k) {
            const double th = dp * I1[k], th2 = th * th;
            const double cs = 1.0 - 0.5 * th2 * (1.0 - th2 / 12.0);
            const double sn = th * (1.0 - th2 / 6.0 * (1.0 - th2 / 20.0));
            const double rr = er[k] * cs + ei[k] * sn, ri = ei[k] * cs - er[k] * sn;
            const double nr = zr[k] * rr - zi[k] * ri, ni = zr[k] * ri + zi[k] * rr;
            zr[k] = nr;
            zi[k] = ni;
          }
        }
        if (!flat_dipole)
          for (std::size_t k = 0; k < nk; ++k) d[k] = dipole_(pj + A[k]);
        double re = 0, im = 0;
#pragma omp simd reduction(+ : re, im)
        for (std::size_t k = 0; k < nk; ++k) {
          re += d[k] * (cr[k] * zr[k] - ci[k] * zi[k]);
          im += d[k] * (cr[k] * zi[k] + ci[k] * zr[k]);
        }
        out(i, static_cast<Eigen::Index>(j)) =
            cdouble(0, -1) * std::polar(1.0, (W[j] + ip_) * tau) * cdouble(re, im);
      }
    }
  }
  return out;
}

Eigen::MatrixXd SfaQuadrature::density(const std::vector<double>& delay,
                                       const std::vector<double>& W,
                                       const std::vector<IrModifier>& mods) const {
  const Eigen::MatrixXcd a = amplitude(delay, W, mods);
  Eigen::MatrixXd S(a.rows(), a.cols());
  for (Eigen::Index j = 0; j < a.cols(); ++j) {
    const double pj = std::sqrt(2.0 * W[static_cast<std::size_t>(j)]);
    S.col(j) = pj * a.col(j).cwiseAbs2();
  }
  return S;
}

}  // namespace sw::synthetic
