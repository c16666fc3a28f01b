// sightfix compare: two replay summaries side by side, and paired tests query by query when both
// report folders hold fixes.csv.
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include "client/cli/command_support.h"
#include "client/cli/commands.h"
#include "client/eval/paired_runs.h"
#include "client/eval/route_report.h"

namespace sightfix::cli {
namespace {

// summary.json of a report folder (or the file itself).
Result<nlohmann::json> ReadSummary(const std::string& path) {
  const std::string file = std::filesystem::is_directory(path) ? path + "/summary.json" : path;
  std::ifstream in(file);
  if (!in) return Status::NotFound("cannot open " + file);
  try {
    return nlohmann::json::parse(in);
  } catch (const std::exception& e) {
    return Status::InvalidArgument(file + ": not JSON: " + e.what());
  }
}

// fixes.csv of a report folder; nullopt when `path` is not a folder or has none.
std::optional<Result<std::vector<FixesRow>>> ReadFixes(const std::string& path) {
  const std::filesystem::path file = std::filesystem::path(path) / "fixes.csv";
  if (!std::filesystem::is_directory(path) || !std::filesystem::exists(file)) return std::nullopt;
  std::ifstream in(file);
  std::ostringstream text;
  text << in.rdbuf();
  if (!in) return Result<std::vector<FixesRow>>(Status::IoError("cannot read " + file.string()));
  Result<std::vector<FixesRow>> rows = ParseFixesCsv(text.str());
  if (!rows.ok())
    return Result<std::vector<FixesRow>>(
        Status::InvalidArgument(file.string() + ": " + rows.status().ToString()));
  return rows;
}

// The paired comparison's text when both folders hold fixes.csv, else a note; kGoOn, or 2 with
// the error printed when a file is bad or the runs replayed different drives.
int PairRuns(const std::string& a, const std::string& b, std::string* text) {
  std::optional<Result<std::vector<FixesRow>>> fa = ReadFixes(a), fb = ReadFixes(b);
  if (!fa || !fb) {
    *text = "No paired tests: they need fixes.csv in both report folders.\n";
    return kGoOn;
  }
  if (!fa->ok()) return Fail(fa->status().ToString(), 2);
  if (!fb->ok()) return Fail(fb->status().ToString(), 2);
  Result<PairedComparison> c = ComparePairedRuns(**fa, **fb);
  if (!c.ok()) return Fail("cannot pair A and B: " + c.status().ToString(), 2);
  *text = PairedComparisonText(*c);
  return kGoOn;
}

}  // namespace

int Compare(int argc, char** argv) {
  std::string a, b;
  po::options_description desc(
      "sightfix compare: two replay summaries side by side with their differences (B - A), for\n"
      "A/B tests of maps and configurations. When both report folders hold fixes.csv, the runs\n"
      "are also paired query by query (by image name; runs of different drives are refused) and\n"
      "tested: refined and within radius95 by McNemar's test, the error of queries refined in\n"
      "both by Wilcoxon's signed-rank test (two-sided; n, statistic, p, significant at 0.05).\n\n"
      "Usage: sightfix compare REPORTDIR_A REPORTDIR_B\n\nOptions");
  desc.add_options()("help,h", "show this help")("a", po::value(&a), "report folder A")(
      "b", po::value(&b), "report folder B");
  po::positional_options_description pos;
  pos.add("a", 1).add("b", 1);
  po::variables_map vm;
  if (int rc = ParseFlags(argc, argv, "compare", desc, pos, &vm); rc != kGoOn) return rc;
  if (a.empty() || b.empty()) return Fail("compare needs two report folders", 2);
  Result<nlohmann::json> ja = ReadSummary(a), jb = ReadSummary(b);
  if (!ja.ok()) return Fail(ja.status().ToString(), 2);
  if (!jb.ok()) return Fail(jb.status().ToString(), 2);
  std::string paired;
  if (int rc = PairRuns(a, b, &paired); rc != kGoOn) return rc;
  std::printf("A: %s\nB: %s\n\n%s\n%s", a.c_str(), b.c_str(),
              CompareSummaries(*ja, *jb, "A", "B").c_str(), paired.c_str());
  return 0;
}

}  // namespace sightfix::cli
