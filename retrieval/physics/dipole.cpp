#include "retrieval/physics/dipole.h"

#include "retrieval/core/enum_names.h"

namespace sw {

constexpr EnumNames<DipoleKind, 2> kDipoleKindNames{
    {{{DipoleKind::kConstant, "constant"}, {DipoleKind::kHydrogenic, "hydrogenic"}}}};

SW_ENUM_NAME_FUNCTIONS(DipoleKind, parse_dipole_kind, kDipoleKindNames)

DipoleModel::DipoleModel(DipoleKind kind, double ip_au, double k_ref) : kind_(kind) {
  kappa2_ = 2.0 * ip_au;
  const double q = k_ref * k_ref + kappa2_;
  norm_ = (q * q * q) / k_ref;
}

}  // namespace sw
