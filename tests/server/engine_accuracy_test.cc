// The engine end to end on the demo town: build a map from the survey drive, locate every image
// of the three query drives, with a noisy prior and with none, and hold the figures to the
// map-and-engine issue's goals. Seed 41 was used for no tuning and no calibration (the
// confidence scale was calibrated on seed 5; DEVELOPERS.md "Confidence calibration").
//
// Goals (map-and-engine issue): day: median horizontal error <= 0.3 m, p95 <= 1.0 m, >= 95 %
// refined, zero refined fixes more than 5 m off, radius95 coverage 90-98 %. Dusk and overcast:
// median <= 0.5 m, p95 <= 1.5 m, zero refined fixes more than 5 m off. A drive from another
// town: no refined (confident) fix at all. Common practice: about 1 m is what visual
// localization is expected to reach on roads, so these bounds are tighter than the trade's.
// Prior: a 150 m circle centred uniformly within 100 m of the truth (the setting).
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <opencv2/imgcodecs.hpp>

#include "client/eval/route_eval.h"
#include "demo_route/demo_town.h"
#include "indexer/builder/map_builder.h"
#include "server/engine/localizer.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

class EngineAccuracyTest : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    root_ = (fs::path(::testing::TempDir()) / "engine_accuracy").string();
    fs::remove_all(root_);
    demo::DemoOptions town;
    town.out_dir = root_ + "/town";
    town.seed = 41;
    town.route_length_m = 300;
    // Queries every 2.5 m (about 150 a drive): a coverage share of 95 % measured on 75 queries
    // moves 1.3 points per query, too coarse for a 90-98 % band.
    town.query_spacing_m = 2.5;
    ASSERT_TRUE(demo::GenerateDemoTown(town).ok());
    BuildOptions b;
    b.drive_dir = town.out_dir + "/survey";
    b.map_dir = root_ + "/map";
    b.progress = false;
    Result<BuildSummary> s = BuildMap(b);
    ASSERT_TRUE(s.ok()) << s.status().ToString();
    std::printf("map: %d images, %d tiles, %d points, %s, %.0f s\n", s->images, s->tiles, s->points,
                s->codec.c_str(), s->seconds);
    auto loc = Localizer::Open(b.map_dir, LocalizerOptions{});
    ASSERT_TRUE(loc.ok()) << loc.status().ToString();
    localizer_ = std::move(loc).value().release();
  }
  static void TearDownTestSuite() { delete localizer_; }

  static RouteSummary Run(const std::string& drive, PriorMode prior,
                          const std::string& town = "town") {
    RouteEvalOptions o;
    o.drive_dir = root_ + "/" + town + "/" + drive;
    o.prior = prior;
    o.seed = 7;
    auto r = RunDrive(*localizer_, o);
    EXPECT_TRUE(r.ok()) << r.status().ToString();
    if (!r.ok()) return {};
    for (const QueryResult& q : *r) EXPECT_TRUE(q.error.empty()) << q.error;
    const RouteSummary s = Summarize(*r);
    std::printf("%s, %s prior: %s\n", drive.c_str(), prior == PriorMode::kNone ? "no" : "noisy",
                SummaryLine(s).c_str());
    return s;
  }

  static inline std::string root_;
  static inline Localizer* localizer_ = nullptr;
};

TEST_F(EngineAccuracyTest, DayMeetsGoals) {
  ASSERT_NE(localizer_, nullptr);
  for (PriorMode prior : {PriorMode::kNoisy, PriorMode::kNone}) {
    const RouteSummary s = Run("query-day", prior);
    EXPECT_LE(s.median_error_m, 0.3);
    EXPECT_LE(s.p95_error_m, 1.0);
    EXPECT_GE(s.refined_share, 0.95);
    EXPECT_EQ(s.wrong_refined, 0);
    EXPECT_GE(s.radius95_coverage, 0.90);
    EXPECT_LE(s.radius95_coverage, 0.98);
  }
}

TEST_F(EngineAccuracyTest, DuskAndOvercastMeetGoals) {
  ASSERT_NE(localizer_, nullptr);
  for (const char* drive : {"query-dusk", "query-overcast"})
    for (PriorMode prior : {PriorMode::kNoisy, PriorMode::kNone}) {
      const RouteSummary s = Run(drive, prior);
      EXPECT_GT(s.refined, 0) << drive;  // the bounds below must measure something
      EXPECT_LE(s.median_error_m, 0.5) << drive;
      EXPECT_LE(s.p95_error_m, 1.5) << drive;
      EXPECT_EQ(s.wrong_refined, 0) << drive;
    }
}

