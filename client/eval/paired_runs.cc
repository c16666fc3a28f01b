#include "client/eval/paired_runs.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <map>
#include <sstream>

#include "client/eval/route_eval.h"
#include "indexer/base/csv.h"

namespace sightfix {
namespace {

constexpr double kSignificance = 0.05;  // the level each test is read at (common practice)

std::string AtLine(int line, const std::string& what) {
  return "fixes.csv line " + std::to_string(line) + ": " + what;
}

// An empty cell is no value; otherwise a finite, non-negative number filling the whole cell.
Result<std::optional<double>> ParseOptionalMetres(const std::string& cell, int line) {
  if (cell.empty()) return std::optional<double>();
  double v = 0;
  if (!ParseCsvNumber(cell, &v) || v < 0)
    return Status::InvalidArgument(AtLine(line, "not a distance in metres: '" + cell + "'"));
  return std::optional<double>(v);
}

// The column index of each name the pairing reads, in FixesRow's order.
Result<std::vector<size_t>> ColumnsOf(const std::vector<std::string>& header) {
  std::vector<size_t> at;
  for (const char* name : {"image", "true_lat", "true_lon", "quality", "error_m", "radius95_m"}) {
    const auto it = std::find(header.begin(), header.end(), name);
    if (it == header.end())
      return Status::InvalidArgument(AtLine(1, std::string("no column '") + name + "'"));
    at.push_back(static_cast<size_t>(it - header.begin()));
  }
  return at;
}

Result<FixesRow> ParseRow(const std::vector<std::string>& cells, const std::vector<size_t>& at,
                          size_t width, int line) {
  if (cells.size() != width)
    return Status::InvalidArgument(
        AtLine(line, std::to_string(cells.size()) + " cells, header has " + std::to_string(width)));
  FixesRow row;
  row.line = line;
  row.image = cells[at[0]], row.true_lat = cells[at[1]], row.true_lon = cells[at[2]];
  row.quality = cells[at[3]];
  if (row.image.empty()) return Status::InvalidArgument(AtLine(line, "empty image name"));
  Result<std::optional<double>> error = ParseOptionalMetres(cells[at[4]], line);
  if (!error.ok()) return error.status();
  Result<std::optional<double>> radius = ParseOptionalMetres(cells[at[5]], line);
  if (!radius.ok()) return radius.status();
  row.error_m = *error, row.radius95_m = *radius;
  return row;
}

bool Refined(const FixesRow& r) { return r.quality == "refined"; }
bool Covered(const FixesRow& r) { return r.error_m && r.radius95_m && *r.error_m <= *r.radius95_m; }

// "n 12, statistic 3, p 0.1460 (exact binomial): not significant at 0.05".
std::string TestText(const PairedTestResult& t, const char* exact_name, const char* approx_name) {
  if (t.n == 0) return "n 0: no test";
  char buf[256];
  std::snprintf(buf, sizeof(buf), "n %d, statistic %.4g, p %.4g (%s): %s at %.2f", t.n, t.statistic,
                t.p_value, t.exact ? exact_name : approx_name,
                t.p_value < kSignificance ? "significant" : "not significant", kSignificance);
  return buf;
}

}  // namespace

Result<std::vector<FixesRow>> ParseFixesCsv(const std::string& text) {
  std::istringstream in(text);
  std::string line;
  if (!std::getline(in, line)) return Status::InvalidArgument("fixes.csv: empty");
  const std::vector<std::string> header = SplitCsvLine(line);
  Result<std::vector<size_t>> at = ColumnsOf(header);
  if (!at.ok()) return at.status();
  std::vector<FixesRow> rows;
  std::map<std::string, int> seen;
  for (int n = 2; std::getline(in, line); ++n) {
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (line.empty()) continue;
    Result<FixesRow> row = ParseRow(SplitCsvLine(line), *at, header.size(), n);
    if (!row.ok()) return row.status();
    if (!seen.emplace(row->image, n).second)
      return Status::InvalidArgument(AtLine(
          n, "image " + row->image + " already on line " + std::to_string(seen[row->image])));
    rows.push_back(std::move(row).value());
  }
  return rows;
}

Result<PairedComparison> ComparePairedRuns(const std::vector<FixesRow>& a,
                                           const std::vector<FixesRow>& b) {
  std::map<std::string, const FixesRow*> in_b;
  for (const FixesRow& r : b) in_b[r.image] = &r;
  PairedComparison c;
  std::vector<double> differences;
  for (const FixesRow& ra : a) {
    const auto it = in_b.find(ra.image);
    if (it == in_b.end())
      return Status::InvalidArgument("the runs replayed different queries: " + ra.image +
                                     " is in A only (same drive and --limit needed)");
    const FixesRow& rb = *it->second;
    if (ra.true_lat != rb.true_lat || ra.true_lon != rb.true_lon)
      return Status::InvalidArgument("the runs replayed different drives: the truth of " +
                                     ra.image + " differs");
    ++c.pairs;
    c.refined_a_only += Refined(ra) && !Refined(rb);
    c.refined_b_only += !Refined(ra) && Refined(rb);
    c.covered_a_only += Covered(ra) && !Covered(rb);
    c.covered_b_only += !Covered(ra) && Covered(rb);
    if (Refined(ra) && Refined(rb) && ra.error_m && rb.error_m)
      differences.push_back(*rb.error_m - *ra.error_m);
  }
  if (c.pairs != static_cast<int>(b.size()))
    for (const FixesRow& rb : b)
      if (std::none_of(a.begin(), a.end(), [&](const FixesRow& r) { return r.image == rb.image; }))
        return Status::InvalidArgument("the runs replayed different queries: " + rb.image +
                                       " is in B only (same drive and --limit needed)");
  c.refined_both = static_cast<int>(differences.size());
  c.median_error_difference_m = Percentile(differences, 0.5);
  c.refined = McNemarTest(c.refined_a_only, c.refined_b_only);
  c.within_radius95 = McNemarTest(c.covered_a_only, c.covered_b_only);
  c.error = WilcoxonSignedRankTest(differences);
  return c;
}

std::string PairedComparisonText(const PairedComparison& c) {
  char buf[512];
  std::string out;
  std::snprintf(buf, sizeof(buf), "Paired by image: %d queries in both runs.\n", c.pairs);
  out += buf;
  std::snprintf(buf, sizeof(buf), "refined: A only %d, B only %d; McNemar %s\n", c.refined_a_only,
                c.refined_b_only,
                TestText(c.refined, "exact binomial", "chi-square, corrected").c_str());
  out += buf;
  std::snprintf(buf, sizeof(buf), "within radius95: A only %d, B only %d; McNemar %s\n",
                c.covered_a_only, c.covered_b_only,
                TestText(c.within_radius95, "exact binomial", "chi-square, corrected").c_str());
  out += buf;
  std::snprintf(buf, sizeof(buf),
                "error, refined in both (%d; %d equal, dropped): median B - A %+.4f m; Wilcoxon "
                "signed-rank %s\n",
                c.refined_both, c.error.zeros, c.median_error_difference_m,
                TestText(c.error, "exact", "normal approximation, tie-corrected").c_str());
  out += buf;
  out +=
      "Two-sided tests (McNemar 1947: exact binomial below 25 discordant pairs, else chi-square "
      "with continuity correction; Wilcoxon 1945 signed-rank: exact up to 50 differences without "
      "ties or zeros, else the normal approximation); each read alone at 0.05, and neighbouring "
      "frames are correlated, so the p-values are optimistic.\n";
  return out;
}

}  // namespace sightfix
