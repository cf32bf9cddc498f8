#include "retrieval/engines/full_model_engine.h"

#include <algorithm>
#include <cmath>
#include <condition_variable>
#include <exception>
#include <mutex>
#include <sstream>
#include <thread>

#include <ceres/ceres.h>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"

namespace sw {

namespace {

std::string num(double x) { return format_g(x); }

}  // namespace

// --- settings ---------------------------------------------------------------------------------

std::vector<ExtraOption> full_model_extra_options() {
  return described_extra_options(FullModelSettings{});
}

FullModelSettings read_full_model_settings(const EngineOptions& o) {
  for (const ExtraOption& opt : full_model_extra_options())
    if (o.has_extra(opt.name))
      if (const std::string e = opt.validate(o.extra_string(opt.name, "")); !e.empty())
        throw usage_error("full-model: engine option " + e);
  FullModelSettings s;
  read_described_extras(o, "full-model", &s);
  if (const std::string e = s.validate(); !e.empty()) throw usage_error("full-model: " + e);
  return s;
}

// --- objective --------------------------------------------------------------------------------

namespace {

// The spectrum that defines carrier and support: field-free if usable, else delay average.
std::vector<double> reference_spectrum(const RetrievalProblem& P) {
  const std::size_t ne = P.energy_au.size();
  if (P.field_free_spectrum.size() == ne) {
    double mx = 0;
    for (double v : P.field_free_spectrum) mx = std::max(mx, v);
    if (mx > 0) return P.field_free_spectrum;
  }
  std::vector<double> s(ne, 0.0);
  for (Eigen::Index i = 0; i < P.intensity.rows(); ++i)
    for (std::size_t j = 0; j < ne; ++j)
      s[j] += std::max(P.intensity(i, static_cast<Eigen::Index>(j)), 0.0) /
              static_cast<double>(P.intensity.rows());
  return s;
}

void check_problem(const RetrievalProblem& P, const std::string& who) {
  const auto nd = static_cast<Eigen::Index>(P.delay_au.size());
  const auto ne = static_cast<Eigen::Index>(P.energy_au.size());
  std::ostringstream s;
  if (nd < 2 || ne < 8)
    s << who << ": the problem has " << nd << " delays and " << ne
      << " energies: need >= 2 delays and >= 8 energies";
  else if (P.intensity.rows() != nd || P.intensity.cols() != ne)
    s << who << ": RetrievalProblem.intensity is " << P.intensity.rows() << "x"
      << P.intensity.cols() << ": expected delays x energies = " << nd << "x" << ne;
  else if (P.variance.size() != 0 && (P.variance.rows() != nd || P.variance.cols() != ne))
    s << who << ": RetrievalProblem.variance is " << P.variance.rows() << "x" << P.variance.cols()
      << ": expected " << nd << "x" << ne;
  else if (P.weight.size() != 0 && (P.weight.rows() != nd || P.weight.cols() != ne))
    s << who << ": RetrievalProblem.weight is " << P.weight.rows() << "x" << P.weight.cols()
      << ": expected empty or delays x energies = " << nd << "x" << ne;
  else if (!P.intensity.allFinite() || !P.variance.allFinite())
    s << who << ": RetrievalProblem.intensity/variance contain non-finite values";
  else if (P.variance.size() != 0 && !(P.variance.maxCoeff() > 0))
    s << who << ": RetrievalProblem.variance has no positive entry";
  else if (!(P.intensity.maxCoeff() > 0))
    s << who << ": RetrievalProblem.intensity has no positive entry (no signal)";
  else if (P.grid.size() < 8)
    s << who << ": RetrievalProblem.grid has " << P.grid.size() << " points: need >= 8";
  else if (!P.field_free_spectrum.empty() && P.field_free_spectrum.size() != P.energy_au.size())
    s << who << ": RetrievalProblem.field_free_spectrum has " << P.field_free_spectrum.size()
      << " values: expected one per energy (" << ne << ") or none";
  if (!s.str().empty()) throw input_error(s.str());
}

}  // namespace

double FullModelObjective::carrier_for(const RetrievalProblem& P) {
  const std::vector<double> s = reference_spectrum(P);
  double num_ = 0, den = 0;
  for (std::size_t j = 0; j < s.size(); ++j) {
    num_ += s[j] * P.energy_au[j];
    den += s[j];
  }
  const double Wc = den > 0 ? num_ / den : P.energy_au[P.energy_au.size() / 2];
  std::size_t jc = 0;
  for (std::size_t j = 1; j < P.energy_au.size(); ++j)
    if (std::abs(P.energy_au[j] - Wc) < std::abs(P.energy_au[jc] - Wc)) jc = j;
  return P.energy_au[jc] + P.ionization_energy_au;
}

namespace {
double checked_carrier(const RetrievalProblem& P) {
  check_problem(P, "full-model");
  return FullModelObjective::carrier_for(P);
}
}  // namespace

FullModelObjective::FullModelObjective(const RetrievalProblem& P, const FullModelSettings& s,
                                       MomentumModel model, std::unique_ptr<IrParametrization> ir,
                                       int threads)
    : model_(model),
      settings_(s),
      carrier_(checked_carrier(P)),
      ne_(P.energy_au.size()),
      nd_(P.delay_au.size()),
      n_(P.grid.size()),
      grid_(P.grid),
      fa_(P.ionization_energy_au, P.dipole, P.grid, carrier_, P.delay_au, P.energy_au, threads),
      ir_(std::move(ir)) {
  if (!ir_) throw std::invalid_argument("FullModelObjective: no IR parametrisation");
  fa_.set_energy_resolution(P.energy_resolution_au);  // model counts blurred like the data
  const EnergyBinMap& map = fa_.energy_bins();
  fft_slot_.resize(ne_);
  for (std::size_t j = 0; j < ne_; ++j) {
    if (map.frac[j] != 0.0)
      throw input_error(
          "full-model: the energy axis does not fall on the XUV grid's bins "
          "(RetrievalProblem.energy_au must be uniform with step grid.dw() = " +
          num(units::au_to_eV(grid_.dw())) + " eV)");
    fft_slot_[j] = fft_index(map.bin[j], n_);
  }
  measured_ = P.intensity;
  // Weights from (optionally locally averaged) variances: a weight computed from the bin's own
  // counts is correlated with its fluctuation, which biases least squares towards low counts
  // (Neyman's chi^2); averaging over neighbours removes most of that correlation.
  // No variances (noise-free synthetic data): uniform weights, C ~ squared error / max^2.
  Eigen::MatrixXd var =
      P.variance.size() != 0
          ? P.variance
          : Eigen::MatrixXd::Constant(P.intensity.rows(), P.intensity.cols(),
                                      P.intensity.maxCoeff() * P.intensity.maxCoeff());
  if (s.variance_smoothing_bins > 0 && P.variance.size() != 0) {
    const auto h = static_cast<Eigen::Index>(s.variance_smoothing_bins);
    const Eigen::Index nd = var.rows(), ne = var.cols();
    Eigen::MatrixXd sm(nd, ne);
    for (Eigen::Index i = 0; i < nd; ++i)
      for (Eigen::Index j = 0; j < ne; ++j) {
        double acc = 0;
        int cnt = 0;
        for (Eigen::Index a = std::max<Eigen::Index>(i - 1, 0); a <= std::min(i + 1, nd - 1); ++a)
          for (Eigen::Index b = std::max<Eigen::Index>(j - h, 0); b <= std::min(j + h, ne - 1);
               ++b) {
            acc += P.variance(a, b);
            ++cnt;
          }
        sm(i, j) = acc / cnt;
      }
    var = sm;
  }
  const double floor = std::max(s.variance_floor * var.maxCoeff(), 1e-300);
  weight_ = var.cwiseMax(floor).cwiseInverse();
  // RetrievalProblem::weight (0 = not data, e.g. saturated bins) scales the residuals.
  if (P.weight.size() != 0) weight_ = weight_.cwiseProduct(P.weight);
  inv_elements_ = 1.0 / static_cast<double>(measured_.size());

  // Spectral support.
  const std::vector<double> ref = reference_spectrum(P);
  std::vector<double> smooth(ne_, 0.0);
  for (std::size_t j = 0; j < ne_; ++j) {
    double acc = 0;
    int cnt = 0;
    for (long d = -2; d <= 2; ++d) {
      const long k = static_cast<long>(j) + d;
      if (k < 0 || k >= static_cast<long>(ne_)) continue;
      acc += ref[static_cast<std::size_t>(k)];
      ++cnt;
    }
    smooth[j] = acc / cnt;
  }
  const double mx = *std::max_element(smooth.begin(), smooth.end());
  std::vector<char> in(ne_, s.support_threshold == 0.0 ? 1 : 0);
  if (s.support_threshold > 0)
    for (std::size_t j = 0; j < ne_; ++j) in[j] = smooth[j] >= s.support_threshold * mx;
  const long margin = std::lround(s.support_margin_eV / units::au_to_eV(grid_.dw()));
  std::vector<char> dil = in;
  for (std::size_t j = 0; j < ne_; ++j)
    if (in[j])
      for (long d = -margin; d <= margin; ++d) {
        const long k = static_cast<long>(j) + d;
        if (k >= 0 && k < static_cast<long>(ne_)) dil[static_cast<std::size_t>(k)] = 1;
      }
  // ... inside the signal's energy support, when the problem has one
  // (retrieval/preprocess/support.h).
  const bool band = P.support_hi_au > P.support_lo_au;
  for (std::size_t j = 0; j < ne_; ++j)
    if (dil[j] &&
        (!band || (P.energy_au[j] >= P.support_lo_au && P.energy_au[j] <= P.support_hi_au)))
      support_.push_back(j);
  if (support_.empty())
    throw input_error("full-model: no XUV spectral support (the reference spectrum is empty)");
  num_xuv_ = 2 * support_.size();

  // Field-free-spectrum term.
  if (P.field_free_spectrum.size() == ne_) spectrum_ = P.field_free_spectrum;
  spectrum_weight_col_.assign(ne_, 0.0);
  for (std::size_t j = 0; j < ne_; ++j)
    spectrum_weight_col_[j] = weight_.col(static_cast<Eigen::Index>(j)).sum();
  dip2_.resize(ne_);
  for (std::size_t j = 0; j < ne_; ++j) {
    const double d = P.dipole(units::momentum_au(P.energy_au[j]));
    dip2_[j] = d * d;
  }
  if (model_ == MomentumModel::kCentral) {
    if (!(P.central_momentum_au > 0))
      throw input_error("full-model (CMA variant): RetrievalProblem.central_momentum_au = " +
                        num(P.central_momentum_au) + ": must be > 0");
    fa_.plan_central(P.central_momentum_au);
  }
  ir_scale_.assign(ir_->num_params(), 1.0);
  // Gaussian low pass of standard deviation one IR period, normalised to unit DC gain.
  const double omega = P.ir_omega_au > 0 ? P.ir_omega_au : units::wavelength_nm_to_omega_au(800.0);
  const double sigma = units::period_au(omega), dt = ir_->sampling().dt_au;
  const auto half = static_cast<std::size_t>(std::ceil(4.0 * sigma / dt));
  lowpass_kernel_.resize(half + 1);
  double norm = 0;
  for (std::size_t m = 0; m <= half; ++m) {
    const double t = static_cast<double>(m) * dt;
    lowpass_kernel_[m] = std::exp(-0.5 * t * t / (sigma * sigma));
    norm += (m == 0 ? 1.0 : 2.0) * lowpass_kernel_[m];
  }
  for (double& k : lowpass_kernel_) k /= norm;
  const IrSampling& smp = ir_->sampling();
  probed_.resize(smp.size);
  for (std::size_t r = 0; r < smp.size; ++r)
    probed_[r] = smp.time(r) >= P.delay_au.front() && smp.time(r) <= P.delay_au.back();
  edge_ridge_ = ir_->kind() == "spline";

  // Further lines of a joint fit (header comment).
  energy_au_ = P.energy_au;
  omega_bin_.resize(ne_);
  for (std::size_t j = 0; j < ne_; ++j) omega_bin_[j] = grid_.omega_fft(fft_slot_[j]);
  for (const ExtraLine& L : P.extra_lines) {
    const std::string who = "full-model: joint line '" + L.name + "'";
    if (model_ != MomentumModel::kFull)
      throw input_error(who + ": several lines are fitted by the full model only");
    if (!(L.ionization_energy_au > 0) || !(L.energy_lo_au < L.energy_hi_au) || !(L.strength > 0) ||
        !std::isfinite(L.delay_au))
      throw input_error(
          who +
          ": needs ionization_energy_au > 0, energy_lo_au < energy_hi_au, strength > 0 "
          "and a finite delay_au (got " +
          num(L.ionization_energy_au) + ", " + num(L.energy_lo_au) + " .. " + num(L.energy_hi_au) +
          ", " + num(L.strength) + ", " + num(L.delay_au) + ")");
    LineTerm t;
    t.spec = L;
    while (t.c0 < ne_ && P.energy_au[t.c0] < L.energy_lo_au) ++t.c0;
    t.c1 = t.c0;
    while (t.c1 < ne_ && P.energy_au[t.c1] <= L.energy_hi_au) ++t.c1;
    if (t.c1 < t.c0 + 4)
      throw input_error(who + ": its band " + num(units::au_to_eV(L.energy_lo_au)) + " .. " +
                        num(units::au_to_eV(L.energy_hi_au)) + " eV holds " +
                        std::to_string(t.c1 - t.c0) +
                        " energy bins of the problem: expected at least 4");
    std::vector<double> E(P.energy_au.begin() + static_cast<long>(t.c0),
                          P.energy_au.begin() + static_cast<long>(t.c1));
    try {
      t.fa = std::make_unique<ForwardAdjoint>(L.ionization_energy_au, P.dipole, P.grid, carrier_,
                                              P.delay_au, std::move(E), threads);
    } catch (const std::invalid_argument& e) {
      throw input_error(who + ": its photon energies fall outside the XUV grid (" + e.what() + ")");
    }
    lines_.push_back(std::move(t));
  }
}

std::vector<double> FullModelObjective::encode(const std::vector<cdouble>& spec,
                                               const std::vector<double>& theta) {
  if (spec.size() != ne_ || theta.size() != ir_->num_params())
    throw std::invalid_argument("FullModelObjective::encode: wrong sizes");
  double mx = 0;
  for (std::size_t j : support_) mx = std::max(mx, std::abs(spec[j]));
  xuv_scale_ = mx > 0 ? mx : 1.0;
  // Diagonal preconditioner of the XUV samples: the Gauss-Newton curvature of bin j is
  // ~ sum_i w_ij |a_ij|^2 ~ D_j = sum_i w_ij max(M_ij, 0) (its photons land mostly near energy
  // j), so x_j = E~_j / (xuv_scale sqrt(D_max / D_j)) gives every bin a comparable curvature;
  // capped at 30x for bins without signal.
  bin_scale_.assign(support_.size(), 1.0);
  {
    std::vector<double> D(support_.size(), 0.0);
    double dmax = 0;
    for (std::size_t k = 0; k < support_.size(); ++k) {
      const auto j = static_cast<Eigen::Index>(support_[k]);
      D[k] = (weight_.col(j).array() * measured_.col(j).array().max(0.0)).sum();
      dmax = std::max(dmax, D[k]);
    }
    for (std::size_t k = 0; k < support_.size(); ++k)
      bin_scale_[k] = dmax > 0 ? std::min(std::sqrt(dmax / std::max(D[k], 1e-300)), 30.0) : 1.0;
  }
  ir_scale_ = ir_->scales(theta.data());
  {
    std::vector<double> A;
    ir_->samples(theta.data(), &A);
    double amax = 1e-3;
    for (double a : A) amax = std::max(amax, std::abs(a));
    lowpass_weight_ = settings_.ir_lowpass_weight / (static_cast<double>(A.size()) * amax * amax);
  }
  std::vector<double> x(static_cast<std::size_t>(num_parameters()));
  for (std::size_t k = 0; k < support_.size(); ++k) {
    x[2 * k] = spec[support_[k]].real() / (xuv_scale_ * bin_scale_[k]);
    x[2 * k + 1] = spec[support_[k]].imag() / (xuv_scale_ * bin_scale_[k]);
  }
  for (std::size_t r = 0; r < theta.size(); ++r) x[num_xuv_ + r] = theta[r] / ir_scale_[r];
  const std::size_t off = num_xuv_ + theta.size();
  for (std::size_t l = 0; l < lines_.size(); ++l) {
    x[off + 2 * l] = std::log(lines_[l].spec.strength);
    x[off + 2 * l + 1] = lines_[l].spec.delay_au / units::as_to_au(kDelayScaleAs);
  }
  replan(x.data());
  return x;
}

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

std::vector<cdouble> FullModelObjective::spectrum(const double* x) const {
  std::vector<cdouble> s(ne_, 0.0);
  for (std::size_t k = 0; k < support_.size(); ++k)
    s[support_[k]] = cdouble(x[2 * k], x[2 * k + 1]) * (xuv_scale_ * bin_scale_[k]);
  return s;
}

CVec FullModelObjective::envelope(const double* x) const {
  const std::vector<cdouble> s = spectrum(x);
  CVec S(n_, 0.0), eps(n_);
  for (std::size_t j = 0; j < ne_; ++j) S[fft_slot_[j]] = s[j];
  to_time(grid_, Fft(n_), S, eps);
  return eps;
}

void FullModelObjective::xuv_adjoint(const CVec& eps_bar, std::vector<cdouble>* spec_bar) const {
  // eps = Q S with Q_nk = (dw/2pi) exp(-i w_k t_n): S_bar = Q^H eps_bar.
  CVec raw(n_);
  Fft(n_).time_to_freq(eps_bar, raw);
  const double c = grid_.dw() / units::kTwoPi;
  spec_bar->assign(ne_, 0.0);
  for (std::size_t j = 0; j < ne_; ++j) {
    const std::size_t k = fft_slot_[j];
    (*spec_bar)[j] = c * std::polar(1.0, grid_.omega_fft(k) * grid_.t0()) * raw[k];
  }
}

void FullModelObjective::lowpass(const std::vector<double>& a, std::vector<double>* out) const {
  const std::size_t n = a.size();
  const auto h = static_cast<long>(lowpass_kernel_.size()) - 1;
  out->assign(n, 0.0);
  for (std::size_t i = 0; i < n; ++i) {
    double acc = 0;
    const long lo = std::max(-h, -static_cast<long>(i));
    const long hi = std::min(h, static_cast<long>(n - 1 - i));
    for (long m = lo; m <= hi; ++m)
      acc += lowpass_kernel_[static_cast<std::size_t>(std::abs(m))] *
             a[static_cast<std::size_t>(static_cast<long>(i) + m)];
    (*out)[i] = acc;
  }
}

std::vector<double> FullModelObjective::without_low_frequencies(
    const std::vector<double>& theta) const {
  std::vector<double> A, LA;
  ir_->samples(theta.data(), &A);
  lowpass(A, &LA);
  for (std::size_t r = 0; r < A.size(); ++r) A[r] -= LA[r];
  const IrSampling& s = ir_->sampling();
  return ir_->fit(IrField(s.t0_au, s.dt_au, std::move(A)));
}

bool FullModelObjective::spectrum_term() const {
  return settings_.spectrum_constraint == "amplitude" && settings_.spectrum_weight > 0 &&
         spectrum_.size() == ne_;
}

std::vector<double> FullModelObjective::ir_theta(const double* x) const {
  std::vector<double> th(ir_->num_params());
  for (std::size_t r = 0; r < th.size(); ++r) th[r] = x[num_xuv_ + r] * ir_scale_[r];
  return th;
}

IrField FullModelObjective::ir_field(const double* x) const {
  const std::vector<double> th = ir_theta(x);
  return ir_->field(th.data());
}

// IR penalty: kappa [sum_{i probed} (L A)_i^2 + edge x sum_{i not probed} A_i^2], L a Gaussian
// low pass, "probed" = inside the delay range, edge = 1 for the free form only. LA and A_edge
// are kept for the gradient.
double FullModelObjective::ir_penalty(const IrField& irf, std::vector<double>* LA,
                                      std::vector<double>* A_edge) const {
  if (!(lowpass_weight_ > 0)) return 0.0;
  const std::vector<double>& A = irf.vector_potential();
  lowpass(A, LA);
  double s2 = 0;
  for (std::size_t r = 0; r < LA->size(); ++r) {
    if (!probed_[r]) (*LA)[r] = 0.0;
    s2 += (*LA)[r] * (*LA)[r];
  }
  if (edge_ridge_) {
    A_edge->assign(A.size(), 0.0);
    for (std::size_t r = 0; r < A.size(); ++r)
      if (!probed_[r]) {
        (*A_edge)[r] = A[r];
        s2 += A[r] * A[r];
      }
  }
  return lowpass_weight_ * s2;
}

void FullModelObjective::ir_penalty_gradient(const std::vector<double>& LA,
                                             const std::vector<double>& A_edge,
                                             std::vector<double>* Ab) const {
  if (!(lowpass_weight_ > 0)) return;
  std::vector<double> LLA;
  lowpass(LA, &LLA);  // L is symmetric: L^T = L (LA already masked)
  for (std::size_t r = 0; r < Ab->size(); ++r) (*Ab)[r] += 2.0 * lowpass_weight_ * LLA[r];
  if (edge_ridge_)
    for (std::size_t r = 0; r < Ab->size(); ++r) (*Ab)[r] += 2.0 * lowpass_weight_ * A_edge[r];
}

double FullModelObjective::evaluate(const double* x, double* grad) const {
  ++evaluations_;
  if (!lines_.empty()) return evaluate_lines(x, grad);
  const std::vector<cdouble> spec = spectrum(x);
  const CVec eps = envelope(x);
  const std::vector<double> th = ir_theta(x);
  const IrField irf = ir_->field(th.data());
  // Field-free-spectrum term (quadratic in the same mu), added to the data part's c2, c1, c0
  // before mu is eliminated (ForwardAdjoint::projected_cost).
  const bool use_spec = spectrum_term();
  std::vector<cdouble> pb2, pb1;
  double spec_2 = 0.0, spec_1 = 0.0, spec_0 = 0.0;
  if (use_spec) {
    pb2.assign(ne_, 0.0);
    pb1.assign(ne_, 0.0);
    for (std::size_t j : support_) {
      const double lam = settings_.spectrum_weight * spectrum_weight_col_[j];
      const double m0 = dip2_[j] * std::norm(spec[j]);
      spec_2 += lam * m0 * m0;
      spec_1 += -2.0 * lam * spectrum_[j] * m0;
      spec_0 += lam * spectrum_[j] * spectrum_[j];
      pb2[j] = 2.0 * lam * m0 * dip2_[j] * spec[j];
      pb1[j] = -2.0 * lam * spectrum_[j] * dip2_[j] * spec[j];
    }
  }
  ProjectedCostParts P;
  fa_.projected_cost(eps, irf, measured_, weight_, spec_2, spec_1, grad != nullptr, &P);
  const double mu = P.mu;
  const double c2 = P.c2 + spec_2, c1 = P.c1 + spec_1, c0 = P.c0 + spec_0;
  double C = (c0 + mu * (c1 + mu * c2)) * inv_elements_;
  std::vector<double> LA, A_edge;
  C += ir_penalty(irf, &LA, &A_edge);
  if (grad) {
    std::vector<cdouble> sb;
    xuv_adjoint(P.eps_bar, &sb);
    if (use_spec)
      for (std::size_t j : support_) sb[j] += mu * mu * pb2[j] + mu * pb1[j];
    const double gx = 2.0 * xuv_scale_ * inv_elements_;
    for (std::size_t k = 0; k < support_.size(); ++k) {
      grad[2 * k] = gx * bin_scale_[k] * sb[support_[k]].real();
      grad[2 * k + 1] = gx * bin_scale_[k] * sb[support_[k]].imag();
    }
    std::vector<double> Ab(irf.size());
    for (std::size_t r = 0; r < Ab.size(); ++r) Ab[r] = P.A_bar[r] * inv_elements_;
    ir_penalty_gradient(LA, A_edge, &Ab);
    std::vector<double> tb(ir_->num_params());
    ir_->pullback(th.data(), Ab, tb.data());
    for (std::size_t r = 0; r < tb.size(); ++r) grad[num_xuv_ + r] = tb[r] * ir_scale_[r];
  }
  return C;
}

Eigen::MatrixXd FullModelObjective::model(const double* x, double* mu) const {
  if (!lines_.empty()) {
    Eigen::MatrixXd m;
    std::vector<Eigen::MatrixXd> lm;
    line_models(x, &m, &lm);
    for (std::size_t l = 0; l < lines_.size(); ++l)
      m.middleCols(static_cast<Eigen::Index>(lines_[l].c0),
                   static_cast<Eigen::Index>(lines_[l].c1 - lines_[l].c0)) += lm[l];
    fa_.blur_counts(m);
    if (mu) {
      const Eigen::MatrixXd wm = weight_.cwiseProduct(m);
      const double c2 = wm.cwiseProduct(m).sum(), c1 = -2.0 * wm.cwiseProduct(measured_).sum();
      *mu = c2 > 0 ? -c1 / (2.0 * c2) : 0.0;
    }
    return m;
  }
  const std::vector<cdouble> spec = spectrum(x);
  ScaledCostParts P;
  Eigen::MatrixXd m;
  fa_.scaled_cost(envelope(x), ir_field(x), measured_, weight_, false, &P, &m);
  if (spectrum_term())
    for (std::size_t j : support_) {
      const double lam = settings_.spectrum_weight * spectrum_weight_col_[j];
      const double m0 = dip2_[j] * std::norm(spec[j]);
      P.c2 += lam * m0 * m0;
      P.c1 += -2.0 * lam * spectrum_[j] * m0;
    }
  if (mu) *mu = P.c2 > 0 ? -P.c1 / (2.0 * P.c2) : 0.0;
  return m;
}

void FullModelObjective::replan(const double* x) {
  if (model_ == MomentumModel::kCentral) return;
  ForwardModelOptions o;
  o.momentum = MomentumModel::kFull;
  o.chebyshev_nodes = settings_.chebyshev_nodes;
  o.max_block_phase_rad = settings_.block_phase_rad;
  const IrField irf = ir_field(x);
  fa_.plan_full(irf, o);
  for (LineTerm& t : lines_) t.fa->plan_full(irf, o);
}

bool FullModelObjective::plan_covers(const double* x, double slack) const {
  const IrField irf = ir_field(x);
  if (!fa_.plan_covers(irf, slack)) return false;
  for (const LineTerm& t : lines_)
    if (!t.fa->plan_covers(irf, slack)) return false;
  return true;
}

// --- a pausable L-BFGS run ----------------------------------------------------------------------

namespace {

// Ceres' GradientProblemSolver on a worker thread; an iteration callback pauses it after
// every `budget` iterations until advance() grants more, so one L-BFGS run (with its curvature
// memory) spans many engine iterations. The parameters are read only while the solver waits.
class LbfgsRunner {
 public:
  LbfgsRunner(const FullModelObjective& f, const ceres::GradientProblemSolver::Options& o,
              std::vector<double> x0)
      : objective_(f), options_(o), x_(std::move(x0)), callback_(this) {}
  ~LbfgsRunner() { stop(); }
  LbfgsRunner(const LbfgsRunner&) = delete;
  LbfgsRunner& operator=(const LbfgsRunner&) = delete;