TEST_F(EngineAccuracyTest, RequestFormsAgreeAndBadRequestsAreRefused) {
  ASSERT_NE(localizer_, nullptr);
  const std::string dir = root_ + "/town/query-day";
  auto cam = LoadCameraModel(dir + "/camera.yml");
  ASSERT_TRUE(cam.ok());
  LocateRequest by_image;
  by_image.camera = *cam;
  by_image.image = cv::imread(dir + "/images/000010.jpg", cv::IMREAD_GRAYSCALE);
  auto a = localizer_->Locate(by_image);
  ASSERT_TRUE(a.ok());
  ASSERT_EQ(a->quality, FixQuality::kRefined);
  LocateRequest by_bytes = by_image;  // the same JPEG as bytes
  by_bytes.image.release();
  std::ifstream in(dir + "/images/000010.jpg", std::ios::binary);
  by_bytes.image_bytes.assign(std::istreambuf_iterator<char>(in), {});
  auto b = localizer_->Locate(by_bytes);
  ASSERT_TRUE(b.ok());
  EXPECT_DOUBLE_EQ(a->lat_deg, b->lat_deg);
  EXPECT_DOUBLE_EQ(a->lon_deg, b->lon_deg);
  LocateRequest by_features = by_image;  // precomputed features
  by_features.image.release();
  by_features.features =
      std::make_shared<LocalFeatures>(*ExtractFeatures(by_image.image, &*cam, FeatureOptions{}));
  auto c = localizer_->Locate(by_features);
  ASSERT_TRUE(c.ok());
  EXPECT_DOUBLE_EQ(a->lat_deg, c->lat_deg);

  auto refused = [&](LocateRequest r, const char* what) {
    auto f = localizer_->Locate(r);
    ASSERT_FALSE(f.ok()) << what;
    EXPECT_EQ(f.status().code(), StatusCode::kInvalidArgument) << what;
  };
  LocateRequest r = by_bytes;
  r.image_bytes = {0xff, 0xd8, 0x00, 0x01};
  refused(r, "undecodable bytes");
  r = by_image;
  r.image = cv::Mat(240, 320, CV_8UC1, cv::Scalar(90));
  refused(r, "size not the calibration's");
  r = by_image;
  r.image.release();
  refused(r, "no image");
  r = by_image;
  r.prior = PriorCircle{std::nan(""), 0, 100};
  refused(r, "NaN prior");
  r.prior = PriorCircle{44, -40, -5};
  refused(r, "negative radius");
  r.prior = PriorCircle{95, -40, 5};
  refused(r, "latitude out of range");
  r = by_image;
  r.camera.fx = -1;
  refused(r, "bad calibration");
}

TEST_F(EngineAccuracyTest, ForeignTownGetsNoConfidentFix) {
  ASSERT_NE(localizer_, nullptr);
  demo::DemoOptions other;  // same datum, another seed: a place the map has never seen
  other.out_dir = root_ + "/foreign";
  other.seed = 42;
  other.route_length_m = 150;
  ASSERT_TRUE(demo::GenerateDemoTown(other).ok());
  for (const char* drive : {"query-day", "query-overcast"})
    for (PriorMode prior : {PriorMode::kNoisy, PriorMode::kNone}) {
      RouteEvalOptions o;
      o.drive_dir = other.out_dir + "/" + drive;
      o.prior = prior;
      auto r = RunDrive(*localizer_, o);
      ASSERT_TRUE(r.ok());
      const RouteSummary s = Summarize(*r);
      std::printf("foreign %s: %d queries, refined %d, coarse %d, none %d\n", drive, s.queries,
                  s.refined, s.coarse, s.none);
      EXPECT_EQ(s.refined, 0) << drive;
      for (const QueryResult& q : *r) {
        if (q.fix.quality == FixQuality::kCoarse) {
          EXPECT_GE(q.fix.radius95_m, 50.0);
        }
      }
    }
}

}  // namespace
}  // namespace sightfix
