// The evaluator's metrics (client/eval/route_eval.h) against a hand-worked example, and
// summary.json against the key list of docs/design.md 7. Every expected value below is worked out
// by hand in the comments from the table of six queries.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <map>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include "client/eval/interval_stats.h"
#include "client/eval/route_eval.h"
#include "client/eval/route_report.h"
#include "indexer/base/geo.h"

namespace sightfix {
namespace {

constexpr double kLat = 44.0, kLon = -40.0, kHeading = 90.0;

// A query whose fix lies (east, north) metres from the truth, heading off by dh degrees, with a
// diagonal covariance, radius95, references at the given distances north of the truth, latency.
QueryResult Query(FixQuality quality, double east, double north, double dh, double var_e,
                  double var_n, double radius95, std::vector<double> ref_distances,
                  double latency_ms) {
  QueryResult q;
  q.ran = true;
  q.truth.position = {kLat, kLon, 0};
  q.truth.attitude.heading_deg = kHeading;
  q.latency_ms = latency_ms;
  Fix& f = q.fix;
  f.quality = quality;
  if (quality != FixQuality::kNone) {
    const GeodesicDirect p =
        GeodesicFrom(kLat, kLon, std::atan2(east, north) * 180 / M_PI, std::hypot(east, north));
    f.lat_deg = p.lat_deg, f.lon_deg = p.lon_deg;
    f.heading_deg = kHeading + dh;
    f.covariance_en = cv::Matx22d(var_e, 0, 0, var_n);
    f.radius95_m = radius95;
  }
  for (double d : ref_distances) {
    ReferenceUse u;
    const GeodesicDirect p = GeodesicFrom(kLat, kLon, 0, d);
    u.lat_deg = p.lat_deg, u.lon_deg = p.lon_deg;
    f.references.push_back(u);
  }
  ScoreQuery(&q);
  return q;
}

// q with its truth, fix and candidates moved north_m metres north (offsets kept), at time t_s,
// scored again: the same errors at another place of a north-bound street.
QueryResult MoveNorth(QueryResult q, double north_m, double t_s) {
  const GeodesicDirect truth = GeodesicFrom(kLat, kLon, 0, north_m);
  const auto move = [&](double* lat, double* lon) {
    const GeodesicInverse off = GeodesicBetween(kLat, kLon, *lat, *lon);
    const GeodesicDirect p =
        GeodesicFrom(truth.lat_deg, truth.lon_deg, off.azimuth1_deg, off.distance_m);
    *lat = p.lat_deg, *lon = p.lon_deg;
  };
  if (q.fix.quality != FixQuality::kNone) move(&q.fix.lat_deg, &q.fix.lon_deg);
  for (ReferenceUse& u : q.fix.references) move(&u.lat_deg, &u.lon_deg);
  q.truth.position = {truth.lat_deg, truth.lon_deg, 0};
  q.truth.timestamp_s = t_s;
  q.first_hit_rank = -1;
  ScoreQuery(&q);
  return q;
}

std::vector<QueryResult> HandTable() {
  using Q = FixQuality;
  return {
      // 1: refined, 0.1 m east, 1 deg; NEES 0.1^2/0.01 = 1; 0.1 <= 0.3 covered; hit at rank 1.
      Query(Q::kRefined, 0.1, 0, 1, 0.01, 0.01, 0.3, {10}, 100),
      // 2: refined, 0.4 m north, 3 deg; NEES 0.16/0.16 = 1; covered (0.5); first hit rank 2.
      Query(Q::kRefined, 0, 0.4, 3, 0.04, 0.16, 0.5, {40, 5}, 200),
      // 3: refined, 3 m west, 8 deg; NEES 9/1 = 9; not covered (2.5); first hit rank 7.
      Query(Q::kRefined, -3, 0, 8, 1, 1, 2.5, {40, 40, 40, 40, 40, 40, 20}, 300),
      // 4: coarse, 20 m north, 30 deg; NEES 400/400 = 1; covered (50); no hit within 25 m.
      Query(Q::kCoarse, 0, 20, 30, 400, 400, 50, {60}, 400),
      // 5: no fix; no candidates.
      Query(Q::kNone, 0, 0, 0, 0, 0, 0, {}, 500),
      // 6: refined but 8 m east (wrong), 0 deg; NEES 64/1 = 64; not covered (2.4); hit rank 1.
      Query(Q::kRefined, 8, 0, 0, 1, 1, 2.4, {3}, 600),
  };
}

TEST(RouteMetricsTest, HandWorkedExample) {
  std::vector<QueryResult> table = HandTable();
  QueryResult not_run;  // a query an interrupted replay never started: not counted
  table.push_back(not_run);
  const RouteSummary s = Summarize(table);
  EXPECT_EQ(s.queries, 6);
  EXPECT_EQ(s.fixes, 5);
  EXPECT_EQ(s.refined, 4);
  EXPECT_EQ(s.coarse, 1);
  EXPECT_EQ(s.none, 1);
  EXPECT_DOUBLE_EQ(s.availability, 5.0 / 6);
  // Recall@N within 25 m (Arandjelovic et al. 2016): first hits at ranks 1, 2, 7, -, -, 1.
  EXPECT_DOUBLE_EQ(s.recall_at_1, 2.0 / 6);
  EXPECT_DOUBLE_EQ(s.recall_at_5, 3.0 / 6);
  EXPECT_DOUBLE_EQ(s.recall_at_10, 4.0 / 6);
  // All fixes' errors sorted: 0.1, 0.4, 3, 8, 20. Nearest rank: median = ceil(2.5) = 3rd = 3;
  // p90 = ceil(4.5) = 5th = 20; p95 = 5th = 20; max 20.
  EXPECT_NEAR(s.all.median_m, 3, 1e-6);
  EXPECT_NEAR(s.all.p90_m, 20, 1e-6);
  EXPECT_NEAR(s.all.p95_m, 20, 1e-6);
  EXPECT_NEAR(s.all.max_m, 20, 1e-6);
  // Refined errors sorted: 0.1, 0.4, 3, 8: median = 2nd = 0.4; p90 = ceil(3.6) = 4th = 8.
  EXPECT_NEAR(s.median_error_m, 0.4, 1e-6);
  EXPECT_NEAR(s.p90_error_m, 8, 1e-6);
  EXPECT_NEAR(s.p95_error_m, 8, 1e-6);
  EXPECT_EQ(s.wrong_refined, 1);
  // Heading errors of all fixes sorted 0, 1, 3, 8, 30: median 3; refined 0, 1, 3, 8: median 1.
  EXPECT_NEAR(s.all.median_heading_deg, 3, 1e-9);
  EXPECT_NEAR(s.median_heading_error_deg, 1, 1e-9);
  // Pose bins over all six queries (Sattler et al. 2018): (0.25 m, 2 deg) query 1; (0.5 m,
  // 5 deg) queries 1, 2; (5 m, 10 deg) queries 1, 2, 3.
  EXPECT_DOUBLE_EQ(s.within_0_25m_2deg, 1.0 / 6);
  EXPECT_DOUBLE_EQ(s.within_0_5m_5deg, 2.0 / 6);
  EXPECT_DOUBLE_EQ(s.within_5m_10deg, 3.0 / 6);
  // Coverage: fixes 1, 2, 4 covered of 5; refined 1, 2 of 4.
  EXPECT_DOUBLE_EQ(s.all.radius95_coverage, 3.0 / 5);
  EXPECT_DOUBLE_EQ(s.radius95_coverage, 2.0 / 4);
  // NEES: all fixes (1 + 1 + 9 + 1 + 64) / 5 = 15.2; refined (1 + 1 + 9 + 64) / 4 = 18.75.
  EXPECT_NEAR(s.all.nees_mean, 15.2, 1e-6);
  EXPECT_NEAR(s.nees_mean, 18.75, 1e-6);
  // Latency 100..600 ms: p50 = 3rd = 300; p95 = ceil(5.7) = 6th = 600; p99 = 600.
  EXPECT_DOUBLE_EQ(s.latency_ms_p50, 300);
  EXPECT_DOUBLE_EQ(s.latency_ms_p95, 600);
  EXPECT_DOUBLE_EQ(s.latency_ms_p99, 600);
}

TEST(RouteMetricsTest, PercentileIsNearestRank) {
  // Nearest-rank definition (common practice): the ceil(q n)-th smallest.
  EXPECT_DOUBLE_EQ(Percentile({15, 20, 35, 40, 50}, 0.3), 20);
  EXPECT_DOUBLE_EQ(Percentile({15, 20, 35, 40, 50}, 0.4), 20);
  EXPECT_DOUBLE_EQ(Percentile({15, 20, 35, 40, 50}, 0.5), 35);
  EXPECT_DOUBLE_EQ(Percentile({15, 20, 35, 40, 50}, 1.0), 50);
  EXPECT_DOUBLE_EQ(Percentile({}, 0.5), 0);
}

TEST(RouteMetricsTest, SummaryJsonHasEveryKeyWithSharesInRange) {
  RouteReport r;
  r.results = HandTable();
  r.summary = Summarize(r.results);
  r.map_version = 3;
  const nlohmann::json j = SummaryJson(r);
  for (const char* key : {"queries",           "fixes",
                          "availability",      "recall_at_1_25m",
                          "recall_at_5_25m",   "recall_at_10_25m",
                          "median_error_m",    "p90_error_m",
                          "p95_error_m",       "max_error_m",
                          "wrong_refined",     "median_heading_error_deg",
                          "within_0_25m_2deg", "within_0_5m_5deg",
                          "within_5m_10deg",   "radius95_coverage",
                          "nees_mean",         "latency_ms_p50",
                          "latency_ms_p95",    "latency_ms_p99",
                          "spoofing",          "map_version",
                          "partial",           "wrong_refined_share",
                          "integrity",         "street_segments"})
    EXPECT_TRUE(j.contains(key)) << key;
  for (const char* key : {"segments_true", "segments_flagged", "detection_delay_s", "false_alarms"})
    EXPECT_TRUE(j["spoofing"].contains(key)) << key;
  for (const char* share :
       {"availability", "recall_at_1_25m", "recall_at_5_25m", "recall_at_10_25m",
        "within_0_25m_2deg", "within_0_5m_5deg", "within_5m_10deg", "radius95_coverage"}) {
    EXPECT_GE(j[share].get<double>(), 0) << share;
    EXPECT_LE(j[share].get<double>(), 1) << share;
  }
  EXPECT_EQ(j["queries"], 6);
  EXPECT_EQ(j["fixes"], 5);
  EXPECT_NEAR(j["median_error_m"].get<double>(), 3, 1e-6);
  EXPECT_EQ(j["map_version"], 3);
  EXPECT_EQ(j["partial"], false);
}

TEST(RouteMetricsTest, CompareShowsDeltas) {
  const nlohmann::json a = {{"availability", 0.5}, {"spoofing", {{"false_alarms", 1}}}};
  const nlohmann::json b = {{"availability", 0.75}, {"spoofing", {{"false_alarms", 0}}}};
  const std::string t = CompareSummaries(a, b, "A", "B");
  EXPECT_NE(t.find("availability"), std::string::npos);
  EXPECT_NE(t.find("+0.2500"), std::string::npos) << t;
  EXPECT_NE(t.find("spoofing.false_alarms"), std::string::npos) << t;
  EXPECT_NE(t.find("-1.0000"), std::string::npos) << t;
}

TEST(RouteMetricsTest, TextOutputsNameThePoseBins) {
  RouteReport r;
  r.results = HandTable();
  r.summary = Summarize(r.results);
  // The shares of the hand-worked example above: 1/6, 2/6, 3/6.
  const std::string line = SummaryLine(r.summary);
  EXPECT_NE(line.find("pose fine (0.25 m, 2 deg) 0.167, medium (0.5 m, 5 deg) 0.333, "
                      "rough (5 m, 10 deg) 0.500;"),
            std::string::npos)
      << line;
  const std::string html = ReportHtml(r);
  // The hand table lies at one place: one street segment, which cannot give an interval for a
  // share strictly between 0 and 1, nor for a percentile ("[-]").
  EXPECT_NE(html.find("<th>pose fine (0.25 m, 2 deg)</th><td>0.167 [-]</td>"), std::string::npos);
  EXPECT_NE(html.find("<th>pose medium (0.5 m, 5 deg)</th><td>0.333 [-]</td>"), std::string::npos);
  EXPECT_NE(html.find("<th>pose rough (5 m, 10 deg)</th><td>0.500 [-]</td>"), std::string::npos);
  EXPECT_NE(html.find("<td>0.833 [-]</td>"), std::string::npos);  // availability
  EXPECT_NE(html.find("<td>0.333 [-] / 0.500 [-] / 0.667 [-]</td>"), std::string::npos);
  EXPECT_NE(html.find("<td>20.000 / 20.000 [-] / 20.000</td>"), std::string::npos);
  EXPECT_NE(html.find("over 1 street segments of 50 m driven"), std::string::npos);
  EXPECT_NE(html.find("seg: block bootstrap of the segments"), std::string::npos);
  EXPECT_NE(html.find("W: Wilson score with one trial per segment"), std::string::npos);
  EXPECT_NE(html.find("fewer than 20 segments"), std::string::npos);
  const nlohmann::json j = SummaryJson(r);
  EXPECT_TRUE(j["within_0_25m_2deg_ci95"].is_null());
  EXPECT_TRUE(j["within_0_25m_2deg_ci95_method"].is_null());
  const nlohmann::json a = {{"within_0_5m_5deg", 0.25}}, b = {{"within_0_5m_5deg", 0.5}};
  const std::string t = CompareSummaries(a, b, "A", "B");
  EXPECT_NE(t.find("within_0_5m_5deg (pose medium)"), std::string::npos) << t;
  EXPECT_NE(t.find("+0.2500"), std::string::npos) << t;
}

TEST(RouteMetricsTest, GeoJsonHasTrackFixesErrorsAndAlarms) {
  RouteReport r;
  r.results = HandTable();
  for (size_t i = 0; i < r.results.size(); ++i) r.results[i].truth.timestamp_s = 100.0 + i;
  r.summary = Summarize(r.results);
  r.spoof_truth = {SpoofedSpan{{101.5, 102.5}, 3, 0}};
  r.spoofing = SpoofingRun{};
  MonitorStep raised;
  raised.time_s = 102, raised.alarm = raised.alarm_raised = true, raised.nis = 40;
  MonitorStep held = raised;
  held.time_s = 103, held.alarm_raised = false;  // still in alarm: no new feature
  r.spoofing->steps = {raised, held};
  const nlohmann::json g = RouteGeoJson(r);
  std::map<std::string, int> kinds;
  for (const nlohmann::json& f : g["features"]) ++kinds[f["properties"]["kind"]];
  // One track; a point and an error segment for each of the five fixes; one alarm.
  EXPECT_EQ(kinds,
            (std::map<std::string, int>{
                {"truth_track", 1}, {"fix", 5}, {"error_segment", 5}, {"spoofing_alarm", 1}}));
  const nlohmann::json& alarm = g["features"].back();
  EXPECT_EQ(alarm["geometry"]["coordinates"], (nlohmann::json{kLon, kLat}));
  EXPECT_EQ(alarm["properties"]["during_true_spoofing"], true);
  EXPECT_EQ(g["features"][0]["geometry"]["coordinates"].size(), 6u);
  const nlohmann::json& segment = g["features"][2];
  EXPECT_EQ(segment["geometry"]["type"], "LineString");
  EXPECT_EQ(segment["geometry"]["coordinates"][0], (nlohmann::json{kLon, kLat}));
}

void ExpectInterval(const std::optional<Interval>& ci, double low, double high, double tol) {
  ASSERT_TRUE(ci.has_value());
  EXPECT_NEAR(ci->low, low, tol);
  EXPECT_NEAR(ci->high, high, tol);
}

// The hand table's 95 % intervals. At one place it is one street segment: no share strictly
// between 0 and 1 and no percentile gets an interval; the shares of 0 (the pose and failed-call
// funnel stages) get Wilson's over one trial, from SciPy 1.10.1 (/usr/bin/python3):
//   python3 -c 'from scipy.stats import binomtest as B; r = B(0, 1).proportion_ci(
//     method="wilson"); print("%.12f %.12f" % (r.low, r.high))' prints 0.000000000000
//     0.793450685623.
TEST(RouteMetricsTest, HandTableIntervalsAtOnePlace) {
  const RouteSummary s = Summarize(HandTable());
  EXPECT_EQ(s.segments.size(), 1u);
  EXPECT_FALSE(s.refined_share_ci95 || s.availability_ci95 || s.recall_at_5_ci95);
  EXPECT_FALSE(s.radius95_coverage_ci95 || s.all.radius95_coverage_ci95);
  EXPECT_FALSE(s.median_error_m_ci95 || s.p95_error_m_ci95 || s.all.median_m_ci95);
  const std::optional<Interval>& pose = s.funnel.share_ci95[static_cast<int>(FunnelStage::kPose)];
  ExpectInterval(pose, 0, 0.793450685623, 1e-9);
  EXPECT_EQ(pose->method, IntervalMethod::kWilson);
  // No queries: no intervals.
  const RouteSummary none = Summarize({});
  EXPECT_FALSE(none.refined_share_ci95 || none.availability_ci95 || none.median_error_m_ci95);
  EXPECT_NE(SummaryLine(none).find("refined 0.0 % [-]"), std::string::npos) << SummaryLine(none);

  RouteReport r;
  r.results = HandTable();
  r.summary = s;
  const nlohmann::json j = SummaryJson(r);
  EXPECT_TRUE(j["refined_share_ci95"].is_null());
  EXPECT_NEAR(j["funnel"]["pose"]["share_ci95"][1].get<double>(), 0.793450685623, 1e-9);
  EXPECT_EQ(j["funnel"]["pose"]["share_ci95_method"], "W");
  // The keys the intervals stand beside keep their values.
  EXPECT_DOUBLE_EQ(j["refined_share"].get<double>(), 4.0 / 6);
  EXPECT_NEAR(j["median_error_m"].get<double>(), 3, 1e-6);
  const std::string line = SummaryLine(s);
  EXPECT_NE(line.find("refined 66.7 % [-] (coarse 1, none 1), availability 83.3 % [-]; error "
                      "median 0.400 m [-]"),
            std::string::npos)
      << line;
}

// The hand table spread along a street, 60 m between queries: six segments of one query each,
// so each share's interval is the bootstrap of its six 0/1 outcomes, one block each; and the
// error percentiles the bootstrap of the fixes' errors, one block each.
TEST(RouteMetricsTest, HandTableIntervalsSpreadOverSegments) {
  std::vector<QueryResult> table = HandTable();
  for (size_t i = 0; i < table.size(); ++i) table[i] = MoveNorth(table[i], 60.0 * i, i);
  const RouteSummary s = Summarize(table);
  ASSERT_EQ(s.segments.size(), 6u);
  const auto share = [](std::vector<double> outcomes) {
    return BlockBootstrapInterval(ConsecutiveBlocks(outcomes, 1), [](const std::vector<double>& v) {
      double sum = 0;
      for (double x : v) sum += x;
      return sum / static_cast<double>(v.size());
    });
  };
  const auto expect_same = [](const std::optional<Interval>& got, const Result<Interval>& want) {
    ASSERT_TRUE(got.has_value() && want.ok());
    EXPECT_EQ(got->low, want->low);
    EXPECT_EQ(got->high, want->high);
    EXPECT_EQ(got->method, IntervalMethod::kBlockBootstrap);
  };
  expect_same(s.refined_share_ci95, share({1, 1, 1, 0, 0, 1}));
  expect_same(s.availability_ci95, share({1, 1, 1, 1, 0, 1}));
  expect_same(s.recall_at_5_ci95, share({1, 1, 0, 0, 0, 1}));
  expect_same(s.all.radius95_coverage_ci95, share({1, 1, 0, 1, 0}));  // over the five fixes
  expect_same(s.wrong_refined_share_ci95, share({0, 0, 0, 1}));       // over the refined four
  const Result<Interval> median =
      BlockBootstrapInterval(ConsecutiveBlocks({0.1, 0.4, 3, 20, 8}, 1),
                             [](const std::vector<double>& v) { return Percentile(v, 0.5); });
  ASSERT_TRUE(median.ok() && s.all.median_m_ci95.has_value());
  EXPECT_NEAR(s.all.median_m_ci95->low, median->low, 1e-6);
  EXPECT_NEAR(s.all.median_m_ci95->high, median->high, 1e-6);
  EXPECT_NE(IntervalText(s.availability_ci95, 1, "%.3f").find("] seg"), std::string::npos);
}

// The error intervals' blocks are street segments (not runs of fixes): 25 queries 5 m apart, cut
// at 49.9 m (no query on a boundary), with every fourth one (3, 7, 11, ...) unanswered give the
// blocks below, and the summary's intervals are the block bootstrap's over exactly those blocks.
TEST(RouteMetricsTest, ErrorIntervalsResampleStreetSegments) {
  std::vector<QueryResult> table;
  for (int i = 0; i < 25; ++i)
    table.push_back(i % 4 == 3 ? Query(FixQuality::kNone, 0, 0, 0, 0, 0, 0, {}, 100)
                               : Query(FixQuality::kRefined, 0.05 + 0.1 * (i % 7) + 0.3 * (i / 10),
                                       0, 0, 0.01, 0.01, 0.3, {}, 100));
  for (int i = 0; i < 25; ++i) table[i] = MoveNorth(table[i], 5.0 * i, i);
  const std::vector<std::vector<int>> block_queries = {
      {0, 1, 2, 4, 5, 6, 8, 9}, {10, 12, 13, 14, 16, 17, 18}, {20, 21, 22, 24}};
  std::vector<std::vector<double>> blocks;
  for (const std::vector<int>& queries : block_queries) {
    blocks.emplace_back();
    for (int i : queries) blocks.back().push_back(table[i].error_m);
  }
  const RouteSummary s = Summarize(table, {49.9});
  for (double q : {0.5, 0.95}) {
    SCOPED_TRACE(q);
    const Result<Interval> expected = BlockBootstrapInterval(
        blocks, [q](const std::vector<double>& v) { return Percentile(v, q); });
    ASSERT_TRUE(expected.ok());
    const std::optional<Interval>& got = q == 0.5 ? s.median_error_m_ci95 : s.p95_error_m_ci95;
    ExpectInterval(got, expected->low, expected->high, 0);
    EXPECT_LT(got->low, got->high);  // three blocks that differ: a real interval
  }
}

// The cells of column `name` of a CSV text without quoting, one per row after the header.
std::vector<std::string> CsvColumn(const std::string& csv, const std::string& name) {
  std::istringstream in(csv);
  std::string line;
  std::vector<std::vector<std::string>> rows;
  while (std::getline(in, line)) {
    rows.emplace_back();
    std::istringstream cells(line);
    for (std::string cell; std::getline(cells, cell, ',');) rows.back().push_back(cell);
  }
  std::vector<std::string> out;
  if (rows.empty()) return out;
  const auto it = std::find(rows[0].begin(), rows[0].end(), name);
  if (it == rows[0].end()) return out;
  const size_t col = static_cast<size_t>(it - rows[0].begin());
  for (size_t i = 1; i < rows.size(); ++i) out.push_back(col < rows[i].size() ? rows[i][col] : "");
  return out;
}

// A query that ran with the given quality and candidates at these distances north of the truth,
// verified where `verified` says so (same length).
QueryResult FunnelQuery(FixQuality quality, std::vector<double> ref_distances,
                        std::vector<bool> verified) {
  QueryResult q = Query(quality, 0.1, 0, 0, 0.01, 0.01, 0.3, ref_distances, 100);
  for (size_t i = 0; i < verified.size(); ++i) q.fix.references[i].verified = verified[i];
  return q;
}

TEST(RouteMetricsTest, FunnelStagesOfHandMadeQueries) {
  using Q = FixQuality;
  using S = FunnelStage;
  // No candidate within 25 m (60 m, or none at all): retrieval, whatever the quality below refined.
  EXPECT_EQ(StageOf(FunnelQuery(Q::kNone, {60}, {true})), S::kRetrieval);
  EXPECT_EQ(StageOf(FunnelQuery(Q::kCoarse, {}, {})), S::kRetrieval);
  EXPECT_EQ(StageOf(FunnelQuery(Q::kCoarse, {30, 40}, {true, true})), S::kRetrieval);
  // A candidate within 25 m (the second, at 24.9 m) and nothing verified.
  EXPECT_EQ(StageOf(FunnelQuery(Q::kNone, {60, 24.9}, {false, false})), S::kVerification);
  EXPECT_EQ(StageOf(FunnelQuery(Q::kCoarse, {10}, {false})), S::kVerification);
  // Something verified (even the far candidate only), not refined: the pose stage.
  EXPECT_EQ(StageOf(FunnelQuery(Q::kCoarse, {10}, {true})), S::kPose);
  EXPECT_EQ(StageOf(FunnelQuery(Q::kNone, {10, 60}, {false, true})), S::kPose);
  // Refined is refined, even with no candidate within 25 m.
  EXPECT_EQ(StageOf(FunnelQuery(Q::kRefined, {10}, {true})), S::kRefined);
  EXPECT_EQ(StageOf(FunnelQuery(Q::kRefined, {60}, {true})), S::kRefined);
  // A failed call has no answer to read, whatever the fix holds.
  QueryResult failed = FunnelQuery(Q::kNone, {10}, {true});
  failed.error = "UNAVAILABLE: no server";
  EXPECT_EQ(StageOf(failed), S::kFailedCall);
  EXPECT_STREQ(FunnelStageName(S::kRetrieval), "retrieval");
  EXPECT_STREQ(FunnelStageName(S::kFailedCall), "failed_call");
}

// The hand table's funnel: queries 1, 2, 3, 6 refined; 4 (coarse, candidate 60 m off) and 5 (no
// candidate) stopped at retrieval. One street segment: shares of 0 get Wilson's 0 of 1 (SciPy as
// in HandTableIntervalsAtOnePlace: 0 0.793450685623), the others no interval.
TEST(RouteMetricsTest, HandTableFunnel) {
  RouteReport r;
  r.results = HandTable();
  r.results.push_back(FunnelQuery(FixQuality::kCoarse, {10}, {false}));  // 7: verification
  r.results.push_back(QueryResult{});                                    // never ran: not counted
  r.summary = Summarize(r.results);
  const FunnelCounts& f = r.summary.funnel;
  EXPECT_EQ(f.count, (std::array<int, kFunnelStageCount>{2, 1, 0, 4, 0}));
  EXPECT_DOUBLE_EQ(f.share[0], 2.0 / 7);
  EXPECT_DOUBLE_EQ(f.share[3], 4.0 / 7);
  r.results.pop_back(), r.results.pop_back();
  r.summary = Summarize(r.results);
  const FunnelCounts& g = r.summary.funnel;
  EXPECT_FALSE(g.share_ci95[0].has_value());
  ExpectInterval(g.share_ci95[2], 0, 0.793450685623, 1e-9);
  EXPECT_FALSE(g.share_ci95[3].has_value());
  const nlohmann::json j = SummaryJson(r)["funnel"];
  EXPECT_EQ(j["retrieval"]["queries"], 2);
  EXPECT_EQ(j["verification"]["queries"], 0);
  EXPECT_EQ(j["refined"]["queries"], 4);
  EXPECT_EQ(j["failed_call"]["queries"], 0);
  EXPECT_TRUE(j["retrieval"]["share_ci95"].is_null());
  EXPECT_NEAR(j["pose"]["share_ci95"][1].get<double>(), 0.793450685623, 1e-9);
  // fixes.csv: a stage column, one value per row; rows in time order (all at time 0: table order).
  const std::string csv = FixesCsv(r);
  EXPECT_NE(csv.find(",latency_ms,along_track_m,cross_track_m,segment,driven_m,misleading,hpl_m,"
                     "lateral_pl_m,longitudinal_pl_m,integrity,stage,reason\n"),
            std::string::npos)
      << csv.substr(0, csv.find('\n') + 1);
  EXPECT_EQ(CsvColumn(csv, "stage"),
            (std::vector<std::string>{"refined", "refined", "refined", "retrieval", "retrieval",
                                      "refined"}));
  EXPECT_NE(FunnelLine(g).find("retrieval 2 (33.3 % [-]), verification 0 (0.0 % [0.0, 79.3] "
                               "W), pose 0"),
            std::string::npos)
      << FunnelLine(g);
  const std::string html = ReportHtml(r);
  EXPECT_NE(html.find("<th>retrieval</th><td>2</td><td>33.3 % [-]</td>"), std::string::npos);
  EXPECT_NE(html.find("<th>verification</th><td>0</td><td>0.0 % [0.0, 79.3] W</td>"),
            std::string::npos);
}

// A refined fix `east`, `north` metres from a truth whose drive.csv heading is heading_deg.
QueryResult HeadedQuery(double east, double north, double heading_deg) {
  QueryResult q = Query(FixQuality::kRefined, east, north, 0, 0.01, 0.01, 0.3, {}, 100);
  q.truth.attitude.heading_deg = heading_deg;
  ScoreQuery(&q);
  return q;
}

// Along-track is the error's part along the truth's heading (positive ahead), cross-track its
// part to the right of it (positive right). Worked by hand for a fix 3 m east and 4 m north:
//   heading 0 (north): along = 4, cross = 3;
//   heading 90 (east): along = 3, cross = -4 (north is left of an eastbound vehicle);
//   heading 30: along = 3 sin 30 + 4 cos 30 = 1.5 + 3.4641016 = 4.9641016,
//               cross = 3 cos 30 - 4 sin 30 = 2.5980762 - 2 = 0.5980762;
// and for a fix 2 m east, 1 m north of a southbound truth (heading 180): along = -1 (behind),
// cross = -2 (east is left of a southbound vehicle).
TEST(RouteMetricsTest, AlongAndCrossTrackAtKnownOffsets) {
  const struct {
    double east, north, heading, along, cross;
  } cases[] = {
      {3, 4, 0, 4, 3}, {3, 4, 90, 3, -4}, {3, 4, 30, 4.9641016, 0.5980762}, {2, 1, 180, -1, -2}};
  std::vector<QueryResult> table;
  for (const auto& c : cases) {
    table.push_back(HeadedQuery(c.east, c.north, c.heading));
    SCOPED_TRACE(c.heading);
    EXPECT_NEAR(table.back().along_track_m, c.along, 1e-6);
    EXPECT_NEAR(table.back().cross_track_m, c.cross, 1e-6);
    EXPECT_NEAR(std::hypot(c.along, c.cross), table.back().error_m, 1e-6);
  }
  table.push_back(Query(FixQuality::kNone, 0, 0, 0, 0, 0, 0, {}, 100));  // no fix: not counted
  // |along| 4, 3, 4.964, 1 -> sorted 1, 3, 4, 4.964: nearest-rank median = 2nd = 3;
  // |cross| 3, 4, 0.598, 2 -> sorted 0.598, 2, 3, 4: median = 2nd = 2. The five queries lie at
  // one place, one street segment, so the medians have no bootstrap interval.
  RouteReport r;
  r.results = table;
  r.summary = Summarize(table);
  const RouteSummary& s = r.summary;
  EXPECT_NEAR(s.median_abs_along_track_m, 3, 1e-6);
  EXPECT_NEAR(s.median_abs_cross_track_m, 2, 1e-6);
  EXPECT_NEAR(s.all.median_abs_along_m, 3, 1e-6);
  EXPECT_FALSE(s.median_abs_along_track_m_ci95.has_value());
  EXPECT_FALSE(s.all.median_abs_cross_m_ci95.has_value());
  const nlohmann::json j = SummaryJson(r);
  EXPECT_NEAR(j["median_abs_along_track_m"].get<double>(), 3, 1e-6);
  EXPECT_NEAR(j["median_abs_cross_track_m"].get<double>(), 2, 1e-6);
  EXPECT_NEAR(j["refined_only"]["median_abs_cross_track_m"].get<double>(), 2, 1e-6);
  EXPECT_TRUE(j["median_abs_along_track_m_ci95"].is_null());
  const std::string csv = FixesCsv(r);
  EXPECT_EQ(CsvColumn(csv, "along_track_m"),
            (std::vector<std::string>{"4.0000", "3.0000", "4.9641", "-1.0000", ""}));
  EXPECT_EQ(CsvColumn(csv, "cross_track_m"),
            (std::vector<std::string>{"3.0000", "-4.0000", "0.5981", "-2.0000", ""}));
}

// The medians' intervals resample street segments, as the error's do: 25 queries 5 m apart (cut
// at 49.9 m: 10, 10 and 5 queries) heading 30 deg with fixes (0.1 i mod 0.7 + 0.2, 0.05 (i mod 5))
// m east/north of the truth, split by hand (along = e sin 30 + n cos 30, cross = e cos 30 - n sin
// 30), give the blocks below.
TEST(RouteMetricsTest, AlongCrossIntervalsResampleStreetSegments) {
  std::vector<QueryResult> table;
  std::vector<std::vector<double>> along(3), cross(3);
  const double h = 30 * M_PI / 180;
  for (int i = 0; i < 25; ++i) {
    const double e = 0.1 * (i % 7) + 0.2, n = 0.05 * (i % 5);
    table.push_back(MoveNorth(HeadedQuery(e, n, 30), 5.0 * i, i));
    along[i / 10].push_back(std::fabs(e * std::sin(h) + n * std::cos(h)));
    cross[i / 10].push_back(std::fabs(e * std::cos(h) - n * std::sin(h)));
  }
  const RouteSummary s = Summarize(table, {49.9});
  const auto median = [](const std::vector<double>& v) { return Percentile(v, 0.5); };
  for (const auto& [blocks, got] : {std::make_pair(along, s.median_abs_along_track_m_ci95),
                                    std::make_pair(cross, s.median_abs_cross_track_m_ci95)}) {
    const Result<Interval> expected = BlockBootstrapInterval(blocks, median);
    ASSERT_TRUE(expected.ok());
    ExpectInterval(got, expected->low, expected->high, 1e-6);
    EXPECT_LT(got->low, got->high);
  }
}

}  // namespace
}  // namespace sightfix