  /// Runs `n` more iterations (starting the solver on the first call); returns when it has
  /// paused or finished.
  void advance(int n) {
    std::unique_lock<std::mutex> lock(mutex_);
    budget_ = done_ + n;
    paused_ = false;
    if (!thread_.joinable()) {
      thread_ = std::thread([this] { run(); });
    } else {
      cv_.notify_all();
    }
    cv_.wait(lock, [this] { return paused_ || finished_; });
  }
  /// Ends the run (the solver returns at its next callback) and joins the thread.
  void stop() {
    {
      std::lock_guard<std::mutex> lock(mutex_);
      stop_ = true;
    }
    cv_.notify_all();
    if (thread_.joinable()) thread_.join();
  }
  bool finished() const {
    std::lock_guard<std::mutex> lock(mutex_);
    return finished_;
  }
  const std::vector<double>& x() const { return x_; }
  const ceres::GradientProblemSolver::Summary& summary() const { return summary_; }
  int iterations() const { return done_; }
  double initial_cost() const { return initial_cost_; }
  double cost() const { return cost_; }
  double step_size() const { return step_; }
  std::exception_ptr error() const { return error_; }

 private:
  class Adapter : public ceres::FirstOrderFunction {
   public:
    Adapter(const FullModelObjective& f, LbfgsRunner* r) : f_(f), r_(r) {}
    bool Evaluate(const double* x, double* cost, double* grad) const override {
      try {
        *cost = f_.evaluate(x, grad);
        return std::isfinite(*cost);
      } catch (...) {
        if (!r_->error_) r_->error_ = std::current_exception();
        return false;
      }
    }
    int NumParameters() const override { return f_.num_parameters(); }

