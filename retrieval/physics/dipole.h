#pragma once
// Bound-free dipole matrix element d(k) along the polarisation, as a function of the
// instantaneous (kinetic) momentum k = p + A(t) of the electron (a.u.).
//
//   kConstant:   d(k) = 1 (the common flat-dipole choice of streaking retrievals).
//   kHydrogenic: d(k) = k / (k^2 + kappa^2)^3, kappa = sqrt(2 Ip): the SFA dipole of a
//                hydrogen-like 1s state scaled to the gas's Ip (M. Lewenstein et al.,
//                Phys. Rev. A 49, 2117 (1994), Eq. for d(p)); smooth and decreasing at
//                XUV energies, normalised to 1 at the reference momentum k_ref.

#include <string>

namespace sw {

enum class DipoleKind { kConstant, kHydrogenic };
const char* to_string(DipoleKind k);
bool parse_dipole_kind(const std::string& s, DipoleKind* out);
/// The same, under the name option descriptions use (retrieval/core/option_spec.h).
inline bool parse_option(const std::string& s, DipoleKind* out) {
  return parse_dipole_kind(s, out);
}

class DipoleModel {
 public:
  DipoleModel() = default;
  DipoleModel(DipoleKind kind, double ionization_energy_au, double k_ref_au = 1.0);
  DipoleKind kind() const { return kind_; }
  double operator()(double k_au) const {
    if (kind_ == DipoleKind::kConstant) return 1.0;
    const double q = k_au * k_au + kappa2_;
    return norm_ * k_au / (q * q * q);
  }
  /// dd/dk at k (a.u.), for adjoint gradients: 0 for kConstant, norm (q - 6 k^2) / q^4 with
  /// q = k^2 + kappa^2 for kHydrogenic.
  double derivative(double k_au) const {
    if (kind_ == DipoleKind::kConstant) return 0.0;
    const double q = k_au * k_au + kappa2_;
    return norm_ * (q - 6.0 * k_au * k_au) / (q * q * q * q);
  }

 private:
  DipoleKind kind_ = DipoleKind::kConstant;
  double kappa2_ = 1.0;
  double norm_ = 1.0;
};

}  // namespace sw
