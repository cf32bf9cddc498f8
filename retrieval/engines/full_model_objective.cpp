#include "retrieval/engines/full_model_engine.h"

#include <algorithm>
#include <cmath>
#include <sstream>

#include "retrieval/core/error.h"
#include "retrieval/core/statistics.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/full_model_internal.h"

namespace sw {

// --- objective --------------------------------------------------------------------------------
// Construction, parameter encoding, cost and adjoint gradient of FullModelObjective (one line);
// the terms of further lines of a joint fit are in full_model_lines.cpp.

namespace full_model_detail {

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

}  // namespace full_model_detail

namespace {
using full_model_detail::check_problem;
using full_model_detail::num;
using full_model_detail::plan_options;
using full_model_detail::reference_spectrum;
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
  const std::vector<double> smooth = moving_average(ref, 2);
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

void FullModelObjective::set_measured(const Eigen::MatrixXd& counts) {
  if (counts.rows() != measured_.rows() || counts.cols() != measured_.cols())
    throw std::invalid_argument("FullModelObjective::set_measured: wrong shape");
  measured_ = counts;
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
  const ForwardModelOptions o = plan_options(settings_);
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

}  // namespace sw
