// The engine end to end on the demo town: build a map from the survey drive, locate every image
// of the three query drives, with a noisy prior and with none, and hold the figures to two kinds
// of bounds.
//
// Goals (map-and-engine goals, docs/design.md): day: median horizontal error <= 0.3 m, p95 <=
// 1.0 m, >= 95 % refined, zero refined fixes more than 5 m off, radius95 coverage 90-98 %. Dusk
// and overcast: median <= 0.5 m, p95 <= 1.5 m, zero refined fixes more than 5 m off. A drive
// from another town: no refined (confident) fix at all. Common practice: about 1 m is what
// visual localization is expected to reach on roads, so these bounds are tighter than the trade's.
//
// Regression bounds (kRegression below): a floor or ceiling near each condition's measured
// refined share, median and p95 error, radius95 coverage and retrieval recall@5, so that a change
// which halves the dusk refined rate or makes fixes ten times worse fails although the goals
// still hold. Each was measured on seed 41 (CI's) and checked on seed 43; both figures stand
// beside it. Seed 41 is not a held-out seed for the radius: the radius model's versions were each
// checked on it after their calibration on seed 5 (DEVELOPERS.md, "Confidence calibration").
// Seed 43 was used for nothing but this check. Another seed: SIGHTFIX_ACCURACY_SEED=43.
// Prior: a 150 m circle centred uniformly within 100 m of the truth.
#include <gtest/gtest.h>
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <opencv2/imgcodecs.hpp>

#include "client/eval/route_eval.h"
#include "demo_route/demo_town.h"
#include "indexer/base/geo.h"
#include "indexer/builder/map_builder.h"
#include "indexer/map/drive_manifest.h"
#include "server/engine/localizer.h"
#include "tests/lib/accuracy_seed.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

class EngineAccuracyTest : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    // One folder per process: two runs on one machine (a developer's and a CI clone's) must not
    // delete each other's town.
    root_ = (fs::path(::testing::TempDir()) / ("engine_accuracy_" + std::to_string(::getpid())))
                .string();
    fs::remove_all(root_);
    demo::DemoOptions town;
    town.out_dir = root_ + "/town";
    town.seed = AccuracyTownSeed();
    town.world = demo::World::kClean;  // the regression bounds below were measured on it
    std::printf("demo town seed %llu\n", static_cast<unsigned long long>(town.seed));
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
    // The clean town's survey error is white by construction (2 cm per frame, DemoOptions'
    // default world): the engine is told so, and averages it over each point's frames.
    LocalizerOptions lo;
    lo.survey_error = SurveyError::kWhite;
    auto loc = Localizer::Open(b.map_dir, lo);
    ASSERT_TRUE(loc.ok()) << loc.status().ToString();
    localizer_ = std::move(loc).value().release();
  }
  static void TearDownTestSuite() {
    delete localizer_;
    std::error_code ignored;
    fs::remove_all(root_, ignored);
  }

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

// A condition's regression bounds, with the figures measured on seed 41 / seed 43 (2026-12-03)
// above each row. Floors sit below the lower of the two by about two binomial standard errors of a
// 150-query share (4 points at 60 %); error ceilings at about twice the larger figure; coverage
// between 0.85 and 0.99 off day (a radius doubled gives 1.0), day's band is the goal's. Seed 43's
// day coverage, 0.993 (152 of 153), breaks that goal: the radius is conservative there
// (DEVELOPERS.md, "Confidence calibration", open).
struct Regression {
  const char* drive;
  PriorMode prior;
  double min_refined_share, max_median_m, max_p95_m, min_coverage, max_coverage, min_recall_at_5;
};
// clang-format off
constexpr Regression kRegression[] = {
  // refined 1.000 / 1.000; median 0.013 / 0.012 m; p95 0.036 / 0.029 m; coverage 0.973 / 0.993;
  // recall@5 1.000 / 1.000
  {"query-day", PriorMode::kNoisy, 0.97, 0.03, 0.08, 0.90, 0.98, 0.97},
  // refined 1.000 / 1.000; median 0.013 / 0.012 m; p95 0.036 / 0.029 m; coverage 0.973 / 0.993;
  // recall@5 1.000 / 1.000
  {"query-day", PriorMode::kNone, 0.97, 0.03, 0.08, 0.90, 0.98, 0.97},
  // refined 0.595 / 0.753; median 0.033 / 0.027 m; p95 0.127 / 0.128 m; coverage 0.926 / 0.973;
  // recall@5 0.715 / 0.873
  {"query-dusk", PriorMode::kNoisy, 0.50, 0.08, 0.30, 0.85, 0.99, 0.62},
  // refined 0.551 / 0.747; median 0.036 / 0.026 m; p95 0.127 / 0.128 m; coverage 0.920 / 0.973;
  // recall@5 0.677 / 0.873
  {"query-dusk", PriorMode::kNone, 0.46, 0.08, 0.30, 0.85, 0.99, 0.58},
  // refined 0.961 / 0.974; median 0.025 / 0.019 m; p95 0.082 / 0.055 m; coverage 0.899 / 0.973;
  // recall@5 0.968 / 0.980
  {"query-overcast", PriorMode::kNoisy, 0.90, 0.06, 0.20, 0.85, 0.99, 0.92},
  // refined 0.961 / 0.974; median 0.025 / 0.019 m; p95 0.083 / 0.055 m; coverage 0.899 / 0.973;
  // recall@5 0.968 / 0.980
  {"query-overcast", PriorMode::kNone, 0.90, 0.06, 0.20, 0.85, 0.99, 0.92},
};
// clang-format on

