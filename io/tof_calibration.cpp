#include "io/tof_calibration.h"

#include <algorithm>
#include <cmath>
#include <numeric>
#include <sstream>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"

namespace sw {
namespace {}  // namespace

std::string TofCalibration::validate() const {
  if (!std::isfinite(length_m) || !(length_m > 0))
    return "calibration.length_m = " + format_g(length_m) + "; expected a drift length > 0 m";
  if (!std::isfinite(t0_ns))
    return "calibration.t0_ns = " + format_g(t0_ns) + "; expected a finite time";
  if (!std::isfinite(energy_offset_eV))
    return "calibration.energy_offset_eV = " + format_g(energy_offset_eV) +
           "; expected a finite energy";
  if (energy_count < 0)
    return "calibration.energy_count = " + std::to_string(energy_count) +
           "; expected 0 (as many as time bins) or a positive number of bins";
  if (energy_min_eV && !std::isfinite(*energy_min_eV))
    return "calibration.energy_min_eV = " + format_g(*energy_min_eV) + "; expected a finite energy";
  if (energy_max_eV && !std::isfinite(*energy_max_eV))
    return "calibration.energy_max_eV = " + format_g(*energy_max_eV) + "; expected a finite energy";
  if (energy_min_eV && energy_max_eV && !(*energy_min_eV < *energy_max_eV))
    return "calibration.energy_min_eV = " + format_g(*energy_min_eV) +
           " is not below energy_max_eV = " + format_g(*energy_max_eV);
  return {};
}

double tof_to_energy_eV(double t_ns, const TofCalibration& cal) {
  const double flight_s = (t_ns - cal.t0_ns) * 1e-9;
  const double v = cal.length_m / flight_s;  // m/s
  return 0.5 * units::kElectronMass_kg * v * v / units::kElementaryCharge_C + cal.energy_offset_eV;
}

double tof_energy_jacobian_eV_per_ns(double t_ns, const TofCalibration& cal) {
  const double flight_s = (t_ns - cal.t0_ns) * 1e-9;
  const double dE_dt_J_per_s =
      units::kElectronMass_kg * cal.length_m * cal.length_m / (flight_s * flight_s * flight_s);
  return dE_dt_J_per_s / units::kElementaryCharge_C * 1e-9;
}

TofConversion tof_to_energy(const Eigen::MatrixXd& counts, const std::vector<double>& tof_ns,
                            const TofCalibration& cal, const std::string& where) {
  if (const std::string bad = cal.validate(); !bad.empty()) throw input_error(where + ": " + bad);
  const std::size_t n = tof_ns.size();
  if (n < 2)
    throw input_error(where + ": tof_ns has " + std::to_string(n) +
                      " value(s); expected at least 2 time bins to convert to energy");
  if (static_cast<std::size_t>(counts.cols()) != n)
    throw input_error(where + ": tof_ns has " + std::to_string(n) + " values but the data has " +
                      std::to_string(counts.cols()) + " time-of-flight bins");
  // Bins in ascending time order.
  std::vector<std::size_t> order(n);
  std::iota(order.begin(), order.end(), 0);
  std::sort(order.begin(), order.end(),
            [&](std::size_t a, std::size_t b) { return tof_ns[a] < tof_ns[b]; });
  std::vector<double> t(n);
  for (std::size_t k = 0; k < n; ++k) t[k] = tof_ns[order[k]];
  for (std::size_t k = 1; k < n; ++k)
    if (!(t[k] > t[k - 1]))
      throw input_error(where + ": tof_ns repeats the value " + format_g(t[k]) +
                        "; expected strictly monotonic flight times");
  std::vector<double> edge(n + 1);
  edge[0] = t[0] - 0.5 * (t[1] - t[0]);
  for (std::size_t k = 1; k < n; ++k) edge[k] = 0.5 * (t[k - 1] + t[k]);
  edge[n] = t[n - 1] + 0.5 * (t[n - 1] - t[n - 2]);
  if (!(edge[0] > cal.t0_ns))
    throw input_error(where + ": the earliest time-of-flight bin (centre " + format_g(t[0]) +
                      " ns, lower edge " + format_g(edge[0]) +
                      " ns) is not after calibration.t0_ns = " + format_g(cal.t0_ns) +
                      " ns; expected every bin after time zero (crop the "
                      "spectrum or correct t0_ns)");
  // Energy interval of each time bin: [E(edge[k+1]), E(edge[k])].
  std::vector<double> e_edge(n + 1);
  for (std::size_t k = 0; k <= n; ++k) e_edge[k] = tof_to_energy_eV(edge[k], cal);
  const double lo = cal.energy_min_eV.value_or(e_edge[n]);
  const double hi = cal.energy_max_eV.value_or(e_edge[0]);
  if (!(hi > lo))
    throw input_error(where + ": the calibration energy window [" + format_g(lo) + ", " +
                      format_g(hi) + "] eV is empty; expected energy_min_eV < energy_max_eV");
  const int m = cal.energy_count > 0 ? cal.energy_count : static_cast<int>(n);
  const double w = (hi - lo) / m;

  struct Share {
    Eigen::Index in, out;
    double fraction;
  };
  std::vector<Share> shares;
  for (std::size_t k = 0; k < n; ++k) {
    const double a = e_edge[k + 1], b = e_edge[k];
    const double width = b - a;
    const int j0 = std::max(0, static_cast<int>(std::floor((a - lo) / w)));
    const int j1 = std::min(m - 1, static_cast<int>(std::floor((b - lo) / w)));
    for (int j = j0; j <= j1; ++j) {
      const double olo = std::max(a, lo + j * w), ohi = std::min(b, lo + (j + 1) * w);
      if (ohi > olo)
        shares.push_back({static_cast<Eigen::Index>(order[k]), j, (ohi - olo) / width});
    }
  }
  TofConversion out;
  out.energy_eV.resize(m);
  for (int j = 0; j < m; ++j) out.energy_eV[j] = lo + (j + 0.5) * w;
  out.counts = Eigen::MatrixXd::Zero(counts.rows(), m);
  for (Eigen::Index r = 0; r < counts.rows(); ++r)
    for (const Share& s : shares) out.counts(r, s.out) += counts(r, s.in) * s.fraction;
  const double total_in = counts.sum();
  out.fraction_outside = total_in > 0 ? std::max(0.0, 1.0 - out.counts.sum() / total_in) : 0.0;
  return out;
}

}  // namespace sw
