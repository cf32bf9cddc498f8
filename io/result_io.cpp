#include "io/result_io.h"

#include <cmath>
#include <sstream>

#include <nlohmann/json.hpp>

#include "io/atomic_file.h"
#include "retrieval/core/error.h"

namespace sw {
namespace {

using ojson = nlohmann::ordered_json;

ojson finite_number(double v, const std::string& key) {
  if (!std::isfinite(v))
    throw numeric_error("result value '" + key + "' is " + (std::isnan(v) ? "NaN" : "infinite") +
                        "; JSON (RFC 8259) cannot represent it and the writer refuses to invent a "
                        "number");
  return v;
}

void put(ojson& obj, const std::string& section, const char* key, const std::optional<double>& v) {
  if (v) obj[key] = finite_number(*v, section + "." + key);
}

/// Places `value` at the dotted key under `root`, creating objects on the way.
void place(ojson& root, const std::string& dotted, ojson value) {
  if (dotted.empty()) throw Error(ErrorKind::kInternal, "result extra with an empty key");
  ojson* node = &root;
  std::size_t start = 0;
  while (true) {
    const auto dot = dotted.find('.', start);
    const std::string part =
        dotted.substr(start, dot == std::string::npos ? dotted.npos : dot - start);
    if (part.empty())
      throw Error(ErrorKind::kInternal, "result extra key '" + dotted + "' has an empty component");
    if (dot == std::string::npos) {
      if (node->contains(part))
        throw Error(ErrorKind::kInternal, "result key '" + dotted +
                                              "' is set twice (it collides "
                                              "with a value already written)");
      (*node)[part] = std::move(value);
      return;
    }
    ojson& child = (*node)[part];
    if (child.is_null()) child = ojson::object();
    if (!child.is_object())
      throw Error(ErrorKind::kInternal, "result key '" + dotted + "' needs '" +
                                            dotted.substr(0, dot) +
                                            "' to be an object, but it holds "
                                            "a value");
    node = &child;
    start = dot + 1;
  }
}

/// The optional numbers of one result section, in the order they are written.
template <typename Section>
struct NumberField {
  const char* key;
  std::optional<double> Section::*member;
};

constexpr NumberField<XuvSection> kXuvFields[] = {
    {"fwhm_as", &XuvSection::fwhm_as},
    {"fwhm_as_sigma", &XuvSection::fwhm_as_sigma},
    {"transform_limited_fwhm_as", &XuvSection::transform_limited_fwhm_as},
    {"rms_duration_as", &XuvSection::rms_duration_as},
    {"gdd_as2", &XuvSection::gdd_as2},
    {"gdd_as2_sigma", &XuvSection::gdd_as2_sigma},
    {"tod_as3", &XuvSection::tod_as3},
    {"tod_as3_sigma", &XuvSection::tod_as3_sigma},
    {"center_photon_energy_eV", &XuvSection::center_photon_energy_eV},
    {"bandwidth_fwhm_eV", &XuvSection::bandwidth_fwhm_eV}};

constexpr NumberField<IrSection> kIrFields[] = {
    {"peak_vector_potential_au", &IrSection::peak_vector_potential_au},
    {"peak_vector_potential_au_sigma", &IrSection::peak_vector_potential_au_sigma},
    {"peak_intensity_Wcm2", &IrSection::peak_intensity_Wcm2},
    {"peak_intensity_Wcm2_sigma", &IrSection::peak_intensity_Wcm2_sigma},
    {"wavelength_nm", &IrSection::wavelength_nm},
    {"fwhm_fs", &IrSection::fwhm_fs}};

constexpr NumberField<VerdictSection> kVerdictFields[] = {
    {"satellite_intensity_ratio", &VerdictSection::satellite_intensity_ratio},
    {"satellite_intensity_ratio_sigma", &VerdictSection::satellite_intensity_ratio_sigma},
    {"main_burst_energy_fraction", &VerdictSection::main_burst_energy_fraction}};

constexpr NumberField<RabbittSection> kRabbittFields[] = {
    {"attochirp_as_per_eV", &RabbittSection::attochirp_as_per_eV},
    {"attochirp_as_per_eV_sigma", &RabbittSection::attochirp_as_per_eV_sigma},
    {"train_burst_fwhm_as", &RabbittSection::train_burst_fwhm_as},
    {"train_burst_fwhm_as_sigma", &RabbittSection::train_burst_fwhm_as_sigma},
    {"transform_limited_burst_fwhm_as", &RabbittSection::transform_limited_burst_fwhm_as}};

/// A line's numbers written before its flags and names ...
constexpr NumberField<LineEntry> kLineFieldsFirst[] = {
    {"relative_strength", &LineEntry::relative_strength},
    {"relative_strength_sigma", &LineEntry::relative_strength_sigma},
    {"relative_delay_as", &LineEntry::relative_delay_as},
    {"relative_delay_as_sigma", &LineEntry::relative_delay_as_sigma},
    {"kinetic_energy_eV", &LineEntry::kinetic_energy_eV}};

/// ... and after them.
constexpr NumberField<LineEntry> kLineFieldsLast[] = {
    {"clc_delay_as", &LineEntry::clc_delay_as},
    {"clc_correction_as", &LineEntry::clc_correction_as},
    {"relative_delay_as_corrected", &LineEntry::relative_delay_as_corrected},
    {"relative_delay_as_centre_of_energy", &LineEntry::relative_delay_as_centre_of_energy},
    {"relative_delay_as_centre_of_energy_sigma",
     &LineEntry::relative_delay_as_centre_of_energy_sigma},
    {"relative_strength_centre_of_energy", &LineEntry::relative_strength_centre_of_energy},
    {"relative_strength_centre_of_energy_sigma",
     &LineEntry::relative_strength_centre_of_energy_sigma},
    {"relative_delay_as_corrected_sigma", &LineEntry::relative_delay_as_corrected_sigma},
    {"relative_delay_reduced_chi2", &LineEntry::relative_delay_reduced_chi2},
    {"nearest_other_peak_eV", &LineEntry::nearest_other_peak_eV}};

template <typename Section, std::size_t N>
void put_all(ojson& obj, const std::string& section, const Section& x,
             const NumberField<Section> (&fields)[N]) {
  for (const auto& f : fields) put(obj, section, f.key, x.*f.member);
}

ojson param_value(const Param& p, const std::string& shown_key) {
  return std::visit(
      [&](const auto& v) -> ojson {
        using T = std::decay_t<decltype(v)>;
        if constexpr (std::is_same_v<T, double>) {
          return finite_number(v, shown_key);
        } else if constexpr (std::is_same_v<T, std::vector<double>>) {
          ojson a = ojson::array();
          for (std::size_t i = 0; i < v.size(); ++i)
            a.push_back(finite_number(v[i], shown_key + "[" + std::to_string(i) + "]"));
          return a;
        } else {
          return v;
        }
      },
      p.value);
}

ojson to_ojson(const AnalysisResult& r) {
  ojson j;
  j["streakwright_result"] = 1;
  if (!r.input.empty()) j["input"] = r.input;
  if (!r.analysis.empty()) j["analysis"] = r.analysis;
  if (!r.engine.empty()) j["engine"] = r.engine;
  if (r.xuv) {
    const XuvSection& x = *r.xuv;
    ojson s = ojson::object();
    put_all(s, "xuv", x, kXuvFields);
    j["xuv"] = std::move(s);
  }
  if (r.ir) {
    const IrSection& x = *r.ir;
    ojson s = ojson::object();
    put_all(s, "ir", x, kIrFields);
    j["ir"] = std::move(s);
  }
  if (r.verdict) {
    const VerdictSection& v = *r.verdict;
    ojson s = ojson::object();
    s["class"] = to_string(v.pulse_class);
    put_all(s, "verdict", v, kVerdictFields);
    if (!v.reason.empty()) s["reason"] = v.reason;
    if (!v.evidence.empty()) {
      ojson ev = ojson::object();
      for (const Param& p : v.evidence)
        place(ev, p.key, param_value(p, "verdict.evidence." + p.key));
      s["evidence"] = std::move(ev);
    }
    j["verdict"] = std::move(s);
  }
  if (r.fit) {
    const FitSection& f = *r.fit;
    ojson s = ojson::object();
    put(s, "fit", "trace_error", f.trace_error);
    if (f.iterations) s["iterations"] = *f.iterations;
    if (f.converged) s["converged"] = *f.converged;
    put(s, "fit", "seconds", f.seconds);
    if (!f.noise_model.empty()) s["noise_model"] = f.noise_model;
    if (!f.termination.empty()) s["termination"] = f.termination;
    j["fit"] = std::move(s);
  }
  if (r.rabbitt) {
    const RabbittSection& x = *r.rabbitt;
    ojson s = ojson::object();
    put_all(s, "rabbitt", x, kRabbittFields);
    ojson sbs = ojson::array();
    for (std::size_t i = 0; i < x.sidebands.size(); ++i) {
      const Sideband& b = x.sidebands[i];
      const std::string k = "rabbitt.sidebands[" + std::to_string(i) + "]";
      ojson o;
      o["order"] = b.order;
      o["energy_eV"] = finite_number(b.energy_eV, k + ".energy_eV");
      o["phase_rad"] = finite_number(b.phase_rad, k + ".phase_rad");
      o["phase_rad_sigma"] = finite_number(b.phase_rad_sigma, k + ".phase_rad_sigma");
      o["group_delay_as"] = finite_number(b.group_delay_as, k + ".group_delay_as");
      o["group_delay_as_sigma"] =
          finite_number(b.group_delay_as_sigma, k + ".group_delay_as_sigma");
      put(o, k, "modulation_depth", b.modulation_depth);
      put(o, k, "atomic_delay_as", b.atomic_delay_as);
      sbs.push_back(std::move(o));
    }
    s["sidebands"] = std::move(sbs);
    j["rabbitt"] = std::move(s);
  }
  if (r.quality) {
    const QualitySection& q = *r.quality;
    ojson s = ojson::object();
    s["trusted"] = q.trusted;
    s["failed"] = q.failed;
    ojson cs = ojson::array();
    for (std::size_t i = 0; i < q.checks.size(); ++i) {
      const QualityCheck& c = q.checks[i];
      const std::string k = "quality.checks[" + std::to_string(i) + "]";
      ojson o;
      o["name"] = c.name;
      o["value"] = finite_number(c.value, k + ".value");
      o["limit"] = finite_number(c.limit, k + ".limit");
      o["pass"] = c.pass;
      o["rule"] = c.rule;
      o["guards_headline"] = c.guards_headline;
      if (!c.detail.empty()) o["detail"] = c.detail;
      cs.push_back(std::move(o));
    }
    s["checks"] = std::move(cs);
    j["quality"] = std::move(s);
  }
  if (!r.lines.empty()) {
    ojson ls = ojson::array();
    for (std::size_t i = 0; i < r.lines.size(); ++i) {
      const LineEntry& l = r.lines[i];
      const std::string k = "lines[" + std::to_string(i) + "]";
      ojson o;
      o["name"] = l.name;
      o["ionization_energy_eV"] =
          finite_number(l.ionization_energy_eV, k + ".ionization_energy_eV");
      if (!l.gas.empty()) o["gas"] = l.gas;
      put_all(o, k, l, kLineFieldsFirst);
      if (l.reference) o["reference"] = true;
      o["analysed"] = l.analysed;
      if (!l.source.empty()) o["source"] = l.source;
      if (!l.delay_method.empty()) o["delay_method"] = l.delay_method;
      put_all(o, k, l, kLineFieldsLast);
      if (!l.overlapped_orders.empty()) o["overlapped_orders"] = l.overlapped_orders;
      if (!l.sidebands.empty()) {
        ojson sbs = ojson::array();
        for (std::size_t m = 0; m < l.sidebands.size(); ++m) {
          const LineSideband& b = l.sidebands[m];
          const std::string km = k + ".sidebands[" + std::to_string(m) + "]";
          ojson e;
          e["order"] = b.order;
          for (const auto& [key, v] : {std::pair<const char*, double>{"energy_eV", b.energy_eV},
                                       {"relative_phase_rad", b.relative_phase_rad},
                                       {"relative_phase_rad_sigma", b.relative_phase_rad_sigma},
                                       {"relative_delay_as", b.relative_delay_as},
                                       {"relative_delay_as_sigma", b.relative_delay_as_sigma}})
            e[key] = finite_number(v, km + "." + key);
          put(e, km, "relative_delay_as_corrected", b.relative_delay_as_corrected);
          put(e, km, "cc_correction_as", b.cc_correction_as);
          sbs.push_back(std::move(e));
        }
        o["sidebands"] = std::move(sbs);
      }
      ls.push_back(std::move(o));
    }
    j["lines"] = std::move(ls);
  }
  for (const Param& p : r.extra) place(j, p.key, param_value(p, p.key));
  for (const auto& [key, text] : r.extra_json) {
    ojson v;
    try {
      v = ojson::parse(text);
    } catch (const ojson::parse_error&) {
      throw Error(ErrorKind::kInternal,
                  "result extra '" + key + "' is not valid JSON text: " + text);
    }
    place(j, key, std::move(v));
  }
  if (!r.warnings.empty()) j["warnings"] = r.warnings;
  return j;
}

// --- reading -------------------------------------------------------------------------------

class Reader {
 public:
  explicit Reader(std::string where) : where_(std::move(where)) {}

