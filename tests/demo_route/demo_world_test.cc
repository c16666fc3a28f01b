// The world preset on disk: the clean preset asked for explicitly writes the same bytes as the
// default options, and a realistic town writes what it says: truth.csv beside the survey's
// drive.csv (same rows, the true pose at the true exposure time), camera-truth.yml beside each
// camera.yml with the calibration error within its ranges, and town.json recording the preset
// and every drawn nuisance. Small towns (120 m, 160 x 120 images), a few seconds each.
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <sstream>

#include "demo_route/demo_drives.h"
#include "demo_route/demo_town.h"
#include "indexer/base/geo.h"
#include "indexer/map/camera_model.h"
#include "indexer/map/drive_manifest.h"

namespace sightfix::demo {
namespace {
namespace fs = std::filesystem;

const char* const kDrives[] = {"survey", "query-day", "query-dusk", "query-overcast"};

std::string ReadFile(const fs::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

DemoOptions SmallTown(const std::string& name) {
  DemoOptions o;
  o.out_dir = (fs::path(::testing::TempDir()) / name).string();
  o.seed = 9;
  o.route_length_m = 120;
  o.image_width = 160, o.image_height = 120;
  o.survey_spacing_m = 10, o.query_spacing_m = 15, o.supersample = 1, o.jobs = 2;
  return o;
}

void Generate(const DemoOptions& o) {
  const Result<DemoSummary> r = GenerateDemoTown(o);
  ASSERT_TRUE(r.ok()) << r.status().ToString();
}

// The realistic preset asked for is the default, byte for byte: every drive's drive.csv,
// camera.yml, truth files and images; the clean preset has to be asked for by name.
TEST(DemoWorldTest, RealisticPresetIsTheDefault) {
  const DemoOptions a = SmallTown("world_default");
  DemoOptions b = SmallTown("world_realistic");
  b.world = World::kRealistic;
  b.survey_sigma_scale = 1.0;
  Generate(a);
  Generate(b);
  int compared = 0;
  for (const char* drive : kDrives) {
    for (const auto& e : fs::recursive_directory_iterator(fs::path(a.out_dir) / drive)) {
      if (!e.is_regular_file()) continue;
      const fs::path rel = fs::relative(e.path(), a.out_dir);
      EXPECT_TRUE(ReadFile(e.path()) == ReadFile(fs::path(b.out_dir) / rel)) << rel;
      ++compared;
    }
    EXPECT_TRUE(fs::exists(fs::path(a.out_dir) / drive / "camera-truth.yml")) << drive;
  }
  EXPECT_TRUE(fs::exists(fs::path(a.out_dir) / "survey" / "truth.csv"));
  EXPECT_GT(compared, 40);
  const nlohmann::json town = nlohmann::json::parse(ReadFile(fs::path(a.out_dir) / "town.json"));
  EXPECT_EQ(town["world"], "realistic");
}

// camera.yml against camera-truth.yml: focal factor, principal point and k1 (k2 on the fleet
// camera) within their ranges and as town.json records them.
void CheckCalibration(const fs::path& dir, const nlohmann::json& recorded) {
  const Result<CameraModel> written = LoadCameraModel((dir / "camera.yml").string());
  const Result<CameraModel> truth = LoadCameraModel((dir / "camera-truth.yml").string());
  ASSERT_TRUE(written.ok() && truth.ok()) << dir;
  const double focal = written->fx / truth->fx;
  EXPECT_NEAR(written->fy / truth->fy, focal, 1e-12) << dir;
  EXPECT_TRUE(std::abs(focal - 1) >= 0.003 && std::abs(focal - 1) <= 0.01) << dir << " " << focal;
  const double pp = std::hypot(written->cx - truth->cx, written->cy - truth->cy);
  EXPECT_TRUE(pp >= 2 && pp <= 4) << dir << " " << pp;
  const double k1 = written->distortion[0] - truth->distortion[0];
  const double k2 = written->distortion[1] - truth->distortion[1];
  EXPECT_TRUE(std::abs(k1) >= 0.005 && std::abs(k1) <= 0.02) << dir << " " << k1;
  if (truth->distortion[1] == 0)
    EXPECT_EQ(k2, 0) << dir;
  else
    EXPECT_TRUE(std::abs(k2) >= 0.002 && std::abs(k2) <= 0.01) << dir << " " << k2;
  EXPECT_NEAR(recorded["focal_scale"].get<double>(), focal, 1e-12);
  EXPECT_NEAR(recorded["k1_error"].get<double>(), k1, 1e-12);
  EXPECT_EQ(recorded["camera_written"]["fx"].get<double>(), written->fx);
  std::printf(
      "%-15s focal x %.4f, principal point %.2f px off, k1 %+.4f, k2 %+.4f, offset %.1f ms\n",
      dir.filename().c_str(), focal, pp, k1, k2, 1e3 * recorded["time_offset_s"].get<double>());
}

// The realistic survey on disk: truth.csv has drive.csv's rows, times later by the recorded time
// offset (to the millisecond of the format), and drive.csv minus truth.csv is the planned survey
// error minus the exposure's along-track step (to 1 mm: 9 decimals of a degree are 0.1 mm).
TEST(DemoWorldTest, RealisticTownWritesItsTruth) {
  DemoOptions o = SmallTown("world_realistic");
  o.world = World::kRealistic;
  Generate(o);
  const fs::path out(o.out_dir);
  const nlohmann::json town = nlohmann::json::parse(ReadFile(out / "town.json"));
  EXPECT_EQ(town["world"], "realistic");
  for (const char* drive : kDrives)
    CheckCalibration(out / drive, town["drives"][drive]["calibration_error"]);
  EXPECT_FALSE(fs::exists(out / "query-day" / "truth.csv"));

  const Result<std::vector<DriveRow>> reported =
      ReadDriveManifest((out / "survey/drive.csv").string());
  const Result<std::vector<DriveRow>> truth =
      ReadDriveManifest((out / "survey/truth.csv").string());
  ASSERT_TRUE(reported.ok() && truth.ok());
  ASSERT_EQ(reported->size(), truth->size());
  const Town layout = BuildTown(TownOptionsFor(o));
  const PlannedDrive plan = PlanDrives(layout, o)[0];
  ASSERT_EQ(plan.survey_errors.size(), reported->size());
  const double offset = town["drives"]["survey"]["calibration_error"]["time_offset_s"];
  const EnuFrame enu(kTownOrigin);
  for (size_t k = 0; k < reported->size(); ++k) {
    const DriveRow &r = (*reported)[k], &x = (*truth)[k];
    EXPECT_EQ(r.image, x.image);
    EXPECT_NEAR(x.timestamp_s - r.timestamp_s, offset, 1e-3 + 1e-6);
    EXPECT_EQ(x.sigma_h_m, 0);
    EXPECT_EQ(x.camera, "camera-truth.yml");
    EXPECT_NEAR(r.sigma_h_m, plan.survey_errors[k].sigma_h_m, 5e-5 + 1e-9);
    const cv::Vec3d diff = enu.ToEnu(r.position) - enu.ToEnu(x.position);
    const cv::Vec3d want =
        plan.survey_errors[k].position_m - (plan.exposure[k].position - plan.truth[k].position);
    EXPECT_LT(cv::norm(diff - want), 1e-3) << k;
  }
  EXPECT_EQ(town["drives"]["survey"]["survey_error"]["multipath_jumps"].size(), plan.jumps.size());
}

}  // namespace
}  // namespace sightfix::demo
