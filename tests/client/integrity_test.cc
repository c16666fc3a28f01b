// Integrity counts (client/eval/integrity.h) on a constructed drive worked by hand, and the
// Clopper-Pearson bound they report against SciPy 1.10.1 (/usr/bin/python3): the one-sided 95 %
// upper bound equals the upper end of the two-sided 90 % exact interval, which binomtest prints:
//   python3 -c 'from scipy.stats import binomtest as B; print("%.12f" % B(k, n).proportion_ci(
//     confidence_level=0.9, method="exact").high)'
// (and B(k, n, alternative="less").proportion_ci(method="exact").high prints the same).
#include "client/eval/integrity.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <string>
#include <vector>

#include "client/eval/interval_stats.h"
#include "client/eval/route_report.h"
#include "tests/client/placed_query.h"

namespace sightfix {
namespace {

using Q = FixQuality;

// 20 frames 10 m apart, cut at 49.9 m (no frame on a boundary): segments of frames 0-4, 5-9, 10-14,
// 15-19. Refined fixes state radius95 0.3 m; errors over it mislead, over 0.9 m are confidently
// wrong.
//   seg 0: ok, ok, M (0.5), M (0.4), ok
//   seg 1: ok, no fix, ok, ok, ok
//   seg 2: M (0.6), no fix, M (1.0: also > 3 x 0.3), ok, failed call (a fix, but the call failed)
//   seg 3: coarse 20 m of radius 50 (ok), coarse 60 m of 50 (M), ok, ok, M (0.31)
std::vector<QueryResult> ConstructedDrive() {
  const double ok = 0.1, r = 0.3;
  const struct {
    Q quality;
    double error_m, radius_m;
  } frames[] = {
      {Q::kRefined, ok, r},  {Q::kRefined, ok, r}, {Q::kRefined, 0.5, r}, {Q::kRefined, 0.4, r},
      {Q::kRefined, ok, r},  {Q::kRefined, ok, r}, {Q::kNone, 0, 0},      {Q::kRefined, ok, r},
      {Q::kRefined, ok, r},  {Q::kRefined, ok, r}, {Q::kRefined, 0.6, r}, {Q::kNone, 0, 0},
      {Q::kRefined, 1.0, r}, {Q::kRefined, ok, r}, {Q::kRefined, 2.0, r}, {Q::kCoarse, 20, 50},
      {Q::kCoarse, 60, 50},  {Q::kRefined, ok, r}, {Q::kRefined, ok, r},  {Q::kRefined, 0.31, r}};
  std::vector<QueryResult> out;
  for (int i = 0; i < 20; ++i)
    out.push_back(
        PlacedQuery(10.0 * i + 2, i, frames[i].quality, frames[i].error_m, frames[i].radius_m));
  out[14].error = "UNAVAILABLE: no server";
  return out;
}

TEST(IntegrityTest, UsableAndMisleading) {
  const std::vector<QueryResult> d = ConstructedDrive();
  EXPECT_TRUE(IsUsableFix(d[0]));
  EXPECT_FALSE(IsUsableFix(d[6]));   // no fix
  EXPECT_FALSE(IsUsableFix(d[14]));  // failed call
  EXPECT_TRUE(IsUsableFix(d[15]));   // coarse, with a radius
  EXPECT_TRUE(IsMisleading(d[2], 1));
  EXPECT_FALSE(IsMisleading(d[2], 3));
  EXPECT_TRUE(IsMisleading(d[12], 3));
  EXPECT_FALSE(IsMisleading(d[15], 1));
  EXPECT_TRUE(IsMisleading(d[16], 1));
  QueryResult unbounded = d[0];
  unbounded.fix.radius95_m = 0;  // states no bound: not usable, never misleading
  EXPECT_FALSE(IsUsableFix(unbounded));
  EXPECT_FALSE(IsMisleading(unbounded, 1));
}

TEST(IntegrityTest, CountsAndEpisodesOfAConstructedDrive) {
  std::vector<QueryResult> d = ConstructedDrive();
  for (bool reversed : {false, true}) {
    SCOPED_TRACE(reversed ? "results in reverse order" : "results in time order");
    if (reversed) std::reverse(d.begin(), d.end());  // episodes follow time, not the list
    const StreetCut cut = CutStreetSegments(d, 49.9);
    const IntegrityCounts m = CountIntegrity(d, cut, kMisleadingFactor);
    // Usable: 20 minus 2 without a fix minus the failed call = 17. Misleading: frames 2, 3, 10,
    // 12, 16, 19 = 6. Episodes: {2, 3}, {10, 12} (frame 11 has no fix: neither ends nor
    // extends), {16}, {19} = 4, longest 2. Segments with a usable fix: 4; holding a misleading
    // one: 0, 2, 3.
    EXPECT_EQ(m.usable_fixes, 17);
    EXPECT_EQ(m.misleading_fixes, 6);
    EXPECT_DOUBLE_EQ(m.fix_share, 6.0 / 17);
    EXPECT_EQ(m.episodes, 4);
    EXPECT_EQ(m.longest_episode, 2);
    EXPECT_EQ(m.segments, 4);
    EXPECT_EQ(m.misleading_segments, 3);
    // B(3, 4).proportion_ci(confidence_level=0.9, method="exact").high = 0.987258544901.
    ASSERT_TRUE(m.segment_share_upper95.has_value());
    EXPECT_NEAR(*m.segment_share_upper95, 0.987258544901, 1e-9);
    ASSERT_TRUE(m.fix_share_ci95.has_value());
    EXPECT_EQ(m.fix_share_ci95->method, IntervalMethod::kBlockBootstrap);
    EXPECT_LE(m.fix_share_ci95->low, m.fix_share);
    EXPECT_GE(m.fix_share_ci95->high, m.fix_share);
    // Confidently wrong (> 3 x radius95): frame 12 only; 1 episode, 1 of 4 segments.
    // B(1, 4).proportion_ci(confidence_level=0.9, method="exact").high = 0.751395374270.
    const IntegrityCounts w = CountIntegrity(d, cut, kConfidentlyWrongFactor);
    EXPECT_EQ(w.usable_fixes, 17);
    EXPECT_EQ(w.misleading_fixes, 1);
    EXPECT_EQ(w.episodes, 1);
    EXPECT_EQ(w.longest_episode, 1);
    EXPECT_EQ(w.misleading_segments, 1);
    EXPECT_NEAR(*w.segment_share_upper95, 0.751395374270, 1e-9);
  }
}

// The summary carries both bounds, and a clean drive gets the "0 of n" bound.
TEST(IntegrityTest, SummaryAndCleanDrive) {
  const RouteSummary s = Summarize(ConstructedDrive(), {49.9});
  EXPECT_EQ(s.misleading.misleading_fixes, 6);
  EXPECT_EQ(s.confidently_wrong.misleading_fixes, 1);
  EXPECT_EQ(s.confidently_wrong.bound_factor, 3);
  ASSERT_EQ(s.segments.size(), 4u);
  EXPECT_EQ(s.segments[0].misleading, 2);
  EXPECT_EQ(s.segments[2].misleading, 2);
  EXPECT_EQ(s.segments[3].misleading, 2);
  // 190 frames 5 m apart, none misleading, cut at 49.9 m: 0 of 19 segments.
  // B(0, 19).proportion_ci(confidence_level=0.9, method="exact").high = 0.145868503312, also
  // 1 - 0.05^(1/19) (the closed form for 0 of n).
  std::vector<QueryResult> clean;
  for (int i = 0; i < 190; ++i) clean.push_back(PlacedQuery(5.0 * i, i, Q::kRefined, 0.1, 0.3));
  const RouteSummary c = Summarize(clean, {49.9});
  EXPECT_EQ(c.misleading.segments, 19);
  EXPECT_EQ(c.misleading.episodes, 0);
  EXPECT_NEAR(*c.misleading.segment_share_upper95, 0.145868503312, 1e-9);
  EXPECT_NEAR(*c.misleading.segment_share_upper95, 1 - std::pow(0.05, 1.0 / 19), 1e-12);
  // The share of fixes is 0: Wilson over the 19 segments, 0 of 19.
  // B(0, 19).proportion_ci(method="wilson").high = 0.168179224053.
  ASSERT_TRUE(c.misleading.fix_share_ci95.has_value());
  EXPECT_EQ(c.misleading.fix_share_ci95->method, IntervalMethod::kWilson);
  EXPECT_NEAR(c.misleading.fix_share_ci95->high, 0.168179224053, 1e-9);
  // No usable fix: counts of 0 and no bound.
  const IntegrityCounts none = CountIntegrity(
      {PlacedQuery(0, 0, Q::kNone)}, CutStreetSegments({PlacedQuery(0, 0, Q::kNone)}, 50), 1);
  EXPECT_EQ(none.usable_fixes, 0);
  EXPECT_FALSE(none.segment_share_upper95.has_value());
}

// ClopperPearsonUpperBound (interval_stats.h) at the counts a drive of the demo town gives,
// against SciPy's exact interval as above.
TEST(IntegrityTest, ClopperPearsonBoundAgreesWithScipy) {
  const struct {
    int64_t k, n;
    double upper;
  } cases[] = {{0, 1, 0.95},
               {0, 4, 0.527129195498},
               {0, 19, 0.145868503312},
               {1, 19, 0.226374249272},
               {2, 19, 0.295802013975},
               {0, 20, 0.139108340668},
               {2, 5, 0.810744622562},
               {6, 17, 0.580294648374}};
  for (const auto& c : cases) {
    SCOPED_TRACE(std::to_string(c.k) + " of " + std::to_string(c.n));
    Result<double> got = ClopperPearsonUpperBound(c.k, c.n);
    ASSERT_TRUE(got.ok());
    EXPECT_NEAR(*got, c.upper, 1e-9);
  }
}

TEST(IntegrityTest, LineNamesCountsEpisodesAndBound) {
  const RouteSummary s = Summarize(ConstructedDrive(), {49.9});
  const std::string line = IntegrityLine(s.misleading);
  EXPECT_NE(line.find("misleading (error > radius95): 6 of 17 usable fixes, 0.353 ["),
            std::string::npos)
      << line;
  EXPECT_NE(line.find("] seg, 4 episodes (longest 2), in 3 of 4 segments, at most 0.987 of "
                      "segments (95 % CP)"),
            std::string::npos)
      << line;
  EXPECT_NE(IntegrityLine(s.confidently_wrong)
                .find("confidently wrong (error > 3 x radius95): 1 of 17 usable fixes"),
            std::string::npos);
}

// report.html shows the evidence: the error-against-bound diagram with one dot per usable fix
// coloured by class and both lines, the integrity table, the table by street segment and the
// availability strip along the route; the safety caution stays.
TEST(IntegrityTest, ReportHasTheDiagramTablesAndStrip) {
  RouteReport r;
  r.results = ConstructedDrive();
  r.summary = Summarize(r.results, {49.9});
  const std::string html = ReportHtml(r);
  const size_t at = html.find("<svg class=\"plot\" id=\"error-bound\"");
  ASSERT_NE(at, std::string::npos);
  const std::string svg = html.substr(at, html.find("</svg>", at) - at);
  const auto count = [&svg](const std::string& what) {
    size_t n = 0;
    for (size_t p = svg.find(what); p != std::string::npos; p = svg.find(what, p + 1)) ++n;
    return n;
  };
  // 17 usable fixes: 11 within radius95 (green), 5 misleading only (orange), 1 beyond 3 x
  // radius95 (red); legend circles carry the colours once more.
  EXPECT_EQ(count("fill=\"#1f7a4d\""), 11u + 1);
  EXPECT_EQ(count("fill=\"#e06c1f\""), 5u + 1);
  EXPECT_EQ(count("fill=\"#b3202e\""), 1u + 1);
  EXPECT_NE(svg.find("misleading (5)"), std::string::npos);
  EXPECT_NE(svg.find("&gt; 3 x radius95 (1)"), std::string::npos);
  EXPECT_EQ(count("<polyline"), 2u);  // error = radius95 and error = 3 x radius95
  EXPECT_NE(svg.find("stated radius95 (m)"), std::string::npos);
  EXPECT_NE(html.find("<th>misleading: error &gt; radius95</th><td>17</td><td>6</td>"),
            std::string::npos);
  EXPECT_NE(html.find("<td>4 (longest 2)</td><td>3 of 4</td><td>0.987 CP</td>"), std::string::npos);
  // The segment table: segment 1 (frames 5-9, 50-90 m driven) has 4 of 5 fixes.
  EXPECT_NE(html.find("<tr><th>1</th><td>50-90</td><td>5</td><td style=\"background:#9cc15a33\">"
                      "0.800</td>"),
            std::string::npos);
  // The strip along the route: one rect with a title per segment.
  EXPECT_NE(html.find("<title>segment 1: 4 of 5 queries with a fix</title>"), std::string::npos);
  EXPECT_NE(html.find("not a certified navigation source"), std::string::npos);
  EXPECT_NE(SummaryLine(r.summary).find("misleading (error > radius95): 6 of 17 usable fixes"),
            std::string::npos);
  // The summary's JSON and CSVs carry the same counts.
  const nlohmann::json j = SummaryJson(r);
  EXPECT_EQ(j["integrity"]["misleading"]["episodes"], 4);
  EXPECT_EQ(j["integrity"]["confidently_wrong"]["misleading_fixes"], 1);
  EXPECT_NEAR(j["integrity"]["misleading"]["segment_share_upper95"].get<double>(), 0.987258544901,
              1e-9);
  EXPECT_EQ(j["street_segments"]["count"], 4);
  EXPECT_EQ(j["street_segments"]["segments"][1]["fixes"], 4);
  const std::string segments = SegmentsCsv(r);
  EXPECT_EQ(segments.substr(0, segments.find('\n')),
            "segment,start_m,end_m,queries,fixes,refined,availability,refined_share,"
            "median_error_m,misleading");
  EXPECT_NE(segments.find("\n1,50.0,90.0,5,4,4,0.8000,0.8000,"), std::string::npos) << segments;
  const std::string fixes = FixesCsv(r);
  // misleading, then the protection levels (none stated here) and the integrity state.
  EXPECT_NE(fixes.find(",2,120.0,3,,,,unavailable,refined,"), std::string::npos);  // frame 12
  EXPECT_NE(fixes.find(",0,20.0,1,,,,unavailable,refined,"), std::string::npos);   // frame 2
}

}  // namespace
}  // namespace sightfix