  [[noreturn]] void fail(const std::string& key, const std::string& expected) const {
    throw input_error("result file '" + where_ + "', key '" + key + "': expected " + expected);
  }
  double number(const ojson& v, const std::string& key) const {
    if (!v.is_number()) fail(key, "a number");
    return v.get<double>();
  }
  std::string string(const ojson& v, const std::string& key) const {
    if (!v.is_string()) fail(key, "a string");
    return v.get<std::string>();
  }

  /// Everything not typed: dotted Params (or raw JSON text for other shapes).
  void flatten(const ojson& v, const std::string& key, std::vector<Param>* params,
               std::map<std::string, std::string>* raw) const {
    switch (v.type()) {
      case ojson::value_t::object:
        if (v.empty()) (*raw)[key] = "{}";
        for (auto it = v.begin(); it != v.end(); ++it)
          flatten(it.value(), key.empty() ? it.key() : key + "." + it.key(), params, raw);
        return;
      case ojson::value_t::number_integer:
      case ojson::value_t::number_unsigned:
        params->push_back({key, v.get<long long>()});
        return;
      case ojson::value_t::number_float:
        params->push_back({key, v.get<double>()});
        return;
      case ojson::value_t::boolean:
        params->push_back({key, v.get<bool>()});
        return;
      case ojson::value_t::string:
        params->push_back({key, v.get<std::string>()});
        return;
      case ojson::value_t::array: {
        bool numeric = true;
        for (const auto& e : v) numeric = numeric && e.is_number();
        if (numeric) {
          std::vector<double> a;
          for (const auto& e : v) a.push_back(e.get<double>());
          params->push_back({key, std::move(a)});
          return;
        }
        break;
      }
      default:
        break;
    }
    (*raw)[key] = v.dump();
  }

