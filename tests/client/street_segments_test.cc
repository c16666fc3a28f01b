// Street segments (client/eval/street_segments.h): the cut by distance driven, worked by hand,
// and the per-segment bootstrap of a rate against SciPy 1.10.1 (Debian's python3-scipy,
// /usr/bin/python3); the command that printed each expected value stands beside its check.
#include "client/eval/street_segments.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <vector>

#include "tests/client/placed_query.h"

namespace sightfix {
namespace {

using Q = FixQuality;

// Results in a scrambled order, one never run, a stop (two frames at one place) and a gap wider
// than a segment. Truth positions (m north) by time: t0 0, t1 20, t2 20 (stopped), t3 49,
// t4 51, t5 180 (gap: segments 2 and 3 hold nothing), t6 199.
TEST(StreetSegmentsTest, CutByDistanceDrivenInTimeOrder) {
  std::vector<QueryResult> results = {PlacedQuery(51, 4, Q::kNone), PlacedQuery(0, 0, Q::kNone),
                                      PlacedQuery(20, 2, Q::kNone), QueryResult{},
                                      PlacedQuery(20, 1, Q::kNone), PlacedQuery(199, 6, Q::kNone),
                                      PlacedQuery(49, 3, Q::kNone), PlacedQuery(180, 5, Q::kNone)};
  const StreetCut cut = CutStreetSegments(results, 50);
  // Driven: 0, 20, 20, 49, 51, 180, 199 m -> segments 0, 0, 0, 0, 1, 3, 3.
  EXPECT_EQ(cut.segment, (std::vector<int>{1, 0, 0, -1, 0, 3, 0, 3}));
  const std::vector<double> driven = {51, 0, 20, 0, 20, 199, 49, 180};
  for (size_t i = 0; i < driven.size(); ++i) EXPECT_NEAR(cut.driven_m[i], driven[i], 1e-6) << i;
  EXPECT_EQ(cut.segments, (std::vector<int>{0, 1, 3}));
  EXPECT_EQ(cut.order, (std::vector<size_t>{1, 4, 2, 6, 0, 7, 5}));
  // A drive back and forth: distance driven counts both ways (0 -> 30 -> 0 m: 60 m driven).
  const StreetCut back = CutStreetSegments(
      {PlacedQuery(0, 0, Q::kNone), PlacedQuery(30, 1, Q::kNone), PlacedQuery(0, 2, Q::kNone)}, 50);
  EXPECT_EQ(back.segment, (std::vector<int>{0, 0, 1}));
  // Another length, same drive: 19 m segments (20 / 19, 49 / 19, 51 / 19, 180 / 19, 199 / 19).
  EXPECT_EQ(CutStreetSegments(results, 19).segments, (std::vector<int>{0, 1, 2, 9, 10}));
  EXPECT_TRUE(CutStreetSegments({}, 50).segments.empty());
}

TEST(StreetSegmentsTest, BlocksFollowSegmentsAndSkipUntaken) {
  std::vector<QueryResult> results;
  for (int i = 0; i < 12; ++i) results.push_back(PlacedQuery(10.0 * i, i, Q::kNone));
  const StreetCut cut = CutStreetSegments(results, 44);  // 0-40, 50-80, 90-110 m
  const auto blocks = SegmentBlocks(
      cut, [](size_t i) { return i % 3 != 0; }, [](size_t i) { return double(i); });
  EXPECT_EQ(blocks, (std::vector<std::vector<double>>{{1, 2, 4}, {5, 7, 8}, {10, 11}}));
}

// 200 outcomes (1 when (37 i) mod 101 < 70: 138 of 200), the same in the SciPy command.
std::vector<double> Outcomes() {
  std::vector<double> x;
  for (int i = 0; i < 200; ++i) x.push_back((37 * i) % 101 < 70 ? 1 : 0);
  return x;
}

// The half-width of the Monte-Carlo disagreement allowed between our B = 2000 percentile
// endpoints and SciPy's B = 100000 ones, for a statistic whose bootstrap standard deviation is
// sd: four standard errors of the 2.5 % quantile (as interval_stats_test derives it: about 0.24
// sd), plus one `step` because a resampled share of n outcomes only takes multiples of 1/n and
// the two resamplers can land on neighbouring ones.
double Tolerance(double sd, double step) {
  const double z = 1.959964, phi = std::exp(-z * z / 2) / std::sqrt(2 * M_PI);
  const double se =
      std::hypot(std::sqrt(0.025 * 0.975 / 2000) / phi, std::sqrt(0.025 * 0.975 / 100000) / phi);
  return 4 * se * sd + step;
}

// Independent frames: 200 frames 60 m apart, so each is its own 50 m segment and the segment
// bootstrap is the ordinary bootstrap of the 0/1 outcomes.
TEST(StreetSegmentsTest, ShareOfIndependentFramesAgreesWithScipy) {
  const std::vector<double> x = Outcomes();
  std::vector<QueryResult> results;
  for (size_t i = 0; i < x.size(); ++i)
    results.push_back(PlacedQuery(60.0 * i, i, x[i] ? Q::kRefined : Q::kNone, 0.1, 0.3));
  const StreetCut cut = CutStreetSegments(results, 50);
  ASSERT_EQ(cut.segments.size(), 200u);
  const std::optional<Interval> ci = SegmentShareCi95(
      cut, [](size_t) { return true; },
      [&](size_t i) { return results[i].fix.quality != Q::kNone; });
  // python3 -c 'import numpy as np; from scipy.stats import bootstrap;
  //   x = np.array([1.0 if (37 * i) % 101 < 70 else 0.0 for i in range(200)]);
  //   r = bootstrap((x,), np.mean, method="percentile", n_resamples=100000,
  //   random_state=1).confidence_interval; print("%.6f %.6f" % (r.low, r.high))'
  // prints 0.625000 0.755000 (random_state 2 and 3: the same).
  const double sd = std::sqrt(0.69 * 0.31 / 200);  // bootstrap sd of a share of 138 of 200
  ASSERT_TRUE(ci.has_value());
  EXPECT_EQ(ci->method, IntervalMethod::kBlockBootstrap);
  EXPECT_NEAR(ci->low, 0.625, Tolerance(sd, 1.0 / 200));
  EXPECT_NEAR(ci->high, 0.755, Tolerance(sd, 1.0 / 200));
  // The summary's availability is this interval.
  const RouteSummary s = Summarize(results);
  ASSERT_TRUE(s.availability_ci95.has_value());
  EXPECT_EQ(s.availability_ci95->low, ci->low);
  EXPECT_EQ(s.availability_ci95->high, ci->high);
}

// Correlated frames: 20 segments of 10 frames 5 m apart (segment s starts at 50 s m, cut at
// 49.9 m so that no frame sits on a boundary), frame j of segment s a success when
// (53 (10 s + j)) mod 97 < 40 + 3 s. Equal segments make the share
// the mean of the segment shares, so the segment bootstrap is the ordinary bootstrap of those 20
// shares, which SciPy computes.
TEST(StreetSegmentsTest, ShareOfSegmentsAgreesWithScipyOnSegmentShares) {
  std::vector<QueryResult> results;
  for (int s = 0; s < 20; ++s)
    for (int j = 0; j < 10; ++j) {
      const bool fix = (53 * (10 * s + j)) % 97 < 40 + 3 * s;
      results.push_back(
          PlacedQuery(50.0 * s + 5.0 * j, 10 * s + j, fix ? Q::kRefined : Q::kNone, 0.1, 0.3));
    }
  const RouteSummary s = Summarize(results, {49.9});
  ASSERT_EQ(s.segments.size(), 20u);
  EXPECT_NEAR(s.availability, 0.705, 1e-12);
  // python3 -c 'import numpy as np; from scipy.stats import bootstrap;
  //   m = np.array([np.mean([1.0 if (53 * (10 * s + j)) % 97 < 40 + 3 * s else 0.0
  //     for j in range(10)]) for s in range(20)]);
  //   r = bootstrap((m,), np.mean, method="percentile", n_resamples=100000,
  //   random_state=1).confidence_interval; print("%.6f %.6f" % (r.low, r.high))'
  // prints 0.630000 0.780000 (random_state 2 and 3: the same). The segment shares (0.5, 0.5,
  // 0.4, ..., 1.0) have plug-in sd 0.1731, so the bootstrap sd of their mean is 0.1731 / sqrt(20).
  ASSERT_TRUE(s.availability_ci95.has_value());
  EXPECT_EQ(s.availability_ci95->method, IntervalMethod::kBlockBootstrap);
  const double sd = 0.1731 / std::sqrt(20.0);
  EXPECT_NEAR(s.availability_ci95->low, 0.63, Tolerance(sd, 1.0 / 200));
  EXPECT_NEAR(s.availability_ci95->high, 0.78, Tolerance(sd, 1.0 / 200));
  // Read frame by frame (each frame its own segment) the interval is narrower: the frames of a
  // segment are alike, and the segment bootstrap counts 20 units, not 200.
  const RouteSummary frames = Summarize(results, {4.9});
  ASSERT_EQ(frames.segments.size(), 200u);
  const double frame_width = frames.availability_ci95->high - frames.availability_ci95->low;
  EXPECT_LT(frame_width, s.availability_ci95->high - s.availability_ci95->low);
}

// A share of 0 or 1: Wilson with one trial per segment. 200 frames 5 m apart, every one with a
// fix, cut at 49.9 m: 20 segments; availability 1, 20 of 20 segments; nothing misses: 0 of 20.
//   python3 -c 'from scipy.stats import binomtest as B; r = B(k, 20).proportion_ci(
//     method="wilson"); print("%.12f %.12f" % (r.low, r.high))' for k = 20 and 0 prints
//   0.838874841947 1.000000000000 and 0.000000000000 0.161125158053.
TEST(StreetSegmentsTest, ShareOfZeroOrOneIsWilsonOverSegments) {
  std::vector<QueryResult> results;
  for (int i = 0; i < 200; ++i) results.push_back(PlacedQuery(5.0 * i, i, Q::kRefined, 0.1, 0.3));
  const RouteSummary s = Summarize(results, {49.9});
  ASSERT_EQ(s.segments.size(), 20u);
  ASSERT_TRUE(s.availability_ci95.has_value());
  EXPECT_EQ(s.availability_ci95->method, IntervalMethod::kWilson);
  EXPECT_NEAR(s.availability_ci95->low, 0.838874841947, 1e-9);
  EXPECT_EQ(s.availability_ci95->high, 1.0);
  const std::optional<Interval>& none =
      s.funnel.share_ci95[static_cast<int>(FunnelStage::kRetrieval)];
  ASSERT_TRUE(none.has_value());
  EXPECT_EQ(none->low, 0.0);
  EXPECT_NEAR(none->high, 0.161125158053, 1e-9);
  EXPECT_NE(IntervalText(s.availability_ci95, 1, "%.3f").find("[0.839, 1.000] W"),
            std::string::npos);
}

// One segment: a share strictly between 0 and 1 has no interval, and neither have the error
// percentiles (a single block resamples to itself).
TEST(StreetSegmentsTest, OneSegmentGivesNoBootstrapInterval) {
  const std::vector<QueryResult> results = {PlacedQuery(0, 0, Q::kRefined, 0.1, 0.3),
                                            PlacedQuery(5, 1, Q::kNone),
                                            PlacedQuery(10, 2, Q::kRefined, 0.2, 0.3)};
  const RouteSummary s = Summarize(results);
  EXPECT_EQ(s.segments.size(), 1u);
  EXPECT_FALSE(s.availability_ci95.has_value());
  EXPECT_FALSE(s.all.median_m_ci95.has_value());
  EXPECT_NE(IntervalLegend(s).find("fewer than 20 segments"), std::string::npos);
}

TEST(StreetSegmentsTest, SegmentLengthIsValidated) {
  for (double bad : {0.0, -5.0, std::nan(""), HUGE_VAL}) {
    SummaryOptions o;
    o.segment_length_m = bad;
    EXPECT_NE(o.Validate().message().find("segment_length_m"), std::string::npos) << bad;
  }
  EXPECT_TRUE(SummaryOptions{}.Validate().ok());
}

}  // namespace
}  // namespace sightfix
