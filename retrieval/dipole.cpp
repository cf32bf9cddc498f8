#include "retrieval/dipole.h"

namespace sw {

const char* to_string(DipoleKind k) {
  return k == DipoleKind::kHydrogenic ? "hydrogenic" : "constant";
}

bool parse_dipole_kind(const std::string& s, DipoleKind* out) {
  if (s == "constant") *out = DipoleKind::kConstant;
  else if (s == "hydrogenic") *out = DipoleKind::kHydrogenic;
  else return false;
  return true;
}

DipoleModel::DipoleModel(DipoleKind kind, double ip_au, double k_ref) : kind_(kind) {
  kappa2_ = 2.0 * ip_au;
  const double q = k_ref * k_ref + kappa2_;
  norm_ = (q * q * q) / k_ref;
}

}  // namespace sw
