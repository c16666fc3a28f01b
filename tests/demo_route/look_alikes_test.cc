// The realistic world's look-alikes and excursion (look_alikes.h), on small towns built without
// rendering a drive: terrace houses paint the same facade, twin stretches and terrace houses a
// whole number of houses apart render alike (high normalized cross-correlation) while unrelated
// places do not, town.json's records agree with the geometry, the off-map frames of
// query-offmap are far from every survey camera, the survey never sees the excursion's
// buildings, and the clean town is untouched.
#include "demo_route/look_alikes.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <nlohmann/json.hpp>
#include <opencv2/imgproc.hpp>

#include "demo_route/demo_drives.h"
#include "demo_route/demo_outputs.h"
#include "demo_route/demo_town.h"
#include "demo_route/town_painter.h"
#include "demo_route/town_renderer.h"
#include "indexer/base/rotation.h"

namespace sightfix::demo {
namespace {

// 700 m reaches four straight legs: room for the excursion, twins, a terrace and chain shops.
DemoOptions RealisticOptions(uint64_t seed) {
  DemoOptions o;
  o.out_dir = "unused";
  o.seed = seed;
  o.route_length_m = 700;
  o.image_width = 160, o.image_height = 120;
  o.survey_spacing_m = 4, o.query_spacing_m = 5, o.supersample = 1;
  o.world = World::kRealistic;
  return o;
}

const LookAlikeStretch* Find(const Town& town, LookAlikeStretch::Kind kind) {
  for (const LookAlikeStretch& s : town.look_alikes)
    if (s.kind == kind) return &s;
  return nullptr;
}

// Normalized cross-correlation of two equal-size images' detail: grey levels less a Gaussian
// blur of sigma 3 px, so sky and shading gradients common to every view do not count; with
// upper_half, only above the horizon of a level view (the lane markings are everywhere alike).
double DetailNcc(const cv::Mat& a, const cv::Mat& b, bool upper_half = false) {
  auto detail = [upper_half](const cv::Mat& img) {
    cv::Mat g, blur;
    if (img.channels() == 3) {
      cv::Mat f;
      img.convertTo(f, CV_32FC3);
      cv::cvtColor(f, g, cv::COLOR_BGR2GRAY);
    } else {
      img.convertTo(g, CV_32F);
    }
    cv::GaussianBlur(g, blur, cv::Size(0, 0), 3);
    return cv::Mat(g - blur).rowRange(0, upper_half ? g.rows / 2 : g.rows).clone();
  };
  const cv::Mat x = detail(a), y = detail(b);
  const double sxy = x.dot(y), sxx = x.dot(x), syy = y.dot(y);
  return sxy / std::sqrt(sxx * syy);
}

// The survey camera's view from the survey lane at route arc length s, facing along the route.
cv::Mat SurveyView(const TownScene& scene, const Town& town, double s) {
  const Frame f =
      PoseOnPass(town.route, {0, town.route.length(), StreetSection::kSurveyLaneM}, s, 1.5);
  CameraModel cam;
  cam.width_px = 160, cam.height_px = 120;
  cam.fx = cam.fy = 125, cam.cx = 79.5, cam.cy = 59.5;
  RenderOptions ro;
  ro.supersample = 1;
  return scene.Render({f.position, EnuFromCamera(f.attitude).t()}, cam, Appearance{}, 0, ro);
}

// A building's street front in the stretch's frame: along the route from s0, and to its right.
cv::Vec2d FrontAt(const Town& town, const Building& b, double s0) {
  cv::Vec2d t;
  const cv::Vec2d o = town.route.At(s0, &t);
  const cv::Vec2d m = (b.footprint[b.front_edge] + b.footprint[(b.front_edge + 1) % 4]) / 2;
  return {(m - o).dot(t), (m - o).dot(cv::Vec2d(t[1], -t[0]))};
}

// Whether b's whole front lies along [s0, s1] of a straight stretch, facing the route.
bool FrontsStretch(const Town& town, const Building& b, double s0, double s1) {
  cv::Vec2d t;
  const cv::Vec2d o = town.route.At(s0, &t);
  const double u0 = (b.footprint[b.front_edge] - o).dot(t);
  const double u1 = (b.footprint[(b.front_edge + 1) % 4] - o).dot(t);
  const double lateral = std::abs(FrontAt(town, b, s0)[1]), len = s1 - s0;
  return std::min(u0, u1) >= -0.01 && std::max(u0, u1) <= len + 0.01 && lateral >= 10 &&
         lateral <= 16.5;
}

// Terrace houses of one side share one facade texture; a door of another colour changes a
// sliver of it; two ordinary buildings of the town share nothing.
TEST(LookAlikesTest, TerraceHousesPaintOneFacade) {
  const Town town = BuildTown(TownOptionsFor(RealisticOptions(5)));
  const LookAlikeStretch* terrace = Find(town, LookAlikeStretch::kTerrace);
  ASSERT_NE(terrace, nullptr);
  const GlyphSet glyphs(5);
  std::vector<const Building*> plain, tinted, others;
  for (const Building& b : town.buildings) {
    if (!b.facade.residential) {
      if (b.facade.chain_shop_seed == 0 && !b.off_map) others.push_back(&b);
      continue;
    }
    if (b.seed != town.buildings.back().seed) continue;  // one side's design
    (b.facade.door_tint < 0 ? plain : tinted).push_back(&b);
  }
  ASSERT_GE(plain.size(), 2u);
  ASSERT_GE(tinted.size(), 1u);
  ASSERT_GE(others.size(), 2u);
  auto paint = [&](const Building& b) {
    const double w = cv::norm(b.footprint[1] - b.footprint[0]);
    return PaintFacade({w, b.height_m, b.floors, HashSeed(b.seed, b.front_edge), b.facade}, glyphs);
  };
  const cv::Mat a = paint(*plain[0]), b = paint(*plain[1]), c = paint(*tinted[0]);
  EXPECT_EQ(cv::norm(a, b, cv::NORM_INF), 0);
  const double tinted_ncc = DetailNcc(a, c);
  cv::Mat d = paint(*others[0]), e = paint(*others[1]);
  cv::resize(e, e, d.size());
  const double others_ncc = DetailNcc(d, e);
  std::printf("terrace house vs tinted door: NCC %.5f; two ordinary facades: %.3f\n", tinted_ncc,
              others_ncc);
  EXPECT_LT(tinted_ncc, 1.0);
  EXPECT_GT(tinted_ncc, 0.9);
  EXPECT_LT(others_ncc, 0.3);
}

// Views from the survey lane: twin stretches at the same offset, and terrace positions three
// houses apart, correlate far more than two places of the same stretch 25 m apart (facades that
// differ). Measured on seed 5 (twins 0.223, terrace 0.468, 25 m apart 0.044) and checked on
// seed 6 (0.368, 0.352, 0.005); street furniture, vehicles and what lies beyond still differ.
void CheckViews(uint64_t seed) {
  const Town town = BuildTown(TownOptionsFor(RealisticOptions(seed)));
  const LookAlikeStretch* twin = Find(town, LookAlikeStretch::kTwin);
  const LookAlikeStretch* terrace = Find(town, LookAlikeStretch::kTerrace);
  ASSERT_TRUE(twin && terrace);
  const TownScene scene(town, {VehiclesForVariant(town, 0)});
  const double u = 10;
  const cv::Mat a = SurveyView(scene, town, twin->mirrors_from_m + u);
  const double twin_ncc = DetailNcc(a, SurveyView(scene, town, twin->route_from_m + u), true);
  const double apart_ncc =
      DetailNcc(a, SurveyView(scene, town, twin->mirrors_from_m + u + 25), true);
  const double t0 = terrace->route_from_m + 5;
  const double terrace_ncc =
      DetailNcc(SurveyView(scene, town, t0), SurveyView(scene, town, t0 + 3 * 7.2), true);
  std::printf("seed %llu: twin views NCC %.3f, terrace 3 houses apart %.3f, 25 m apart %.3f\n",
              static_cast<unsigned long long>(seed), twin_ncc, terrace_ncc, apart_ncc);
  EXPECT_GT(twin_ncc, 0.15);
  EXPECT_GT(terrace_ncc, 0.25);
  EXPECT_LT(apart_ncc, 0.12);
}

TEST(LookAlikesTest, LookAlikePlacesRenderAlike) {
  CheckViews(5);
  CheckViews(6);
}

// Each record in town.json against the buildings: twin fronts repeat one for one (same seed,
// same offsets along and across), every terrace front is a terrace house, every chain-shop
// front carries the chain; the stretches lie on the surveyed route and do not overlap.
TEST(LookAlikesTest, RecordsAgreeWithGeometry) {
  const DemoOptions o = RealisticOptions(5);
  const Town town = BuildTown(TownOptionsFor(o));
  const std::vector<PlannedDrive> drives = PlanDrives(town, o);
  const nlohmann::json j = TownJson(o, town, drives);
  ASSERT_EQ(j["look_alikes"].size(), 3u);
  std::vector<std::pair<double, double>> spans;
  for (const nlohmann::json& r : j["look_alikes"]) {
    const double s0 = r["route_from_m"], s1 = r["route_to_m"];
    EXPECT_TRUE(s0 >= 0 && s1 > s0 + 40 && s1 <= town.route.length()) << r;
    spans.emplace_back(s0, s1);
    int fronts = 0;
    for (const Building& b : town.buildings) {
      if (!FrontsStretch(town, b, s0, s1)) continue;
      ++fronts;
      if (r["kind"] == "terrace") {
        EXPECT_TRUE(b.facade.residential);
      } else if (r["kind"] == "chain_shops") {
        EXPECT_NE(b.facade.chain_shop_seed, 0u);
      }
      if (r["kind"] != "twin") continue;
      const double m0 = r["mirrors"]["route_from_m"], m1 = r["mirrors"]["route_to_m"];
      EXPECT_NEAR(m1 - m0, s1 - s0, 1e-9);
      int twins = 0;
      for (const Building& x : town.buildings)
        twins += x.seed == b.seed && FrontsStretch(town, x, m0, m1) &&
                 cv::norm(FrontAt(town, x, m0) - FrontAt(town, b, s0)) < 1e-6;
      EXPECT_EQ(twins, 1);
    }
    EXPECT_EQ(fronts * (r["kind"] == "twin" ? 2 : 1), r["buildings"].get<int>()) << r;
    if (r["kind"] == "twin")
      spans.emplace_back(r["mirrors"]["route_from_m"], r["mirrors"]["route_to_m"]);
  }
  std::sort(spans.begin(), spans.end());
  for (size_t i = 1; i < spans.size(); ++i) EXPECT_LE(spans[i - 1].second, spans[i].first);
}

// query-offmap: the frames town.json calls off the map are more than 50 m from every survey
// camera, every other frame is within 55 m of the route, and the drive does leave and return.
TEST(LookAlikesTest, OffMapFramesAreFarFromTheSurvey) {
  for (uint64_t seed : {5, 6}) {
    const DemoOptions o = RealisticOptions(seed);
    const Town town = BuildTown(TownOptionsFor(o));
    const std::vector<PlannedDrive> drives = PlanDrives(town, o);
    ASSERT_GE(drives.size(), 5u);  // query-night follows where the light is on
    ASSERT_EQ(drives[4].condition.name, kOffMapDriveName);
    const nlohmann::json j = TownJson(o, town, drives);
    const std::vector<int> off = j["excursion"]["off_map_frames"];
    ASSERT_GE(off.size(), 10u);
    const std::vector<Frame>& q = drives[4].truth;
    EXPECT_LT(DistanceToRoute(town, {q.front().position[0], q.front().position[1]}), 3);
    EXPECT_LT(DistanceToRoute(town, {q.back().position[0], q.back().position[1]}), 3);
    double nearest = 1e18;
    for (int k : off)
      for (const Frame& s : drives[0].truth)
        nearest = std::min(nearest, cv::norm(s.position - q[k].position));
    std::printf("seed %llu: %zu of %zu frames off the map, nearest survey camera %.1f m\n",
                static_cast<unsigned long long>(seed), off.size(), q.size(), nearest);
    EXPECT_GT(nearest, 50);
    for (size_t k = 0; k < q.size(); ++k) {
      if (std::find(off.begin(), off.end(), int(k)) != off.end()) continue;
      EXPECT_LT(DistanceToRoute(town, {q[k].position[0], q[k].position[1]}), 55) << k;
    }
  }
}

// The survey's views near the excursion's mouth with and without the excursion's buildings: the
// share of pixels they change, at most. Not zero: glimpses between and over the route's corner
// buildings. Measured 0.0107 on seed 5 and 0.0016 on seed 6 at 160 x 120.
void CheckExcursionHidden(uint64_t seed) {
  const Town town = BuildTown(TownOptionsFor(RealisticOptions(seed)));
  ASSERT_TRUE(town.has_excursion);
  Town without = town;
  without.buildings.clear();
  for (const Building& b : town.buildings)
    if (!b.off_map) without.buildings.push_back(b);
  ASSERT_LT(without.buildings.size(), town.buildings.size());
  const TownScene with_scene(town, {VehiclesForVariant(town, 0)});
  const TownScene without_scene(without, {VehiclesForVariant(town, 0)});
  double worst = 0;
  const double m = town.excursion.mouth_route_m;
  for (double s = std::max(0.0, m - 120); s <= m + 40; s += 4) {
    for (bool back : {false, true}) {
      const Pass pass = back ? Pass{town.route.length(), 0, StreetSection::kSurveyLaneM}
                             : Pass{0, town.route.length(), StreetSection::kSurveyLaneM};
      const double d = back ? town.route.length() - s : s;
      const Frame f = PoseOnPass(town.route, pass, d, 1.5);
      CameraModel cam;
      cam.width_px = 160, cam.height_px = 120;
      cam.fx = cam.fy = 125, cam.cx = 79.5, cam.cy = 59.5;
      RenderOptions ro;
      ro.supersample = 1;
      const CameraPose pose{f.position, EnuFromCamera(f.attitude).t()};
      const cv::Mat a = with_scene.Render(pose, cam, Appearance{}, 0, ro);
      const cv::Mat b = without_scene.Render(pose, cam, Appearance{}, 0, ro);
      cv::Mat diff;
      cv::absdiff(a, b, diff);
      cv::Mat grey;
      cv::cvtColor(diff, grey, cv::COLOR_BGR2GRAY);
      worst = std::max(worst, cv::countNonZero(grey > 1e-3) / double(grey.total()));
    }
  }
  std::printf("seed %llu: largest share of a survey view showing the excursion's buildings: %.4f\n",
              static_cast<unsigned long long>(seed), worst);
  EXPECT_LE(worst, 0.02);
}

TEST(LookAlikesTest, SurveyBarelySeesTheExcursion) {
  CheckExcursionHidden(5);
  CheckExcursionHidden(6);
}

// The clean world has neither: four drives, no records, and the realistic town keeps every
// clean building but those of the look-alike stretches and the excursion's mouth.
TEST(LookAlikesTest, CleanTownHasNone) {
  DemoOptions o = RealisticOptions(5);
  o.world = World::kClean;
  const Town clean = BuildTown(TownOptionsFor(o));
  EXPECT_TRUE(clean.look_alikes.empty());
  EXPECT_FALSE(clean.has_excursion);
  EXPECT_EQ(PlanDrives(clean, o).size(), 4u);
  EXPECT_TRUE(TownJson(o, clean, PlanDrives(clean, o)).count("look_alikes") == 0);
  const Town real = BuildTown(TownOptionsFor(RealisticOptions(5)));
  int kept = 0, replaced = 0;
  for (const Building& b : clean.buildings) {
    bool found = false;
    for (const Building& x : real.buildings)
      found |= x.seed == b.seed && cv::norm(x.footprint[0] - b.footprint[0]) < 1e-9;
    if (found) {
      ++kept;
      continue;
    }
    ++replaced;
    bool explained = false;
    for (const LookAlikeStretch& s : real.look_alikes)
      explained |= s.kind != LookAlikeStretch::kChainShops &&
                   FrontAt(real, b, s.route_from_m)[0] > -25 &&
                   FrontAt(real, b, s.route_from_m)[0] < s.route_to_m - s.route_from_m + 25;
    const cv::Vec2d c = (b.footprint[0] + b.footprint[2]) / 2;
    explained |= std::abs(c[0] - real.excursion.mouth_route_m) < 30 && c[1] < 0;
    EXPECT_TRUE(explained) << "building at " << c;
  }
  std::printf("clean buildings kept %d, replaced %d\n", kept, replaced);
  EXPECT_GT(kept, 5 * replaced);
}

}  // namespace
}  // namespace sightfix::demo
