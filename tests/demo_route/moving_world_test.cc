// The realistic world's traffic and changed world, checked against the renderer and the
// geometry: the share of pixels that moving objects cover (RenderView's, occlusion.csv's) equals
// the share of pixels that change when they are left out; movers keep their line and speed from
// frame to frame and never meet the camera; a query drive's world differs from the survey's only
// where its changes (as town.json records them) are in view. Small towns, a few seconds each.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "demo_route/demo_drives.h"
#include "demo_route/demo_town.h"
#include "demo_route/town_renderer.h"
#include "indexer/base/rotation.h"

namespace sightfix::demo {
namespace {
namespace fs = std::filesystem;

DemoOptions SmallRealistic(const std::string& name, uint64_t seed) {
  DemoOptions o;
  o.out_dir = (fs::path(::testing::TempDir()) / name).string();
  o.seed = seed;
  o.route_length_m = 160;
  o.image_width = 160, o.image_height = 120;
  o.survey_spacing_m = 10, o.query_spacing_m = 6, o.supersample = 1, o.jobs = 2;
  o.world = World::kRealistic;
  return o;
}

Town SmallTown(const DemoOptions& o) {
  TownOptions t;
  t.seed = o.seed, t.route_length_m = o.route_length_m;
  return BuildTown(t);
}

CameraPose PoseOf(const Frame& f) { return {f.position, EnuFromCamera(f.attitude).t()}; }

// Share of pixels where the two linear renders differ at all.
double DifferingShare(const cv::Mat& a, const cv::Mat& b) {
  cv::Mat diff;
  cv::absdiff(a, b, diff);
  cv::Mat any = diff.reshape(1, diff.rows * diff.cols);
  cv::reduce(any, any, 1, cv::REDUCE_MAX);
  return cv::countNonZero(any > 0) / static_cast<double>(any.rows);
}

// RenderView's share against a pixel count of the render with the movers left out: equal on
// the pinhole camera (one sample per pixel, so a pixel is covered or not; 2e-3 allows for a
// mover texel of exactly the background's colour), and within the lens resampling's edge
// pixels on the distorted fleet camera (measured up to 0.011 on seed 4, 0.010 on seed 6).
void CheckShares(uint64_t seed) {
  const DemoOptions o = SmallRealistic("unused", seed);
  const Town town = SmallTown(o);
  const std::vector<PlannedDrive> drives = PlanDrives(town, o);
  std::vector<DriveWorld> worlds;
  for (const PlannedDrive& d : drives) worlds.push_back(d.world);
  const TownScene scene(town, worlds);
  double max_share = 0;
  int covered = 0;
  for (int i : {1, 3}) {
    const PlannedDrive& d = drives[i];
    for (size_t k = 0; k < d.exposure.size(); k += 2) {
      RenderOptions r;
      r.supersample = 1;
      r.time_s = d.exposure[k].time_s;
      const RenderedView with =
          scene.RenderView(PoseOf(d.exposure[k]), d.camera, d.condition.look, i, r);
      r.moving_objects = false;
      const RenderedView without =
          scene.RenderView(PoseOf(d.exposure[k]), d.camera, d.condition.look, i, r);
      EXPECT_EQ(without.moving_share, 0);
      const double counted = DifferingShare(with.image, without.image);
      const bool lens = d.camera.HasDistortion();
      if (lens)
        EXPECT_NEAR(with.moving_share, counted, 0.015) << d.condition.name << " " << k;
      else
        EXPECT_NEAR(with.moving_share, counted, 2e-3) << d.condition.name << " " << k;
      max_share = std::max(max_share, with.moving_share);
      covered += with.moving_share > 0;
    }
  }
  std::printf("seed %llu: %d frames with movers in view, largest share %.3f\n",
              static_cast<unsigned long long>(seed), covered, max_share);
  EXPECT_GT(covered, 10);
}

TEST(MovingWorldTest, ShareIsThePixelsMoversCover) {
  CheckShares(4);
  CheckShares(6);
}

// The route's total turning (radians, absolute) between arc lengths s0 and s1, summed over steps
// of at most 0.25 m.
double TurningBetween(const Polyline& route, double s0, double s1) {
  const int n = std::max(1, static_cast<int>(std::ceil(std::abs(s1 - s0) / 0.25)));
  double turn = 0;
  cv::Vec2d t0, t1;
  route.At(s0, &t0);
  for (int i = 1; i <= n; ++i) {
    route.At(s0 + (s1 - s0) * i / n, &t1);
    turn += std::abs(std::remainder(std::atan2(t1[1], t1[0]) - std::atan2(t0[1], t0[0]), 2 * M_PI));
    t0 = t1;
  }
  return turn;
}

// Between neighbouring frames every mover on the route moved speed x dt along its line: its
// arc length exactly by construction, and in ENU that distance up to what the route's turning
// theta between the two places allows (the offset line is longer or shorter by at most
// |offset| theta, a chord shorter than its arc by at most arc theta^2 / 8); and none comes
// within the camera vehicle's box at any frame.
TEST(MovingWorldTest, MoversFollowTheirLinesAndMissTheCamera) {
  const DemoOptions o = SmallRealistic("unused", 5);
  const Town town = SmallTown(o);
  int steps = 0;
  for (const PlannedDrive& d : PlanDrives(town, o)) {
    ASSERT_TRUE(d.world.has_traffic) << d.condition.name;
    for (const Mover& m : d.world.traffic.movers) {
      for (size_t k = 0; k + 1 < d.exposure.size(); ++k) {
        const double t0 = d.exposure[k].time_s, t1 = d.exposure[k + 1].time_s;
        cv::Vec2d a, b;
        double ya, yb;
        if (!MoverPlacement(town.route, m, t0, &a, &ya) ||
            !MoverPlacement(town.route, m, t1, &b, &yb))
          continue;
        const double along = m.speed_mps * (t1 - t0);
        const double theta = TurningBetween(town.route, m.s0_m + m.direction * m.speed_mps * t0,
                                            m.s0_m + m.direction * m.speed_mps * t1);
        const double bound = std::abs(m.offset_m) * theta + along * theta * theta / 8 + 1e-6;
        EXPECT_NEAR(cv::norm(b - a), along, bound) << d.condition.name << " " << m.id;
        (void)yb;
        ++steps;
        // The camera against the mover's box, in the mover's axes.
        const cv::Vec2d c(d.exposure[k].position[0], d.exposure[k].position[1]);
        const cv::Vec2d ax(std::cos(ya), std::sin(ya)), rel = c - a;
        const bool inside = std::abs(rel.dot(ax)) < m.length_m / 2 + 2.3 &&
                            std::abs(rel[0] * -ax[1] + rel[1] * ax[0]) < m.width_m / 2 + 0.95;
        EXPECT_FALSE(inside) << d.condition.name << " mover " << m.id << " frame " << k;
      }
    }
  }
  EXPECT_GT(steps, 1000);
}

// The positions town.json gives for drive `name`'s changes (moved and added vehicles, changed
// facades, works) with a reach (metres) that covers each item, and the survey positions of the
// vehicles it says are gone or moved.
std::vector<std::pair<cv::Vec2d, double>> ChangedPlaces(const nlohmann::json& changes,
                                                        const Town& town) {
  std::vector<std::pair<cv::Vec2d, double>> out;
  auto xy = [](const nlohmann::json& a) {
    return cv::Vec2d(a[0].get<double>(), a[1].get<double>());
  };
  for (const char* what : {"moved", "added"})
    for (const auto& v : changes["parked_vehicles"][what])
      out.push_back({xy(v["centre_en_m"]), 3.5});
  for (const Vehicle& v : town.vehicles) {
    bool listed = false;
    for (const auto& id : changes["parked_vehicles"]["gone_ids"]) listed |= id == v.id;
    for (const auto& m : changes["parked_vehicles"]["moved"]) listed |= m["id"] == v.id;
    if (listed) out.push_back({v.centre, 3.5});
  }
  for (const auto& f : changes["facades"])
    out.push_back({xy(f["front_middle_en_m"]), f["front_width_m"].get<double>() / 2 + 1});
  for (const auto& w : changes["works"])
    out.push_back({xy(w["centre_en_m"]), w["size_m"][0].get<double>() / 2 + 1.5});
  return out;
}

// Whether any changed place may show in a view from pose f (65-degree camera): in front of it
// within 300 m and inside the field of view widened by its reach.
bool ChangeInView(const std::vector<std::pair<cv::Vec2d, double>>& places, const Frame& f) {
  const double h = f.attitude.heading_deg * M_PI / 180;
  const cv::Vec2d fwd(std::sin(h), std::cos(h)), right(fwd[1], -fwd[0]);
  for (const auto& [p, reach] : places) {
    const cv::Vec2d rel = p - cv::Vec2d(f.position[0], f.position[1]);
    const double z = rel.dot(fwd), x = rel.dot(right);
    if (z < -reach || cv::norm(rel) > 300 + reach) continue;
    if (std::abs(x) <= std::tan(40 * M_PI / 180) * std::max(0.0, z) + reach * 1.5) return true;
  }
  return false;
}

// Seen from the survey's poses with no moving objects and the survey's summer trees, a world
// that takes the query drive's changes (as town.json records them) near one place P of the
// route renders the survey's bytes wherever P's changes are out of view, and differs where they
// stand in front of the camera.
TEST(MovingWorldTest, QueryWorldDiffersOnlyWhereChangesAre) {
  const DemoOptions o = SmallRealistic("unused", 5);
  const Town town = SmallTown(o);
  const std::vector<PlannedDrive> drives = PlanDrives(town, o);
  const DriveWorld& survey = drives[0].world;
  const DriveWorld& query = drives[1].world;
  const cv::Vec2d p = town.route.At(60);
  auto near = [&](const cv::Vec2d& x) { return cv::norm(x - p) < 25; };
  std::vector<std::pair<cv::Vec2d, double>> places;
  for (const auto& place : ChangedPlaces(ChangesJson(town, query), town))
    if (near(place.first)) places.push_back(place);
  ASSERT_FALSE(places.empty());
  DriveWorld mixed = survey;  // the survey's world with the query's changes near p
  mixed.parked.clear();
  for (const Vehicle& v : survey.parked)
    if (!near(v.centre)) mixed.parked.push_back(v);
  for (const Vehicle& v : query.parked)
    if (near(v.centre)) mixed.parked.push_back(v);
  for (const FacadeChange& c : query.facades) {
    const std::array<cv::Vec2d, 4>& f = town.buildings[c.building].footprint;
    const int e = town.buildings[c.building].front_edge;
    if (near(0.5 * (f[e] + f[(e + 1) % 4]))) mixed.facades.push_back(c);
  }
  for (const WorksSite& w : query.works)
    if (near(w.centre)) mixed.works.push_back(w);
  const TownScene scene(town, std::vector<DriveWorld>{survey, mixed});
  int same = 0, differ = 0, in_view = 0;
  for (const Frame& f : drives[0].exposure) {
    RenderOptions r;
    r.supersample = 1;
    r.moving_objects = false;
    const cv::Mat a = scene.Render(PoseOf(f), drives[0].camera, Appearance{}, 0, r);
    const cv::Mat b = scene.Render(PoseOf(f), drives[0].camera, Appearance{}, 1, r);
    const double share = DifferingShare(a, b);
    if (!ChangeInView(places, f)) {
      EXPECT_EQ(share, 0) << "frame at t " << f.time_s;
      ++same;
    } else {
      ++in_view;
      differ += share > 0;
    }
  }
  std::printf("%d views without a change in view (all equal), %d of %d with one differ\n", same,
              differ, in_view);
  EXPECT_GT(same, 3);
  EXPECT_GT(differ, 3);
}

// On disk: occlusion.csv beside each drive.csv, one row per image, and some frames of a
// realistic query drive 10-40 % covered.
TEST(MovingWorldTest, OcclusionCsvBesideEveryDrive) {
  const DemoOptions o = SmallRealistic("moving_world_disk", 4);
  const Result<DemoSummary> s = GenerateDemoTown(o);
  ASSERT_TRUE(s.ok()) << s.status().ToString();
  int in_band = 0;
  for (const DriveSummary& d : s->drives) {
    std::ifstream in(fs::path(o.out_dir) / d.name / "occlusion.csv");
    std::string line;
    ASSERT_TRUE(std::getline(in, line)) << d.name;
    EXPECT_EQ(line, "image,moving_share");
    int rows = 0;
    while (std::getline(in, line)) {
      const double share = std::stod(line.substr(line.find(',') + 1));
      EXPECT_TRUE(share >= 0 && share <= 1) << line;
      if (d.name != "survey") in_band += share >= 0.10 && share <= 0.40;
      ++rows;
    }
    EXPECT_EQ(rows, d.images) << d.name;
  }
  std::printf("query frames 10-40 %% covered: %d\n", in_band);
  EXPECT_GT(in_band, 0);
}

}  // namespace
}  // namespace sightfix::demo
