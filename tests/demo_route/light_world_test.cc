// The realistic world's light on disk and in the renderer: each drive's sun, recorded in
// town.json, is the Reda & Andreas SPA's (solar_position.h) at the town's datum and the drive's
// start; query-night exists in the realistic world only, its images are far darker than
// query-day's, and its street lamps and lit windows do light the view. Small towns (120 m,
// 160 x 120 images), seconds each; the thresholds' measured figures are in DEVELOPERS.md
// ("Demo town: decisions", the night bullet).
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <opencv2/imgcodecs.hpp>
#include <sstream>

#include "demo_route/demo_drives.h"
#include "demo_route/demo_town.h"
#include "demo_route/night_light.h"
#include "demo_route/solar_position.h"
#include "demo_route/town_renderer.h"
#include "indexer/base/rotation.h"

namespace sightfix::demo {
namespace {
namespace fs = std::filesystem;

DemoOptions SmallTown(const std::string& name, uint64_t seed, World world) {
  DemoOptions o;
  o.out_dir = (fs::path(::testing::TempDir()) / name).string();
  o.seed = seed;
  o.route_length_m = 120;
  o.image_width = 160, o.image_height = 120;
  o.survey_spacing_m = 10, o.query_spacing_m = 8, o.supersample = 1, o.jobs = 2;
  o.world = world;
  return o;
}

nlohmann::json Generate(const DemoOptions& o) {
  const Result<DemoSummary> r = GenerateDemoTown(o);
  EXPECT_TRUE(r.ok()) << r.status().ToString();
  std::ifstream in(fs::path(o.out_dir) / "town.json");
  return nlohmann::json::parse(in);
}

// Mean grey level of a drive's JPEGs, 0..255.
double MeanGrey(const fs::path& dir) {
  double sum = 0;
  int n = 0;
  for (const auto& e : fs::directory_iterator(dir / "images")) {
    sum += cv::mean(cv::imread(e.path().string(), cv::IMREAD_GRAYSCALE))[0];
    ++n;
  }
  return n ? sum / n : -1;
}

// Every drive's recorded sun against the SPA computed here at its recorded time, and the
// direction against the azimuth and elevation (ENU: east sin a cos e, north cos a cos e, up
// sin e; common practice). The recorded time is the drive's start as drive.csv's first row
// has it (the first frame is at most a few seconds in).
void CheckSuns(const nlohmann::json& town, const fs::path& out) {
  SolarPositionOptions site;
  site.latitude_deg = 44, site.longitude_deg = -40, site.elevation_m = 40;  // kTownOrigin
  ASSERT_TRUE(town.contains("light"));
  for (const auto& [name, drive] : town["drives"].items()) {
    const nlohmann::json& light = drive["light"];
    const double t = light["sun_unix_s"];
    EXPECT_EQ(light["sun_time"], drive["start"]) << name;
    const Result<SolarPosition> spa = ComputeSolarPosition(t, site);
    ASSERT_TRUE(spa.ok());
    EXPECT_NEAR(light["sun_azimuth_deg"].get<double>(), spa->azimuth_deg, 1e-9) << name;
    EXPECT_NEAR(light["sun_elevation_deg"].get<double>(), spa->elevation_deg, 1e-9) << name;
    const double a = spa->azimuth_deg * M_PI / 180, e = spa->elevation_deg * M_PI / 180;
    const cv::Vec3d want(std::sin(a) * std::cos(e), std::cos(a) * std::cos(e), std::sin(e));
    for (int k = 0; k < 3; ++k)
      EXPECT_NEAR(light["sun_dir_enu"][k].get<double>(), want[k], 1e-12) << name;
    std::ifstream csv(out / name / "drive.csv");
    std::string header, row;
    std::getline(csv, header), std::getline(csv, row);
    EXPECT_FALSE(row.empty()) << name;
    std::printf("%-15s %s sun azimuth %6.2f elevation %6.2f, direct %.3f sky %.3f\n", name.c_str(),
                light["sun_time"].get<std::string>().c_str(), spa->azimuth_deg, spa->elevation_deg,
                light["direct"].get<double>(), light["ambient"].get<double>());
  }
  // Shadows move between the survey and the queries: the sun stands elsewhere.
  EXPECT_GT(std::abs(town["drives"]["query-day"]["light"]["sun_azimuth_deg"].get<double>() -
                     town["drives"]["survey"]["light"]["sun_azimuth_deg"].get<double>()),
            20);
  EXPECT_LT(town["drives"]["query-night"]["light"]["sun_elevation_deg"].get<double>(), -18);
  EXPECT_EQ(town["drives"]["query-overcast"]["light"]["direct"].get<double>(), 0);
}

CameraPose PoseOf(const Frame& f) { return {f.position, EnuFromCamera(f.attitude).t()}; }

struct NightFigures {
  int pools = 0, bright_pools = 0;          // lamp ground points in view; lit 3x or more by lamps
  int frames = 0, frames_with_windows = 0;  // night frames; with >= 10 lit-window pixels
};

// Renders every night frame with its look, without its lamps, and without its windows' light.
NightFigures MeasureNight(const DemoOptions& o) {
  const Town town = BuildTown(TownOptionsFor(o));
  const std::vector<PlannedDrive> drives = PlanDrives(town, o);
  std::vector<DriveWorld> worlds;
  for (const PlannedDrive& d : drives) worlds.push_back(d.world);
  const LightRanges light = NuisancesForWorld(o.world).light;
  const TownScene scene(town, worlds, light.lit_window_share);
  const StreetLamps lamps(town);
  NightFigures f;
  for (size_t i = 0; i < drives.size(); ++i) {
    const PlannedDrive& d = drives[i];
    if (d.condition.name != kNightDriveName) continue;
    for (const Frame& frame : d.exposure) {
      RenderOptions r;
      r.supersample = 1, r.time_s = frame.time_s;
      const CameraPose pose = PoseOf(frame);
      Appearance look = d.condition.look;
      const cv::Mat lit = scene.Render(pose, d.camera, look, int(i), r);
      look.lamp_intensity = 0;
      const cv::Mat no_lamps = scene.Render(pose, d.camera, look, int(i), r);
      look = d.condition.look;
      look.window_glow = 0;
      const cv::Mat no_windows = scene.Render(pose, d.camera, look, int(i), r);
      // Lamp pools: the ground under each lamp 5-40 m ahead, in the image.
      for (const cv::Vec3d& l : lamps.lights()) {
        const cv::Vec3d c = pose.camera_from_enu * (cv::Vec3d(l[0], l[1], 0) - pose.position);
        if (c[2] < 5 || c[2] > 40) continue;
        const int x = int(std::lround(d.camera.fx * c[0] / c[2] + d.camera.cx));
        const int y = int(std::lround(d.camera.fy * c[1] / c[2] + d.camera.cy));
        if (x < 0 || y < 0 || x >= lit.cols || y >= lit.rows) continue;
        const cv::Vec3f a = lit.at<cv::Vec3f>(y, x), b = no_lamps.at<cv::Vec3f>(y, x);
        ++f.pools;
        // The lamp adds at least 0.05 a channel: a road of albedo 0.25 under 1.4 of lamp light
        // gains 0.35, 14 m off 0.02 (haze takes a little with distance).
        f.bright_pools += (a[0] + a[1] + a[2]) - (b[0] + b[1] + b[2]) > 0.15;
      }
      cv::Mat diff;
      cv::absdiff(lit, no_windows, diff);
      cv::Mat grey;
      cv::transform(diff, grey, cv::Matx13f(1 / 3.f, 1 / 3.f, 1 / 3.f));
      ++f.frames;
      f.frames_with_windows += cv::countNonZero(grey > 0.2) >= 10;
    }
  }
  return f;
}

void CheckNight(uint64_t seed) {
  const DemoOptions clean = SmallTown("light_clean", seed, World::kClean);
  const nlohmann::json clean_town = Generate(clean);
  EXPECT_FALSE(fs::exists(fs::path(clean.out_dir) / kNightDriveName));
  EXPECT_FALSE(clean_town["drives"].contains(kNightDriveName));
  EXPECT_FALSE(clean_town.contains("light"));
  const DemoOptions o = SmallTown("light_realistic", seed, World::kRealistic);
  const nlohmann::json town = Generate(o);
  CheckSuns(town, o.out_dir);
  const double night = MeanGrey(fs::path(o.out_dir) / kNightDriveName);
  const double day = MeanGrey(fs::path(o.out_dir) / "query-day");
  // Night over day mean grey: 0.324 on seed 9, 0.314 on seed 10 (the low beams' road and the
  // night's noise keep it off 0).
  EXPECT_LT(night, 0.4 * day) << night << " " << day;
  const NightFigures f = MeasureNight(o);
  std::printf(
      "seed %llu: night mean grey %.1f, day %.1f (%.3f); lamp pools lit %d of %d; "
      "frames with lit windows %d of %d\n",
      static_cast<unsigned long long>(seed), night, day, night / day, f.bright_pools, f.pools,
      f.frames_with_windows, f.frames);
  EXPECT_GT(f.pools, 5);
  // Lit pools: 29 of 37 (0.78) on seed 9, 36 of 45 (0.80) on seed 10; the rest stand in the
  // parking strip (the lamp heads reach over it) behind parked vehicles. Frames with lit windows:
  // 19 of 19 and 22 of 22.
  EXPECT_GE(f.bright_pools, 0.6 * f.pools);
  EXPECT_GE(f.frames_with_windows, 0.8 * f.frames);
}

TEST(LightWorldTest, SunsAreTheSpaAndTheNightIsLitByLampsAndWindows) {
  CheckNight(9);
  CheckNight(10);
}

}  // namespace
}  // namespace sightfix::demo