   private:
    const FullModelObjective& f_;
    LbfgsRunner* r_;
  };
  class Callback : public ceres::IterationCallback {
   public:
    explicit Callback(LbfgsRunner* r) : r_(r) {}
    ceres::CallbackReturnType operator()(const ceres::IterationSummary& s) override {
      return r_->on_iteration(s);
    }

   private:
    LbfgsRunner* r_;
  };

  ceres::CallbackReturnType on_iteration(const ceres::IterationSummary& s) {
    std::unique_lock<std::mutex> lock(mutex_);
    cost_ = s.cost;
    step_ = s.step_size;
    if (s.iteration == 0) {
      initial_cost_ = s.cost;
      return stop_ ? ceres::SOLVER_TERMINATE_SUCCESSFULLY : ceres::SOLVER_CONTINUE;
    }
    ++done_;
    if (done_ >= budget_ && !stop_) {
      paused_ = true;
      cv_.notify_all();
      cv_.wait(lock, [this] { return done_ < budget_ || stop_; });
    }
    return stop_ ? ceres::SOLVER_TERMINATE_SUCCESSFULLY : ceres::SOLVER_CONTINUE;
  }

  void run() {
    try {
      ceres::GradientProblemSolver::Options o = options_;
      o.callbacks.push_back(&callback_);
      o.update_state_every_iteration = true;
      ceres::GradientProblem problem(new Adapter(objective_, this));
      ceres::Solve(o, problem, x_.data(), &summary_);
    } catch (...) {
      if (!error_) error_ = std::current_exception();
    }
    std::lock_guard<std::mutex> lock(mutex_);
    finished_ = true;
    cv_.notify_all();
  }

