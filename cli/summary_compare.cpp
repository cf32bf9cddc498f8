#include "cli/summary_compare.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <sstream>

#include <fmt/format.h>

#include "retrieval/core/format.h"

namespace sw::cli {

namespace {

std::string pm(double v, double s) { return format_value_sigma(v, s); }

/// A signed change with kDisplayDigits significant digits ("+1.234", "-0.5").
std::string signed_change(double d) { return fmt::format("{:+.{}g}", d, kDisplayDigits); }

}  // namespace

SummaryComparison compare_summaries(const std::vector<SummaryRow>& now,
                                    const std::vector<SummaryRow>& before) {
  SummaryComparison c;
  std::map<std::string, const SummaryRow*> old_by, new_by;
  for (const auto& r : before) old_by[r.scan] = &r;
  for (const auto& r : now) new_by[r.scan] = &r;
  for (const auto& [name, n] : new_by) {
    const auto it = old_by.find(name);
    if (it == old_by.end()) {
      c.only_new.push_back(name);
      continue;
    }
    const SummaryRow& o = *it->second;
    ++c.common_scans;
    if (o.status != n->status)
      c.changes.push_back(
          name + ": status " + o.status + " -> " + n->status +
          (n->status != "ok" && !n->message.empty() ? " (" + n->message + ")" : ""));
    if (o.pulse_class != n->pulse_class && !o.pulse_class.empty() && !n->pulse_class.empty())
      c.changes.push_back(name + ": class " + o.pulse_class + " -> " + n->pulse_class);
    for (const auto& q : headline_quantities()) {
      if (!q.sigma) continue;  // trace error: no uncertainty to judge by
      const auto& ov = o.*q.value;
      const auto& nv = n->*q.value;
      if (!ov || !nv) continue;
      const double os = (o.*q.sigma).value_or(0.0), ns = (n->*q.sigma).value_or(0.0);
      const double comb = std::sqrt(os * os + ns * ns);
      const double d = *nv - *ov;
      if (!(comb > 0)) {
        if (d != 0) ++c.without_uncertainty;
        continue;
      }
      ++c.compared_values;
      if (std::abs(d) > comb) c.moved.push_back({name, q.column, *ov, os, *nv, ns, d, comb});
    }
  }
  for (const auto& [name, o] : old_by)
    if (!new_by.count(name)) c.only_old.push_back(name);
  return c;
}

std::string comparison_text(const SummaryComparison& c) {
  std::ostringstream s;
  s << "compared " << c.common_scans << " scan(s) present in both runs (" << c.compared_values
    << " values with uncertainties): " << c.moved.size()
    << " moved by more than their combined 1-sigma sqrt(s_old^2 + s_new^2)\n";
  if (!c.moved.empty()) {
    std::size_t w = 4;
    for (const auto& m : c.moved) w = std::max(w, m.scan.size());
    char line[512];
    std::snprintf(line, sizeof line, "  %-*s  %-26s  %-24s  %-24s  %-12s  %s\n",
                  static_cast<int>(w), "scan", "quantity", "before", "now", "change", "sigmas");
    s << line;
    for (const auto& m : c.moved) {
      std::snprintf(line, sizeof line, "  %-*s  %-26s  %-24s  %-24s  %-12s  %.1f\n",
                    static_cast<int>(w), m.scan.c_str(), m.quantity.c_str(),
                    pm(m.old_value, m.old_sigma).c_str(), pm(m.new_value, m.new_sigma).c_str(),
                    signed_change(m.difference).c_str(), std::abs(m.difference) / m.combined_sigma);
      s << line;
    }
  }
  if (c.without_uncertainty)
    s << c.without_uncertainty
      << " value(s) differ but have no uncertainty in either run (not judged; "
      << "run with --bootstrap > 0)\n";
  for (const auto& ch : c.changes) s << "changed: " << ch << "\n";
  if (!c.only_new.empty()) {
    s << "only in the new run (" << c.only_new.size() << "):";
    for (const auto& n : c.only_new) s << " " << n;
    s << "\n";
  }
  if (!c.only_old.empty()) {
    s << "only in the old run (" << c.only_old.size() << "):";
    for (const auto& n : c.only_old) s << " " << n;
    s << "\n";
  }
  return s.str();
}

std::string comparison_csv(const SummaryComparison& c) {
  std::string out = "scan,quantity,old,old_sigma,new,new_sigma,difference,combined_sigma,sigmas\n";
  for (const auto& m : c.moved) {
    std::string scan = m.scan;
    if (scan.find_first_of(",\"\n") != std::string::npos) {
      std::string q = "\"";
      for (char ch : scan) q += ch == '"' ? std::string("\"\"") : std::string(1, ch);
      scan = q + "\"";
    }
    out += scan + "," + m.quantity + "," + format_exact(m.old_value) + "," +
           format_exact(m.old_sigma) + "," + format_exact(m.new_value) + "," +
           format_exact(m.new_sigma) + "," + format_exact(m.difference) + "," +
           format_exact(m.combined_sigma) + "," +
           format_exact(std::abs(m.difference) / m.combined_sigma) + "\n";
  }
  return out;
}

SummaryTable comparison_table(const SummaryComparison& c, const std::string& against) {
  SummaryTable t;
  t.heading = "Changes against " + against + " (" + std::to_string(c.moved.size()) + " moved)";
  t.caption =
      "Headline numbers that moved by more than sqrt(s_old^2 + s_new^2) between the two runs";
  t.header = {"scan", "quantity", "before", "now", "change", "sigmas"};
  for (const auto& m : c.moved)
    t.rows.push_back({m.scan, m.quantity, pm(m.old_value, m.old_sigma),
                      pm(m.new_value, m.new_sigma), signed_change(m.difference),
                      fmt::format("{:.1f}", std::abs(m.difference) / m.combined_sigma)});
  for (const auto& ch : c.changes) t.rows.push_back({ch, "", "", "", "", ""});
  return t;
}

}  // namespace sw::cli