  /// Reads `v` into the member of `fields` named `key`; false when no field has that name.
  template <typename Section, std::size_t N>
  bool number_field(const std::string& key, const ojson& v, const std::string& shown_key,
                    const NumberField<Section> (&fields)[N], Section* out) const {
    for (const auto& f : fields)
      if (key == f.key) {
        out->*f.member = number(v, shown_key);
        return true;
      }
    return false;
  }

  /// Reads those `fields` that the object `o` at `shown_key` holds.
  template <typename Section, std::size_t N>
  void present_numbers(const ojson& o, const std::string& shown_key,
                       const NumberField<Section> (&fields)[N], Section* out) const {
    for (const auto& f : fields)
      if (o.contains(f.key)) out->*f.member = number(o[f.key], shown_key + "." + f.key);
  }

  /// Reads the optional numbers `keys` of `section` into `fields`, the rest into extras.
  template <typename Section, std::size_t N>
  void section(const ojson& s, const std::string& name, const NumberField<Section> (&fields)[N],
               Section* out, AnalysisResult* r) const {
    if (!s.is_object()) fail(name, "an object");
    for (auto it = s.begin(); it != s.end(); ++it)
      if (!number_field(it.key(), it.value(), name + "." + it.key(), fields, out))
        flatten(it.value(), name + "." + it.key(), &r->extra, &r->extra_json);
  }