  const FullModelObjective& objective_;
  ceres::GradientProblemSolver::Options options_;
  std::vector<double> x_;
  Callback callback_;
  ceres::GradientProblemSolver::Summary summary_;
  std::thread thread_;
  mutable std::mutex mutex_;
  std::condition_variable cv_;
  int budget_ = 0, done_ = 0;
  bool paused_ = false, finished_ = false, stop_ = false;
  double initial_cost_ = 0.0, cost_ = 0.0, step_ = 0.0;
  std::exception_ptr error_;
};

// --- initial guesses --------------------------------------------------------------------------

// E~(W_j + Ip) of a field by direct summation (any grid and carrier).
std::vector<cdouble> spectrum_at(const XuvField& x, const std::vector<double>& W, double ip) {
  const TimeGrid& g = x.grid();
  std::vector<cdouble> s(W.size(), 0.0);
  const CVec& e = x.envelope();
  for (std::size_t j = 0; j < W.size(); ++j) {
    const double w = W[j] + ip - x.carrier_au();
    cdouble acc = 0.0;
    for (std::size_t n = 0; n < g.size(); ++n) acc += e[n] * std::polar(1.0, w * g.time(n));
    s[j] = acc * g.dt();
  }
  return s;
}

// A(tau) = p_ref - <p>(tau) from the momentum centroids (classical streaking, p_f = p_i - A:
// DESIGN.md; J. Itatani et al., PRL 88, 173903 (2002)).
void centroid_curve(const RetrievalProblem& P, std::vector<double>* A) {
  const std::size_t ne = P.energy_au.size(), nd = P.delay_au.size();
  std::vector<double> p(ne);
  for (std::size_t j = 0; j < ne; ++j) p[j] = units::momentum_au(P.energy_au[j]);
  const std::vector<double> ref = reference_spectrum(P);
  double n0 = 0, d0 = 0;
  for (std::size_t j = 0; j < ne; ++j) {
    n0 += std::max(ref[j], 0.0) * p[j];
    d0 += std::max(ref[j], 0.0);
  }
  const double pref = d0 > 0 ? n0 / d0 : p[ne / 2];
  A->assign(nd, 0.0);
  for (std::size_t i = 0; i < nd; ++i) {
    double nn = 0, dd = 0;
    for (std::size_t j = 0; j < ne; ++j) {
      const double m =
          std::max(P.intensity(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)), 0.0);
      nn += m * p[j];
      dd += m;
    }
    (*A)[i] = dd > 0 ? pref - nn / dd : 0.0;
  }
}

// --- the engine -------------------------------------------------------------------------------

class LeastSquaresEngine : public Engine {
 public:
  explicit LeastSquaresEngine(MomentumModel m) : model_(m) {}
  ~LeastSquaresEngine() override { runner_.reset(); }

