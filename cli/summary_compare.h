#pragma once
// "What did the new method change?": two batch summaries compared scan by scan (behind
// `streakwright summarize --against`). A headline number moved when
//   |new - old| > sqrt(sigma_new^2 + sigma_old^2)
// (the combined 1-sigma uncertainty of two independent determinations; a missing sigma counts
// as 0). A value without any uncertainty on either side cannot be judged and is counted apart.
// Also reported: class and status changes, scans present in only one of the runs.

#include <string>
#include <vector>

#include "cli/batch_summary.h"

namespace sw::cli {

struct MovedValue {
  std::string scan;
  std::string quantity;  ///< summary column, e.g. "fwhm_as"
  double old_value = 0, old_sigma = 0;
  double new_value = 0, new_sigma = 0;
  double difference = 0;      ///< new - old
  double combined_sigma = 0;  ///< sqrt(old_sigma^2 + new_sigma^2)
};

struct SummaryComparison {
  std::vector<MovedValue> moved;        ///< by scan, then quantity order
  std::vector<std::string> changes;     ///< "scan: class isolated -> train", status changes
  std::vector<std::string> only_new;    ///< scans only in the new run
  std::vector<std::string> only_old;    ///< scans only in the old run
  std::size_t common_scans = 0;         ///< scans present in both
  std::size_t compared_values = 0;      ///< values present in both with some uncertainty
  std::size_t without_uncertainty = 0;  ///< values that differ but have no sigma on either side
};

/// Compares rows of the new run against the old run (matched by scan name).
SummaryComparison compare_summaries(const std::vector<SummaryRow>& now,
                                    const std::vector<SummaryRow>& before);

/// Human-readable report (what summarize prints).
std::string comparison_text(const SummaryComparison& c);
/// comparison.csv: scan, quantity, old, old_sigma, new, new_sigma, difference, combined_sigma,
/// sigmas (|difference| / combined_sigma).
std::string comparison_csv(const SummaryComparison& c);
/// The moved values as a table for index.html.
SummaryTable comparison_table(const SummaryComparison& c, const std::string& against);

}  // namespace sw::cli
