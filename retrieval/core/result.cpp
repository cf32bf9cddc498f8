#include "retrieval/core/result.h"

#include <cmath>
#include <sstream>

#include "retrieval/core/enum_names.h"
#include "retrieval/core/format.h"

namespace sw {

constexpr EnumNames<PulseClass, 4> kPulseClassNames{
    {{{PulseClass::kIsolated, "isolated"},
      {PulseClass::kIsolatedWithSatellites, "isolated_with_satellites"},
      {PulseClass::kTrain, "train"},
      {PulseClass::kUndetermined, "undetermined"}}}};

SW_ENUM_NAME_FUNCTIONS(PulseClass, parse_pulse_class, kPulseClassNames)

QualityCheck& QualitySection::add(const std::string& name, double value, double limit,
                                  const std::string& rule, const std::string& detail,
                                  bool guards_headline) {
  // A value that could not be computed fails its check and is written as 0.
  const bool finite = std::isfinite(value);
  checks.push_back(
      QualityCheck{.name = name,
                   .value = finite ? value : 0.0,
                   .limit = limit,
                   .rule = rule,
                   .pass = finite && (rule == ">=" ? value >= limit : value <= limit),
                   .guards_headline = guards_headline,
                   .detail = finite ? detail : detail + " (the value could not be computed)"});
  finalize();
  return checks.back();
}

void QualitySection::finalize() {
  trusted = true;
  failed.clear();
  for (const QualityCheck& c : checks) {
    if (c.pass) continue;
    failed.push_back(c.name);
    if (c.guards_headline) trusted = false;
  }
}

const Param* find_param(const std::vector<Param>& params, const std::string& key) {
  for (const Param& p : params)
    if (p.key == key) return &p;
  return nullptr;
}

std::string param_string(const std::vector<Param>& params, const std::string& key) {
  const Param* p = find_param(params, key);
  if (!p) return "";
  if (const auto* s = std::get_if<std::string>(&p->value)) return *s;
  return "";
}

std::optional<double> param_number(const std::vector<Param>& params, const std::string& key) {
  const Param* p = find_param(params, key);
  if (!p) return std::nullopt;
  if (const auto* d = std::get_if<double>(&p->value)) return *d;
  if (const auto* i = std::get_if<long long>(&p->value)) return static_cast<double>(*i);
  return std::nullopt;
}

std::string param_text(const Param& p, int precision, const char* separator) {
  auto number = [&](double v) { return std::isfinite(v) ? format_g(v, precision) : std::string(); };
  if (const auto* d = std::get_if<double>(&p.value)) return number(*d);
  if (const auto* l = std::get_if<long long>(&p.value)) return std::to_string(*l);
  if (const auto* b = std::get_if<bool>(&p.value)) return *b ? "true" : "false";
  if (const auto* s = std::get_if<std::string>(&p.value)) return *s;
  const auto& v = std::get<std::vector<double>>(p.value);
  std::string out = "[";
  for (std::size_t i = 0; i < v.size(); ++i) out += (i ? separator : "") + number(v[i]);
  return out + "]";
}

}  // namespace sw