 private:
  std::string where_;
};

}  // namespace

std::string result_to_json(const AnalysisResult& r) { return to_ojson(r).dump(2) + "\n"; }

void write_result_json(const std::string& path, const AnalysisResult& r) {
  write_file_atomic(path, result_to_json(r));
}

AnalysisResult result_from_json(const std::string& text, const std::string& where) {
  ojson j;
  try {
    j = ojson::parse(text);
  } catch (const ojson::parse_error& e) {
    std::string what = e.what();
    if (const auto p = what.find("] "); p != std::string::npos) what = what.substr(p + 2);
    throw input_error("result file '" + where + "' is not valid JSON (RFC 8259): " + what);
  }
  const Reader rd(where);
  if (!j.is_object()) throw input_error("result file '" + where + "': expected a JSON object");
  if (!j.contains("streakwright_result"))
    throw input_error("result file '" + where +
                      "' is missing the key 'streakwright_result'; "
                      "expected a streakwright result.json");
  if (!j["streakwright_result"].is_number() || j["streakwright_result"].get<double>() != 1.0)
    rd.fail("streakwright_result", "version 1");

  AnalysisResult r;
  for (auto it = j.begin(); it != j.end(); ++it) {
    const std::string& key = it.key();
    const ojson& v = it.value();
    if (key == "streakwright_result") continue;
    if (key == "input")
      r.input = rd.string(v, key);
    else if (key == "analysis")
      r.analysis = rd.string(v, key);
    else if (key == "engine")
      r.engine = rd.string(v, key);
    else if (key == "xuv") {
      XuvSection x;
      rd.section(v, "xuv", kXuvFields, &x, &r);
      r.xuv = x;
    } else if (key == "ir") {
      IrSection x;
      rd.section(v, "ir", kIrFields, &x, &r);
      r.ir = x;
    } else if (key == "verdict") {
      if (!v.is_object()) rd.fail(key, "an object");
      VerdictSection x;
      for (auto s = v.begin(); s != v.end(); ++s) {
        const std::string k = "verdict." + s.key();
        if (s.key() == "class") {
          const std::string c = rd.string(s.value(), k);
          if (!parse_pulse_class(c, &x.pulse_class))
            rd.fail(k, "one of isolated, isolated_with_satellites, train, undetermined (got '" + c +
                           "')");
        } else if (s.key() == "reason") {
          x.reason = rd.string(s.value(), k);
        } else if (s.key() == "evidence") {
          if (!s.value().is_object()) rd.fail(k, "an object");
          std::map<std::string, std::string> raw;
          rd.flatten(s.value(), "", &x.evidence, &raw);
          for (auto& [rk, rv] : raw) r.extra_json["verdict.evidence." + rk] = rv;
        } else if (!rd.number_field(s.key(), s.value(), k, kVerdictFields, &x)) {
          rd.flatten(s.value(), k, &r.extra, &r.extra_json);
        }
      }
      if (!v.contains("class")) rd.fail("verdict.class", "the pulse class");
      r.verdict = std::move(x);
    } else if (key == "fit") {
      if (!v.is_object()) rd.fail(key, "an object");
      FitSection x;
      for (auto s = v.begin(); s != v.end(); ++s) {
        const std::string k = "fit." + s.key();
        if (s.key() == "trace_error")
          x.trace_error = rd.number(s.value(), k);
        else if (s.key() == "seconds")
          x.seconds = rd.number(s.value(), k);
        else if (s.key() == "iterations") {
          if (!s.value().is_number_integer()) rd.fail(k, "a whole number");
          x.iterations = s.value().get<long long>();
        } else if (s.key() == "converged") {
          if (!s.value().is_boolean()) rd.fail(k, "true or false");
          x.converged = s.value().get<bool>();
        } else if (s.key() == "noise_model")
          x.noise_model = rd.string(s.value(), k);
        else if (s.key() == "termination")
          x.termination = rd.string(s.value(), k);
        else
          rd.flatten(s.value(), k, &r.extra, &r.extra_json);
      }
      r.fit = std::move(x);
    } else if (key == "rabbitt") {
      if (!v.is_object()) rd.fail(key, "an object");
      RabbittSection x;
      ojson rest = ojson::object();
      for (auto s = v.begin(); s != v.end(); ++s)
        if (s.key() != "sidebands") rest[s.key()] = s.value();
      rd.section(rest, "rabbitt", kRabbittFields, &x, &r);
      if (v.contains("sidebands")) {
        const ojson& sbs = v["sidebands"];
        if (!sbs.is_array()) rd.fail("rabbitt.sidebands", "an array");
        for (std::size_t i = 0; i < sbs.size(); ++i) {
          const std::string k = "rabbitt.sidebands[" + std::to_string(i) + "]";
          const ojson& o = sbs[i];
          if (!o.is_object()) rd.fail(k, "an object");
          Sideband b;
          auto req = [&](const char* f) -> double {
            if (!o.contains(f)) rd.fail(k + "." + f, "a number (required)");
            return rd.number(o[f], k + "." + f);
          };
          const double order = req("order");
          if (order != std::floor(order)) rd.fail(k + ".order", "a whole number");
          b.order = static_cast<int>(order);
          b.energy_eV = req("energy_eV");
          b.phase_rad = req("phase_rad");
          if (o.contains("phase_rad_sigma")) b.phase_rad_sigma = req("phase_rad_sigma");
          if (o.contains("group_delay_as")) b.group_delay_as = req("group_delay_as");
          if (o.contains("group_delay_as_sigma"))
            b.group_delay_as_sigma = req("group_delay_as_sigma");
          if (o.contains("modulation_depth")) b.modulation_depth = req("modulation_depth");
          if (o.contains("atomic_delay_as")) b.atomic_delay_as = req("atomic_delay_as");
          x.sidebands.push_back(b);
        }
      }
      r.rabbitt = std::move(x);
    } else if (key == "quality") {
      if (!v.is_object()) rd.fail(key, "an object");
      QualitySection q;
      if (!v.contains("trusted") || !v["trusted"].is_boolean())
        rd.fail("quality.trusted", "true or false");
      if (v.contains("checks")) {
        const ojson& cs = v["checks"];
        if (!cs.is_array()) rd.fail("quality.checks", "an array");
        for (std::size_t i = 0; i < cs.size(); ++i) {
          const std::string k = "quality.checks[" + std::to_string(i) + "]";
          const ojson& o = cs[i];
          if (!o.is_object()) rd.fail(k, "an object");
          QualityCheck c;
          if (!o.contains("name")) rd.fail(k + ".name", "a string (required)");
          c.name = rd.string(o["name"], k + ".name");
          if (o.contains("value")) c.value = rd.number(o["value"], k + ".value");
          if (o.contains("limit")) c.limit = rd.number(o["limit"], k + ".limit");
          if (o.contains("rule")) c.rule = rd.string(o["rule"], k + ".rule");
          if (o.contains("detail")) c.detail = rd.string(o["detail"], k + ".detail");
          if (o.contains("pass")) {
            if (!o["pass"].is_boolean()) rd.fail(k + ".pass", "true or false");
            c.pass = o["pass"].get<bool>();
          }
          if (o.contains("guards_headline")) {
            if (!o["guards_headline"].is_boolean())
              rd.fail(k + ".guards_headline", "true or false");
            c.guards_headline = o["guards_headline"].get<bool>();
          }
          q.checks.push_back(std::move(c));
        }
      }
      q.finalize();
      // The file's own verdict stands (it may come from a newer rule set).
      q.trusted = v["trusted"].get<bool>();
      r.quality = std::move(q);
    } else if (key == "lines") {
      if (!v.is_array()) rd.fail(key, "an array");
      for (std::size_t i = 0; i < v.size(); ++i) {
        const std::string k = "lines[" + std::to_string(i) + "]";
        const ojson& o = v[i];
        if (!o.is_object()) rd.fail(k, "an object");
        LineEntry l;
        if (!o.contains("name")) rd.fail(k + ".name", "a string (required)");
        l.name = rd.string(o["name"], k + ".name");
        if (o.contains("ionization_energy_eV"))
          l.ionization_energy_eV =
              rd.number(o["ionization_energy_eV"], k + ".ionization_energy_eV");
        if (o.contains("gas")) l.gas = rd.string(o["gas"], k + ".gas");
        if (o.contains("source")) l.source = rd.string(o["source"], k + ".source");
        rd.present_numbers(o, k, kLineFieldsFirst, &l);
        rd.present_numbers(o, k, kLineFieldsLast, &l);
        if (o.contains("overlapped_orders")) {
          const ojson& a = o["overlapped_orders"];
          if (!a.is_array()) rd.fail(k + ".overlapped_orders", "an array of orders");
          for (std::size_t m = 0; m < a.size(); ++m)
            l.overlapped_orders.push_back(static_cast<int>(
                rd.number(a[m], k + ".overlapped_orders[" + std::to_string(m) + "]")));
        }
        if (o.contains("sidebands")) {
          const ojson& a = o["sidebands"];
          if (!a.is_array()) rd.fail(k + ".sidebands", "an array");
          for (std::size_t m = 0; m < a.size(); ++m) {
            const std::string km = k + ".sidebands[" + std::to_string(m) + "]";
            const ojson& e = a[m];
            if (!e.is_object()) rd.fail(km, "an object");
            LineSideband b;
            auto num = [&](const char* f, double* dst) {
              if (!e.contains(f)) rd.fail(km + "." + f, "a number (required)");
              *dst = rd.number(e[f], km + "." + f);
            };
            double order = 0;
            num("order", &order);
            b.order = static_cast<int>(order);
            num("energy_eV", &b.energy_eV);
            num("relative_phase_rad", &b.relative_phase_rad);
            num("relative_phase_rad_sigma", &b.relative_phase_rad_sigma);
            num("relative_delay_as", &b.relative_delay_as);
            num("relative_delay_as_sigma", &b.relative_delay_as_sigma);
            if (e.contains("relative_delay_as_corrected"))
              b.relative_delay_as_corrected =
                  rd.number(e["relative_delay_as_corrected"], km + ".relative_delay_as_corrected");
            if (e.contains("cc_correction_as"))
              b.cc_correction_as = rd.number(e["cc_correction_as"], km + ".cc_correction_as");
            l.sidebands.push_back(b);
          }
        }
        if (o.contains("delay_method"))
          l.delay_method = rd.string(o["delay_method"], k + ".delay_method");
        for (const char* f : {"reference", "analysed"})
          if (o.contains(f)) {
            if (!o[f].is_boolean()) rd.fail(k + "." + f, "true or false");
            (std::string(f) == "reference" ? l.reference : l.analysed) = o[f].get<bool>();
          }
        r.lines.push_back(std::move(l));
      }
    } else if (key == "warnings") {
      if (!v.is_array()) rd.fail(key, "an array of strings");
      for (std::size_t i = 0; i < v.size(); ++i)
        r.warnings.push_back(rd.string(v[i], "warnings[" + std::to_string(i) + "]"));
    } else {
      rd.flatten(v, key, &r.extra, &r.extra_json);
    }
  }
  return r;
}

AnalysisResult read_result_json(const std::string& path) {
  return result_from_json(read_file_bytes(path), path);
}

}  // namespace sw