void ExpectWithinRegressionBounds(const std::string& drive, PriorMode prior,
                                  const RouteSummary& s) {
  for (const Regression& r : kRegression) {
    if (drive != r.drive || prior != r.prior) continue;
    const std::string what = drive + (prior == PriorMode::kNone ? ", no prior" : ", noisy prior");
    EXPECT_GE(s.refined_share, r.min_refined_share) << what;
    EXPECT_LE(s.median_error_m, r.max_median_m) << what;
    EXPECT_LE(s.p95_error_m, r.max_p95_m) << what;
    EXPECT_GE(s.radius95_coverage, r.min_coverage) << what;
    EXPECT_LE(s.radius95_coverage, r.max_coverage) << what;
    EXPECT_GE(s.recall_at_5, r.min_recall_at_5) << what;
    return;
  }
  ADD_FAILURE() << "no regression bounds for " << drive;
}

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
    ExpectWithinRegressionBounds("query-day", prior, s);
  }
}

TEST_F(EngineAccuracyTest, DuskAndOvercastMeetGoals) {
  ASSERT_NE(localizer_, nullptr);
  for (const char* drive : {"query-dusk", "query-overcast"})
    for (PriorMode prior : {PriorMode::kNoisy, PriorMode::kNone}) {
      const RouteSummary s = Run(drive, prior);
      EXPECT_LE(s.median_error_m, 0.5) << drive;
      EXPECT_LE(s.p95_error_m, 1.5) << drive;
      EXPECT_EQ(s.wrong_refined, 0) << drive;
      ExpectWithinRegressionBounds(drive, prior, s);
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

// A prior narrows retrieval to the map images within its circle plus the viewing range
// (localizer.h, LocalizerOptions::viewing_range_m): with the circle at the far end of the drive, no
// candidate may come from elsewhere, and the true place, far outside it, cannot be refined.
TEST_F(EngineAccuracyTest, PriorCircleBoundsTheCandidates) {
  ASSERT_NE(localizer_, nullptr);
  const std::string dir = root_ + "/town/query-day";
  auto cam = LoadCameraModel(dir + "/camera.yml");
  ASSERT_TRUE(cam.ok());
  auto rows = ReadDriveManifest(dir + "/drive.csv");
  ASSERT_TRUE(rows.ok()) << rows.status().ToString();
  ASSERT_GT(rows->size(), 100u);
  // The query at row 10 and the place of the drive farthest from it (the truth, drive.csv).
  const DriveRow& start_row = (*rows)[10];
  auto apart = [&](const DriveRow& r) {
    return GeodesicBetween(start_row.position.lat_deg, start_row.position.lon_deg,
                           r.position.lat_deg, r.position.lon_deg)
        .distance_m;
  };
  const DriveRow& far_row =
      *std::max_element(rows->begin(), rows->end(),
                        [&](const DriveRow& x, const DriveRow& y) { return apart(x) < apart(y); });
  const double radius_m = 10, reach_m = radius_m + LocalizerOptions{}.viewing_range_m;
  ASSERT_GT(apart(far_row), reach_m + 50);  // the true place well outside the reach

  LocateRequest start;
  start.camera = *cam;
  start.image = cv::imread(dir + "/" + start_row.image, cv::IMREAD_GRAYSCALE);
  ASSERT_FALSE(start.image.empty());
  ASSERT_EQ(localizer_->Locate(start)->quality, FixQuality::kRefined);  // found without a prior
  const GeoPoint& centre = far_row.position;
  start.prior = PriorCircle{centre.lat_deg, centre.lon_deg, radius_m};
  auto f = localizer_->Locate(start);
  ASSERT_TRUE(f.ok());
  ASSERT_FALSE(f->references.empty());  // the tiles at the far end hold candidates
  for (const ReferenceUse& ref : f->references) {
    EXPECT_LE(GeodesicBetween(centre.lat_deg, centre.lon_deg, ref.lat_deg, ref.lon_deg).distance_m,
              reach_m + 1e-6)
        << ref.name;
  }
  if (f->quality == FixQuality::kRefined) {
    EXPECT_GT(GeodesicBetween(start_row.position.lat_deg, start_row.position.lon_deg, f->lat_deg,
                              f->lon_deg)
                  .distance_m,
              5.0);
  }
}

TEST_F(EngineAccuracyTest, ForeignTownGetsNoConfidentFix) {
  ASSERT_NE(localizer_, nullptr);
  demo::DemoOptions other;  // same datum, another seed: a place the map has never seen
  other.out_dir = root_ + "/foreign";
  other.seed = AccuracyTownSeed() + 1;
  other.world = demo::World::kClean;
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
