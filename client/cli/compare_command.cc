// sightfix compare: two replay summaries side by side.
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <string>

#include "client/cli/command_support.h"
#include "client/cli/commands.h"
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

}  // namespace

int Compare(int argc, char** argv) {
  std::string a, b;
  po::options_description desc(
      "sightfix compare: two replay summaries side by side with their differences (B - A), for\n"
      "A/B tests of maps and configurations.\n\n"
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
  std::printf("A: %s\nB: %s\n\n%s", a.c_str(), b.c_str(),
              CompareSummaries(*ja, *jb, "A", "B").c_str());
  return 0;
}

}  // namespace sightfix::cli
