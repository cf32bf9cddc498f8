#include "retrieval/physics/dipole.h"

#include "retrieval/core/enum_names.h"

namespace sw {

constexpr EnumNames<DipoleKind, 2> kDipoleKindNames{
    {{{DipoleKind::kConstant, "constant"}, {DipoleKind::kHydrogenic, "hydrogenic"}}}};

const char* to_string(DipoleKind v) { return kDipoleKindNames.name(v); }

bool parse_dipole_kind(const std::string& s, DipoleKind* out) {
  return kDipoleKindNames.parse(s, out);
}

DipoleModel::DipoleModel(DipoleKind kind, double ip_au, double k_ref) : kind_(kind) {
  kappa2_ = 2.0 * ip_au;
  const double q = k_ref * k_ref + kappa2_;
  norm_ = (q * q * q) / k_ref;
}

}  // namespace sw
