// Two replays of one drive compared query by query (`sightfix compare` when both report folders
// hold fixes.csv): the rows are matched by image name, and the paired tests of paired_tests.h
// say whether B changed three outcomes more than chance would:
//   refined (yes/no) and within radius95 (yes/no, error_m <= radius95_m; no fix is no), by
//   McNemar's test; the horizontal error of the queries refined in both runs, by Wilcoxon's
//   signed-rank test on error B - error A.
// Each test is read on its own at the 0.05 level; three tests at once find a "significant"
// difference by chance more often than one in twenty. The pairing respects that each query is
// its own control, but neighbouring frames are still correlated, so the p-values are optimistic.
// fixes.csv's numbers are rounded (error_m and radius95_m to 0.1 mm), so a coverage decision at
// the boundary may differ from summary.json's. Pure functions; thread-safe.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "client/eval/paired_tests.h"
#include "indexer/base/status.h"

namespace sightfix {

// The columns of one fixes.csv row that the pairing reads.
struct FixesRow {
  std::string image;
  std::string true_lat, true_lon;             // as written, compared as text between runs
  std::string quality;                        // "refined", "coarse", "none" or "error"
  std::optional<double> error_m, radius95_m;  // empty without a fix
  int line = 0;                               // 1-based line in the file
};

// Parses fixes.csv text (route_report.h FixesCsv): a header naming at least image, true_lat,
// true_lon, quality, error_m and radius95_m, then one row per query with as many cells as the
// header (no quoting: the writer never puts a comma in a cell). InvalidArgument naming the line
// for a missing column, a row of another width, an empty or repeated image, or a number that
// does not parse or is not finite and non-negative.
Result<std::vector<FixesRow>> ParseFixesCsv(const std::string& text);

struct PairedComparison {
  int pairs = 0;  // queries in both runs
  int refined_a_only = 0, refined_b_only = 0;
  int covered_a_only = 0, covered_b_only = 0;  // within radius95
  int refined_both = 0;
  double median_error_difference_m = 0;  // median of B - A over refined_both (nearest rank)
  PairedTestResult refined, within_radius95, error;  // McNemar, McNemar, Wilcoxon
};

// Matches a's and b's rows by image. InvalidArgument when the runs replayed different drives
// or parts of one: an image in one run only (named), or an image whose truth differs.
Result<PairedComparison> ComparePairedRuns(const std::vector<FixesRow>& a,
                                           const std::vector<FixesRow>& b);

// The comparison as text: per test its counts, n, statistic, p and "significant at 0.05" or
// "not significant at 0.05" (or "no test" when n = 0), and how to read them.
std::string PairedComparisonText(const PairedComparison& c);

}  // namespace sightfix
