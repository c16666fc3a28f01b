// Same seed, same bytes (whatever the number of render threads); another seed, another town.
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>

#include "demo_route/demo_town.h"

namespace sightfix::demo {
namespace {
namespace fs = std::filesystem;

std::map<std::string, std::string> ReadTree(const fs::path& root) {
  std::map<std::string, std::string> files;
  for (const auto& e : fs::recursive_directory_iterator(root)) {
    if (!e.is_regular_file()) continue;
    std::ifstream in(e.path(), std::ios::binary);
    std::ostringstream s;
    s << in.rdbuf();
    files[fs::relative(e.path(), root).string()] = s.str();
  }
  return files;
}

std::map<std::string, std::string> Generate(uint64_t seed, int jobs, const std::string& name) {
  DemoOptions o;
  o.out_dir = (fs::path(::testing::TempDir()) / name).string();
  o.seed = seed;
  o.route_length_m = 120;
  o.image_width = 320, o.image_height = 240;
  o.survey_spacing_m = 12, o.query_spacing_m = 15, o.supersample = 1, o.jobs = jobs;
  Result<DemoSummary> r = GenerateDemoTown(o);
  EXPECT_TRUE(r.ok()) << r.status().ToString();
  return ReadTree(o.out_dir);
}

TEST(DemoDeterminismTest, SameSeedSameBytesAnyJobs) {
  const auto a = Generate(7, 1, "det_a");
  const auto b = Generate(7, 2, "det_b");
  ASSERT_GT(a.size(), 20u);
  ASSERT_EQ(a.size(), b.size());
  for (const auto& [path, bytes] : a) {
    ASSERT_TRUE(b.count(path)) << path;
    EXPECT_TRUE(bytes == b.at(path)) << path << " differs";
  }
  for (const char* must : {"town.json", "survey/drive.csv", "survey/camera.yml",
                           "query-day/gnss.csv", "query-overcast/camera.yml", "contact_sheet.png"})
    EXPECT_TRUE(a.count(must)) << must;
}

TEST(DemoDeterminismTest, OtherSeedOtherTown) {
  const auto a = Generate(7, 2, "det_c");
  const auto b = Generate(8, 2, "det_d");
  EXPECT_NE(a.at("town.json"), b.at("town.json"));
  EXPECT_NE(a.at("survey/drive.csv"), b.at("survey/drive.csv"));
  EXPECT_NE(a.at("survey/images/000003.jpg"), b.at("survey/images/000003.jpg"));
}

}  // namespace
}  // namespace sightfix::demo
