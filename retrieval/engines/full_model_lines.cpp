// FullModelObjective: the further photoelectron lines of a joint fit (full_model_engine.h,
// "Several photoelectron lines"): each line's spectrum, model and share of the counts, and the
// cost with its gradient when lines are present.
#include "retrieval/engines/full_model_engine.h"

#include <algorithm>
#include <cmath>

#include "retrieval/core/units.h"

namespace sw {

double FullModelObjective::line_strength(const double* x, std::size_t l) const {
  return std::exp(x[num_xuv_ + ir_->num_params() + 2 * l]);
}

double FullModelObjective::line_delay_au(const double* x, std::size_t l) const {
  return x[num_xuv_ + ir_->num_params() + 2 * l + 1] * units::as_to_au(kDelayScaleAs);
}

std::vector<cdouble> FullModelObjective::line_spectrum(const std::vector<cdouble>& spec,
                                                       const double* x, std::size_t l) const {
  const double g = std::sqrt(line_strength(x, l)), t = line_delay_au(x, l);
  std::vector<cdouble> out(ne_, 0.0);
  for (std::size_t j : support_) out[j] = g * std::polar(1.0, omega_bin_[j] * t) * spec[j];
  return out;
}

CVec FullModelObjective::to_envelope(const std::vector<cdouble>& s) const {
  CVec S(n_, 0.0), eps(n_);
  for (std::size_t j = 0; j < ne_; ++j) S[fft_slot_[j]] = s[j];
  to_time(grid_, Fft(n_), S, eps);
  return eps;
}

void FullModelObjective::line_models(const double* x, Eigen::MatrixXd* ref,
                                     std::vector<Eigen::MatrixXd>* per_line) const {
  const std::vector<cdouble> spec = spectrum(x);
  const IrField irf = ir_field(x);
  *ref = fa_.amplitude(to_envelope(spec), irf).cwiseAbs2();
  per_line->clear();
  for (std::size_t l = 0; l < lines_.size(); ++l)
    per_line->push_back(
        lines_[l].fa->amplitude(to_envelope(line_spectrum(spec, x, l)), irf).cwiseAbs2());
}

double FullModelObjective::line_counts_ratio(const double* x, std::size_t l) const {
  Eigen::MatrixXd ref;
  std::vector<Eigen::MatrixXd> lm;
  line_models(x, &ref, &lm);
  double r = 0, q = 0;
  for (std::size_t j = 0; j < ne_; ++j) {
    const double p = units::momentum_au(energy_au_[j]);
    r += p * ref.col(static_cast<Eigen::Index>(j)).sum();
    if (j >= lines_[l].c0 && j < lines_[l].c1)
      q += p * lm[l].col(static_cast<Eigen::Index>(j - lines_[l].c0)).sum();
  }
  return r > 0 ? q / r : 0.0;
}

double FullModelObjective::evaluate_lines(const double* x, double* grad) const {
  const std::vector<cdouble> spec = spectrum(x);
  const CVec eps = to_envelope(spec);
  const std::vector<double> th = ir_theta(x);
  const IrField irf = ir_->field(th.data());
  const std::size_t L = lines_.size();
  std::vector<std::vector<cdouble>> lspec(L);
  std::vector<CVec> leps(L);
  std::vector<Eigen::MatrixXcd> al(L);
  const Eigen::MatrixXcd a0 = fa_.amplitude(eps, irf);
  Eigen::MatrixXd m = a0.cwiseAbs2();
  for (std::size_t l = 0; l < L; ++l) {
    lspec[l] = line_spectrum(spec, x, l);
    leps[l] = to_envelope(lspec[l]);
    al[l] = lines_[l].fa->amplitude(leps[l], irf);
    const auto c0 = static_cast<Eigen::Index>(lines_[l].c0),
               w = static_cast<Eigen::Index>(lines_[l].c1 - lines_[l].c0);
    m.middleCols(c0, w) += al[l].cwiseAbs2();
  }
  fa_.blur_counts(m);  // the spectrometer resolution acts on the summed counts
  const Eigen::MatrixXd wm = weight_.cwiseProduct(m);
  const double c2 = wm.cwiseProduct(m).sum(), c1 = -2.0 * wm.cwiseProduct(measured_).sum(),
               c0 = weight_.cwiseProduct(measured_).cwiseProduct(measured_).sum();
  const double mu = c2 > 0 ? -c1 / (2.0 * c2) : 0.0;
  double C = (c0 + mu * (c1 + mu * c2)) * inv_elements_;
  std::vector<double> LA, A_edge;
  C += ir_penalty(irf, &LA, &A_edge);
  if (!grad) return C;
  std::vector<double> Ab(irf.size(), 0.0);
  // a_bar = 2 w (mu m - M) mu a for every line (header comment).
  Eigen::MatrixXd R = 2.0 * mu * weight_.cwiseProduct(mu * m - measured_);
  fa_.blur_counts_transpose(R);  // back through the resolution onto each line's |a|^2
  CVec eb;
  std::vector<double> A_bar;
  fa_.vjp(eps, irf, (a0.array() * R.array()).matrix(), &eb, &A_bar);
  std::vector<cdouble> sb;
  xuv_adjoint(eb, &sb);
  for (std::size_t r = 0; r < Ab.size(); ++r) Ab[r] += A_bar[r] * inv_elements_;
  ir_penalty_gradient(LA, A_edge, &Ab);
  const std::size_t off = num_xuv_ + ir_->num_params();
  for (std::size_t l = 0; l < L; ++l) {
    const auto col0 = static_cast<Eigen::Index>(lines_[l].c0),
               w = static_cast<Eigen::Index>(lines_[l].c1 - lines_[l].c0);
    const Eigen::MatrixXcd abar = (al[l].array() * R.middleCols(col0, w).array()).matrix();
    CVec ebl;
    std::vector<double> Abl;
    lines_[l].fa->vjp(leps[l], irf, abar, &ebl, &Abl);
    std::vector<cdouble> sbl;
    xuv_adjoint(ebl, &sbl);
    const double g = std::sqrt(line_strength(x, l)), t = line_delay_au(x, l);
    double g_eta = 0.0, g_t = 0.0;
    for (std::size_t j : support_) {
      sb[j] += std::conj(g * std::polar(1.0, omega_bin_[j] * t)) * sbl[j];
      g_eta += std::real(std::conj(sbl[j]) * lspec[l][j]);
      g_t += 2.0 * std::real(std::conj(sbl[j]) * cdouble(0.0, omega_bin_[j]) * lspec[l][j]);
    }
    grad[off + 2 * l] = g_eta * inv_elements_;
    grad[off + 2 * l + 1] = g_t * inv_elements_ * units::as_to_au(kDelayScaleAs);
    for (std::size_t r = 0; r < Ab.size(); ++r) Ab[r] += Abl[r] * inv_elements_;
  }
  const double gx = 2.0 * xuv_scale_ * inv_elements_;
  for (std::size_t k = 0; k < support_.size(); ++k) {
    grad[2 * k] = gx * bin_scale_[k] * sb[support_[k]].real();
    grad[2 * k + 1] = gx * bin_scale_[k] * sb[support_[k]].imag();
  }
  std::vector<double> tb(ir_->num_params());
  ir_->pullback(th.data(), Ab, tb.data());
  for (std::size_t r = 0; r < tb.size(); ++r) grad[num_xuv_ + r] = tb[r] * ir_scale_[r];
  return C;
}

}  // namespace sw