  std::string name() const override {
    return model_ == MomentumModel::kFull ? "full-model" : "cma-least-squares";
  }
  std::string description() const override {
    return model_ == MomentumModel::kFull
               ? "least-squares fit of the full SFA model (no central-momentum approximation), "
                 "L-BFGS with adjoint gradients"
               : "least-squares fit of the SFA model in the central-momentum approximation, "
                 "L-BFGS with adjoint gradients";
  }
  std::string reference() const override {
    return "P. D. Keathley et al., New J. Phys. 18, 073009 (2016); D. C. Liu and J. Nocedal, "
           "Math. Program. 45, 503 (1989)";
  }
  std::vector<ExtraOption> extra_options() const override { return full_model_extra_options(); }

  void prepare(const RetrievalProblem& problem, const EngineOptions& options) override;
  IterationRecord iterate(int k) override;
  Reconstruction finalize() override;

 private:
  double current_G(const std::vector<double>& x) const {
    return trace_error(problem_.intensity, objective_->model(x.data(), nullptr), nullptr,
                       &problem_.weight);
  }

  MomentumModel model_;
  RetrievalProblem problem_;
  EngineOptions options_;
  FullModelSettings settings_;
  std::unique_ptr<FullModelObjective> objective_;
  ceres::GradientProblemSolver::Options ceres_options_;
  std::unique_ptr<LbfgsRunner> runner_;
  std::vector<double> x_, best_x_;
  double best_G_ = 0.0, initial_G_ = 0.0, last_G_ = 0.0, initial_cost_ = 0.0;
  bool done_ = false;
  long long lbfgs_iterations_ = 0;
  int runs_ = 0, replans_ = 0;
  std::string ir_form_, ir_guess_, last_termination_;
};

void LeastSquaresEngine::prepare(const RetrievalProblem& P, const EngineOptions& options) {
  runner_.reset();
  check_problem(P, name());
  problem_ = P;
  options_ = options;
  settings_ = read_full_model_settings(options);
  done_ = false;
  lbfgs_iterations_ = 0;
  runs_ = replans_ = 0;
  last_termination_.clear();

  const double ip = P.ionization_energy_au;
  const double omega = P.ir_omega_au > 0 ? P.ir_omega_au : units::wavelength_nm_to_omega_au(800.0);
  const double T = units::period_au(omega);
  const double carrier = FullModelObjective::carrier_for(P);
  const std::size_t n = P.grid.size(), ne = P.energy_au.size();

  // Initial XUV spectrum at the energy bins.
  std::vector<cdouble> spec(ne, 0.0);
  if (options.initial_xuv) {
    spec = spectrum_at(*options.initial_xuv, P.energy_au, ip);
  } else {
    const std::vector<double> ref = reference_spectrum(P);
    for (std::size_t j = 0; j < ne; ++j) {
      const double d = std::abs(P.dipole(units::momentum_au(P.energy_au[j])));
      spec[j] = d > 0 ? std::sqrt(std::max(ref[j], 0.0)) / d : 0.0;
    }
  }
  // Time support of that XUV (|eps|^2 above 1e-6 of its peak), widened by T/4.
  double s_lo = P.grid.time(0), s_hi = P.grid.time(n - 1);
  {
    const EnergyBinMap map = map_energy_bins(P.grid, carrier, ip, P.energy_au);
    CVec S(n, 0.0), eps(n);
    for (std::size_t j = 0; j < ne; ++j) S[fft_index(map.bin[j], n)] = spec[j];
    to_time(P.grid, Fft(n), S, eps);
    double peak = 0;
    for (const cdouble& e : eps) peak = std::max(peak, std::norm(e));
    std::size_t first = n, last = 0;
    for (std::size_t s = 0; s < n; ++s)
      if (std::norm(eps[s]) >= 1e-6 * peak) {
        first = std::min(first, s);
        last = s;
      }
    if (first < n) {
      s_lo = std::max(P.grid.time(0), P.grid.time(first) - T / 4);
      s_hi = std::min(P.grid.time(n - 1), P.grid.time(last) + T / 4);
    }
  }
  const IrSampling sampling = IrSampling::covering(
      P.delay_au.front() + s_lo, P.delay_au.back() + s_hi, T / settings_.ir_samples_per_period);

  // IR form and initial parameters.
  ir_form_ = settings_.ir == "auto" ? (options.initial_ir ? "spline" : "parametric") : settings_.ir;
  std::vector<double> gauss;  // parametric guess when needed
  if (!options.initial_ir) {
    std::vector<double> A;
    centroid_curve(P, &A);
    double amax = 0;
    for (double a : A) amax = std::max(amax, std::abs(a));
    if (amax > 0) {
      gauss = GaussianIrParametrization::fit_samples(P.delay_au, A,
                                                     std::vector<double>(A.size(), 1.0), omega);
      ir_guess_ = "centroid curve";
    } else {
      gauss = {1e-3, omega, 2 * T, 0.0, 0.0, 0.5 * (P.delay_au.front() + P.delay_au.back())};
      ir_guess_ = "weak default (no centroid sweep)";
    }
  } else {
    ir_guess_ = "initial_ir";
  }
  std::unique_ptr<IrParametrization> param;
  std::vector<double> theta;
  if (ir_form_ == "parametric") {
    auto g = std::make_unique<GaussianIrParametrization>(sampling);
    theta = options.initial_ir ? g->fit(*options.initial_ir) : gauss;
    param = std::move(g);
  } else {
    auto sp = std::make_unique<SplineIrParametrization>(sampling, T / settings_.knots_per_period);
    if (options.initial_ir) {
      theta = sp->fit(*options.initial_ir);
    } else {
      std::vector<double> A(sampling.size);
      for (std::size_t i = 0; i < A.size(); ++i)
        A[i] = GaussianIrParametrization::value(gauss.data(), sampling.time(i));
      theta = sp->fit_samples(A);
    }
    double amax = 0;
    for (double c : theta) amax = std::max(amax, std::abs(c));
    sp->set_amplitude_scale(std::max(amax, 1e-2));
    param = std::move(sp);
  }
  objective_ =
      std::make_unique<FullModelObjective>(P, settings_, model_, std::move(param), options.threads);
  // A warm-start IR from a CMA engine carries an arbitrary low-frequency offset (the gate side of
  // the frequency-shift ambiguity); start the free form without it.
  if (ir_form_ == "spline" && settings_.ir_lowpass_weight > 0)
    theta = objective_->without_low_frequencies(theta);
  x_ = objective_->encode(spec, theta);
  best_x_ = x_;
  initial_G_ = best_G_ = last_G_ = current_G(x_);
  initial_cost_ = objective_->evaluate(x_.data(), nullptr);

  ceres_options_ = ceres::GradientProblemSolver::Options();
  ceres_options_.line_search_direction_type = ceres::LBFGS;
  ceres_options_.line_search_type = ceres::WOLFE;
  ceres_options_.max_lbfgs_rank = settings_.lbfgs_memory;
  ceres_options_.use_approximate_eigenvalue_bfgs_scaling = true;
  ceres_options_.max_num_iterations = 100000000;
  ceres_options_.max_solver_time_in_seconds = options.max_seconds;
  ceres_options_.function_tolerance = 1e-12;
  ceres_options_.gradient_tolerance = 1e-14;
  ceres_options_.parameter_tolerance = 1e-12;
  ceres_options_.logging_type = ceres::SILENT;
}

IterationRecord LeastSquaresEngine::iterate(int) {
  IterationRecord rec;
  if (!objective_) throw Error(ErrorKind::kInternal, name() + ": iterate() before prepare()");
  if (done_) {
    rec.trace_error = last_G_;
    return rec;
  }
  if (!runner_) {
    runner_ = std::make_unique<LbfgsRunner>(*objective_, ceres_options_, x_);
    ++runs_;
  }
  runner_->advance(settings_.lbfgs_per_iteration);
  if (const std::exception_ptr e = runner_->error()) {
    runner_.reset();
    try {
      std::rethrow_exception(e);
    } catch (const std::exception& ex) {
      throw numeric_error(name() + ": model evaluation failed: " + ex.what());
    }
  }
  x_ = runner_->x();
  rec.step_size = runner_->step_size();
  if (runner_->finished()) {
    const ceres::GradientProblemSolver::Summary& s = runner_->summary();
    lbfgs_iterations_ += runner_->iterations();
    last_termination_ = s.message;
    // A run that still made progress earns a fresh restart (new blocks, new memory).
    const double gain = runner_->initial_cost() - s.final_cost;
    const bool progress = gain > 1e-9 * std::abs(runner_->initial_cost());
    runner_.reset();
    if (progress && s.termination_type != ceres::FAILURE) {
      objective_->replan(x_.data());
      ++replans_;
    } else {
      done_ = true;
    }
  } else if (!objective_->plan_covers(x_.data(), 0.25)) {
    lbfgs_iterations_ += runner_->iterations();
    runner_.reset();
    objective_->replan(x_.data());
    ++replans_;
  }
  last_G_ = current_G(x_);
  if (last_G_ < best_G_) {
    best_G_ = last_G_;
    best_x_ = x_;
  }
  rec.trace_error = last_G_;
  return rec;
}

Reconstruction LeastSquaresEngine::finalize() {
  if (!objective_) throw Error(ErrorKind::kInternal, name() + ": finalize() before prepare()");
  if (runner_) {
    lbfgs_iterations_ += runner_->iterations();
    runner_.reset();
  }
  const FullModelObjective& f = *objective_;
  CVec eps = f.envelope(best_x_.data());
  // Global phase: arg eps = 0 at the intensity peak.
  std::size_t peak = 0;
  for (std::size_t s = 1; s < eps.size(); ++s)
    if (std::norm(eps[s]) > std::norm(eps[peak])) peak = s;
  const cdouble rot = std::abs(eps[peak]) > 0 ? std::conj(eps[peak]) / std::abs(eps[peak]) : 1.0;
  for (cdouble& e : eps) e *= rot;

  Reconstruction r;
  r.engine = name();
  r.model = model_ == MomentumModel::kFull ? "full" : "cma";
  r.noise_model = problem_.variance.size() != 0 ? "poisson" : "gaussian";
  r.reference = reference();
  r.xuv = XuvField(problem_.grid, f.carrier_au(), std::move(eps));
  r.ir = f.ir_field(best_x_.data());
  ForwardModelOptions fo;
  fo.momentum = model_;
  fo.central_momentum_au = problem_.central_momentum_au;
  fo.chebyshev_nodes = settings_.chebyshev_nodes;
  fo.max_block_phase_rad = settings_.block_phase_rad;
  fo.energy_jacobian = false;
  fo.threads = options_.threads;
  if (f.num_lines() > 0) {
    // Joint fit: the model of every line (the reference's own ForwardModel would miss the others).
    r.retrieved = f.model(best_x_.data(), nullptr);
  } else {
    r.retrieved = ForwardModel(problem_.ionization_energy_au, problem_.dipole, fo)
                      .trace(r.xuv, r.ir, problem_.delay_au, problem_.energy_au);
    f.apply_resolution(r.retrieved);  // counts as the spectrometer records them
  }
  r.trace_error = trace_error(problem_.intensity, r.retrieved, &r.scale, &problem_.weight);
  r.termination = done_ ? Termination::kConverged : Termination::kMaxIterations;
  r.message = last_termination_.empty() ? "L-BFGS still running" : "L-BFGS: " + last_termination_;

  double wmu = 0;
  const double wcost = f.evaluate(best_x_.data(), nullptr);
  f.model(best_x_.data(), &wmu);
  auto& S = r.settings;
  S.emplace_back("forward_model", r.model);
  S.emplace_back("ir_form", ir_form_);
  S.emplace_back("ir_initial_guess", ir_guess_);
  S.emplace_back("xuv_initial_guess",
                 options_.initial_xuv ? "initial_xuv" : "sqrt(spectrum)/|d|, flat phase");
  S.emplace_back("parameters", std::to_string(f.num_parameters()));
  S.emplace_back("xuv_support_bins", std::to_string(f.support().size()));
  S.emplace_back("carrier_eV", num(units::au_to_eV(f.carrier_au())));
  const IrSampling& smp = f.ir_parametrization().sampling();
  S.emplace_back("ir_window_fs",
                 num(units::au_to_fs(smp.t0_au)) + " .. " + num(units::au_to_fs(smp.last_time())));
  S.emplace_back("ir_samples", std::to_string(smp.size));
  if (const auto* sp = dynamic_cast<const SplineIrParametrization*>(&f.ir_parametrization()))
    S.emplace_back("spline_knot_spacing_fs", num(units::au_to_fs(sp->knot_spacing_au())));
  if (ir_form_ == "parametric") {
    const std::vector<double> th = f.ir_theta(best_x_.data());
    const GaussianIrPulse p = GaussianIrParametrization::to_pulse(th.data());
    S.emplace_back("ir_wavelength_nm", num(p.wavelength_nm));
    S.emplace_back("ir_fwhm_fs", num(p.fwhm_fs));
    S.emplace_back("ir_peak_intensity_Wcm2", num(p.peak_intensity_Wcm2));
    S.emplace_back("ir_cep_rad", num(p.cep_rad));
    S.emplace_back("ir_chirp_rad_per_fs2", num(p.chirp_rad_per_fs2));
    S.emplace_back("ir_center_fs", num(p.center_fs));
  }
  S.emplace_back("momentum_blocks", std::to_string(f.forward().plan().blocks.size()));
  S.emplace_back("lbfgs_runs", std::to_string(runs_));
  S.emplace_back("lbfgs_iterations", std::to_string(lbfgs_iterations_));
  S.emplace_back("cost_evaluations", std::to_string(f.evaluations()));
  S.emplace_back("block_replans", std::to_string(replans_));
  S.emplace_back("lbfgs_termination", last_termination_.empty() ? "running" : last_termination_);
  S.emplace_back("weighted_cost_per_element", num(wcost));
  S.emplace_back("weighted_scale", num(wmu));
  S.emplace_back("initial_trace_error", num(initial_G_));
  S.emplace_back("initial_weighted_cost_per_element", num(initial_cost_));
  S.emplace_back("noise_model", problem_.variance.size() != 0
                                    ? "poisson (weights 1/variance, variance averaged over +-" +
                                          std::to_string(settings_.variance_smoothing_bins) +
                                          " energy bins and +-1 delay)"
                                    : "none (no variances: uniform weights)");
  S.emplace_back("spectrum_constraint", settings_.spectrum_constraint);
  S.emplace_back("ir_lowpass_weight", num(settings_.ir_lowpass_weight));
  for (const auto& [k, v] : options_.extra) S.emplace_back("extra." + k, v);
  for (std::size_t l = 0; l < f.num_lines(); ++l) {
    // Joint lines (read back by retrieval/analysis/multi_line_fit.cpp; full precision).
    std::ostringstream d, g, c;
    d.precision(12);
    g.precision(12);
    c.precision(12);
    d << units::au_to_as(f.line_delay_au(best_x_.data(), l));
    g << f.line_strength(best_x_.data(), l);
    c << f.line_counts_ratio(best_x_.data(), l);
    const std::string k = "joint_line." + std::to_string(l) + ".";
    S.emplace_back(k + "name", f.line(l).name);
    S.emplace_back(k + "delay_as", d.str());
    S.emplace_back(k + "strength", g.str());
    S.emplace_back(k + "counts_ratio", c.str());
  }
  return r;
}

}  // namespace

std::unique_ptr<Engine> make_full_model_engine() {
  return std::make_unique<LeastSquaresEngine>(MomentumModel::kFull);
}

std::unique_ptr<Engine> make_cma_least_squares_engine() {
  return std::make_unique<LeastSquaresEngine>(MomentumModel::kCentral);
}

}  // namespace sw
