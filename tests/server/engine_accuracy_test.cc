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

#include <filesystem>

#include "client/route_eval.h"
#include "demo_route/demo_town.h"
#include "indexer/map_builder.h"
#include "server/localizer.h"

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
