#include "synthetic/tof_recording.h"

#include <algorithm>
#include <cmath>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"

namespace sw::synthetic {

double tof_energy_eV(double t_ns, const TofConfig& c) {
  const double v = c.length_m / ((t_ns - c.t0_ns) * 1e-9);  // m/s
  return 0.5 * units::kElectronMass_kg * v * v / units::kElementaryCharge_C + c.energy_offset_eV;
}

double tof_time_ns(double E_eV, const TofConfig& c) {
  const double v = std::sqrt(2.0 * (E_eV - c.energy_offset_eV) * units::kElementaryCharge_C /
                             units::kElectronMass_kg);
  return c.t0_ns + c.length_m / v * 1e9;
}

TofRecorder::TofRecorder(const TofConfig& c, const std::vector<double>& E) {
  const std::size_t n = E.size();
  if (!c.enabled() || n < 2)
    throw Error(ErrorKind::kInternal, "TofRecorder: needs tof.length_m > 0 and >= 2 energies");
  std::vector<double> edge(n + 1);
  for (std::size_t j = 1; j < n; ++j) edge[j] = 0.5 * (E[j - 1] + E[j]);
  edge[0] = E[0] - (edge[1] - E[0]);
  edge[n] = E[n - 1] + (E[n - 1] - edge[n - 1]);
  const std::size_t m = c.bins > 0 ? static_cast<std::size_t>(c.bins) : n;
  const double t_first = tof_time_ns(edge[n], c), t_last = tof_time_ns(edge[0], c);
  const double dt = (t_last - t_first) / static_cast<double>(m);
  // Column k (ascending energy) = time bin m-1-k; its energy interval [E(hi time edge), E(lo)].
  std::vector<double> e_lo(m), e_hi(m);
  tof_ns_.resize(m);
  energy_eV_.resize(m);
  for (std::size_t k = 0; k < m; ++k) {
    const std::size_t b = m - 1 - k;
    const double lo_t = t_first + dt * static_cast<double>(b);
    const double hi_t = b + 1 == m ? t_last : t_first + dt * static_cast<double>(b + 1);
    tof_ns_[k] = t_first + dt * (static_cast<double>(b) + 0.5);
    energy_eV_[k] = tof_energy_eV(tof_ns_[k], c);
    e_lo[k] = k == 0 ? edge[0] : tof_energy_eV(hi_t, c);
    e_hi[k] = k + 1 == m ? edge[n] : tof_energy_eV(lo_t, c);
  }
  // The outer intervals are pinned to the energy edges, and neighbours share their edge values
  // exactly (same expression), so the intervals tile [edge[0], edge[n]].
  for (std::size_t k = 1; k < m; ++k) e_lo[k] = e_hi[k - 1];
  for (std::size_t j = 0; j < n; ++j) {
    const double a = edge[j], b = edge[j + 1], w = b - a;
    // First column whose interval ends above a (e_hi ascending).
    std::size_t q =
        static_cast<std::size_t>(std::upper_bound(e_hi.begin(), e_hi.end(), a) - e_hi.begin());
    for (; q < m && e_lo[q] < b; ++q) {
      const double lo = std::max(a, e_lo[q]), hi = std::min(b, e_hi[q]);
      if (hi > lo)
        shares_.push_back(
            {static_cast<Eigen::Index>(j), static_cast<Eigen::Index>(q), (hi - lo) / w});
    }
  }
  // Renormalise each energy bin's shares to exactly 1 (rounding of the edges).
  std::vector<double> sum(n, 0.0);
  for (const Share& s : shares_) sum[static_cast<std::size_t>(s.in)] += s.fraction;
  for (Share& s : shares_) s.fraction /= sum[static_cast<std::size_t>(s.in)];
  n_in_ = static_cast<Eigen::Index>(n);
  n_out_ = static_cast<Eigen::Index>(m);
}

Eigen::MatrixXd TofRecorder::rebin(const Eigen::MatrixXd& in) const {
  if (in.cols() != n_in_)
    throw Error(ErrorKind::kInternal, "TofRecorder::rebin: column count differs from the axis");
  Eigen::MatrixXd out = Eigen::MatrixXd::Zero(in.rows(), n_out_);
  for (const Share& s : shares_) out.col(s.out) += s.fraction * in.col(s.in);
  return out;
}

}  // namespace sw::synthetic
