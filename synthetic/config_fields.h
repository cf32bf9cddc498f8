#pragma once
// Every field of ScanConfig described once, by its dotted config key and type. The config
// loader (cli/simulate_config.h) reads keys through it and rejects any other key; the truth
// record lists every generator parameter through it ("generator." + key). Adding a field to
// ScanConfig means adding one line to visit_fields() in config_fields.cpp.
//
// Keys: `name`, `gas`, `dipole`, `dipole_reference_momentum_au`, `kind`, `output_format`,
// `xuv.kind`, `xuv.gaussian.*`, `xuv.train.burst.*`, `xuv.train.*`, `xuv.satellites.burst.*`,
// `xuv.satellites.*`, `xuv.tabulated.*`, `ir.kind`, `ir.<GaussianIrPulse field>`,
// `energy_eV.{first,step,count}`, `delay_fs.{first,step,count}`, `delay_fs.values`,
// `lines` (a list of {gas, name, ionization_energy_eV, relative_strength, delay_as}),
// `tof.{length_m,t0_ns,energy_offset_eV,bins}`, `noise.*`, `numerics.*`.

#include <string>
#include <vector>

#include "retrieval/core/result.h"
#include "synthetic/scan_config.h"

namespace sw::synthetic {

/// Receives each field of a ScanConfig by reference with its dotted key.
class FieldVisitor {
 public:
  virtual ~FieldVisitor() = default;
  virtual void number(const std::string& key, double& value) = 0;
  virtual void integer(const std::string& key, int& value) = 0;
  virtual void boolean(const std::string& key, bool& value) = 0;
  virtual void text(const std::string& key, std::string& value) = 0;
  /// An enumeration shown by name; `value` is one of `allowed`, and a visitor that writes it
  /// must keep it so.
  virtual void choice(const std::string& key, std::string& value,
                      const std::vector<std::string>& allowed) = 0;
  virtual void numbers(const std::string& key, std::vector<double>& value) = 0;
  /// The photoelectron lines (ScanConfig::lines): a list of maps with the LineSpec fields.
  virtual void lines(const std::string& key, std::vector<LineSpec>& value) = 0;
};

/// Calls the visitor once per field of `config`, in a fixed order.
void visit_fields(ScanConfig& config, FieldVisitor& visitor);

/// All dotted keys visit_fields() knows (for messages listing the valid keys).
std::vector<std::string> config_keys();

/// Every field as a sw::Param under "<prefix><key>" (enumerations as their names).
std::vector<Param> config_parameters(const ScanConfig& config, const std::string& prefix);

}  // namespace sw::synthetic
