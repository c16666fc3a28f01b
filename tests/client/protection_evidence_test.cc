// Protection-level evidence (client/eval/protection_evidence.h) on a constructed drive worked by
// hand: the fixes' own flag, misleading and hazardous counts, episodes and time to alert, false
// alerts, availability by alert limit, and the Clopper-Pearson bound over segments.
#include "client/eval/protection_evidence.h"

#include <gtest/gtest.h>

#include <vector>

#include "client/eval/route_report.h"
#include "client/eval/street_segments.h"
#include "tests/client/placed_query.h"

namespace sightfix {
namespace {

using S = IntegrityState;

// 10 frames 10 m apart, north-bound, one a second; segments (50 m) hold frames 0-4 and 5-9.
// Errors lie east of the truth: across the heading, so each is a lateral error whole.
std::vector<QueryResult> ConstructedDrive() {
  const struct {
    S state;
    double error_m, hpl, lateral_pl, alert_limit;
  } frames[] = {
      {S::kUsable, 0.2, 1.0, 0.5, 2},          // 0 within
      {S::kUsable, 0.6, 1.0, 0.5, 2},          // 1 misleading: lateral 0.6 > 0.5
      {S::kUsable, 2.5, 1.0, 1.0, 2},          // 2 misleading and hazardous; same episode
      {S::kFaultDetected, 0.1, 1.5, 1.0, 2},   // 3 a false alert (within its levels)
      {S::kOverAlertLimit, 5.0, 3.0, 3.0, 2},  // 4 not usable: neither ends nor extends a run
      {S::kUnavailable, -1, 0, 0, 0},          // 5 no fix
      {S::kPlaceAmbiguity, 30, 0.8, 0.8, 2},   // 6 flagged, rightly
      {S::kUsable, 0.3, 1.5, 0.9, 2},          // 7 within
      {S::kUsable, 1.2, 0.9, 2.0, 2},          // 8 misleading: 1.2 > HPL 0.9; a new episode
      {S::kUsable, 0.1, 4.0, 4.0, 5},          // 9 within
  };
  std::vector<QueryResult> out;
  for (int i = 0; i < 10; ++i) {
    const auto& f = frames[i];
    const FixQuality quality = f.error_m < 0 ? FixQuality::kNone : FixQuality::kRefined;
    QueryResult q = PlacedQuery(10.0 * i + 2, i, quality, std::max(0.0, f.error_m), 0.3);
    FixIntegrity& g = q.fix.integrity;
    g.state = f.state, g.horizontal_pl_m = f.hpl, g.lateral_pl_m = f.lateral_pl;
    g.longitudinal_pl_m = f.hpl, g.horizontal_alert_limit_m = f.alert_limit;
    out.push_back(q);
  }
  return out;
}

TEST(ProtectionEvidenceTest, CountsOfAConstructedDrive) {
  const std::vector<QueryResult> d = ConstructedDrive();
  EXPECT_TRUE(IsMisleadingAtLevels(d[1]));
  EXPECT_FALSE(IsMisleadingAtLevels(d[4]));  // beyond its levels, but flagged
  EXPECT_FALSE(IsProtected(d[5]));
  const ProtectionEvidence e = CountProtection(d, CutStreetSegments(d, 49.9));
  EXPECT_EQ(e.queries, 10);
  EXPECT_EQ(e.protected_fixes, 9);
  EXPECT_EQ(e.usable, 6);
  EXPECT_EQ(e.misleading, 3);
  EXPECT_EQ(e.hazardous, 1);
  EXPECT_EQ(e.episodes, 2);
  EXPECT_DOUBLE_EQ(e.longest_unflagged_s, 1.0);  // frames 1 and 2, one second apart
  EXPECT_EQ(e.within_levels, 4);                 // frames 0, 3, 7, 9
  EXPECT_EQ(e.false_alerts, 1);                  // frame 3
  // Not alerted, HPL within the limit, of 10 queries: 1 m {0, 1, 2, 8}; 2 m + 7; 5 m + 4, 9.
  EXPECT_DOUBLE_EQ(e.availability[0], 0.4);
  EXPECT_DOUBLE_EQ(e.availability[1], 0.5);
  EXPECT_DOUBLE_EQ(e.availability[2], 0.7);
  EXPECT_DOUBLE_EQ(e.availability[3], 0.7);
  EXPECT_DOUBLE_EQ(e.checked_at_m, 2);  // the narrowest limit a protected fix was judged at
  EXPECT_EQ(e.segments, 2);
  EXPECT_EQ(e.misleading_segments, 2);
  ASSERT_TRUE(e.segment_share_upper95.has_value());
  EXPECT_DOUBLE_EQ(*e.segment_share_upper95, 1.0);  // 2 of 2
}

TEST(ProtectionEvidenceTest, CleanDriveBoundAndLines) {
  std::vector<QueryResult> d = ConstructedDrive();
  for (QueryResult& q : d)
    if (q.fix.integrity.state == S::kUsable)
      q.fix.integrity.horizontal_pl_m = 10, q.fix.integrity.lateral_pl_m = 10;
  const ProtectionEvidence e = CountProtection(d, CutStreetSegments(d, 49.9));
  EXPECT_EQ(e.misleading, 0);
  ASSERT_TRUE(e.segment_share_upper95.has_value());
  // One-sided 95 % Clopper-Pearson bound for 0 of 2: 1 - 0.05^(1/2) = 0.7764 (interval_stats.h).
  EXPECT_NEAR(*e.segment_share_upper95, 1 - std::sqrt(0.05), 1e-9);
  const std::string text = ProtectionLines(e);
  EXPECT_NE(text.find("0 misleading"), std::string::npos) << text;
  EXPECT_NE(text.find("availability by alert limit: 1 m 0.000 2 m 0.000 5 m <= 0.100 10 m <="),
            std::string::npos)
      << text;
  EXPECT_NE(text.find("(place checks ran at 2 m;"), std::string::npos) << text;
  // Judged at 10 m, every plotted limit is exact.
  for (QueryResult& q : d) q.fix.integrity.horizontal_alert_limit_m = 10;
  const std::string wide = ProtectionLines(CountProtection(d, CutStreetSegments(d, 49.9)));
  EXPECT_EQ(wide.find("<="), std::string::npos) << wide;
}

// report.html draws the constructed drive on the integrity diagram: one dot per protected fix
// in its region's colour (legend circles carry each colour once more), the two flagged fixes as
// rings, and the availability bars.
TEST(ProtectionEvidenceTest, ReportDrawsTheDiagram) {
  RouteReport r;
  r.results = ConstructedDrive();
  r.summary = Summarize(r.results, {49.9});
  EXPECT_EQ(r.summary.protection.misleading, 3);
  const std::string html = ReportHtml(r);
  const size_t at = html.find("<svg class=\"plot\" id=\"protection\"");
  ASSERT_NE(at, std::string::npos);
  const std::string svg = html.substr(at, html.find("</svg>", at) - at);
  const auto count = [&svg](const std::string& what) {
    size_t n = 0;
    for (size_t p = svg.find(what); p != std::string::npos; p = svg.find(what, p + 1)) ++n;
    return n;
  };
  // Usable: 0, 7, 9 within (blue); 1, 8 misleading (amber); 2 hazardous (crimson). Not usable:
  // 4 over the limit (grey dot), 3 and 6 flagged (rings).
  EXPECT_EQ(count("fill=\"#2a6f97\""), 3u + 1);
  EXPECT_EQ(count("fill=\"#d99a1e\""), 2u + 1);
  EXPECT_EQ(count("fill=\"#8b1a3a\""), 1u + 1 + 1);  // and the alert limit's label
  EXPECT_EQ(count("fill=\"#9a9a9a\""), 1u + 1);
  EXPECT_NE(svg.find("not usable: fault or rival place (2)"), std::string::npos);
  EXPECT_NE(svg.find("alert limit 2 m"), std::string::npos);
  EXPECT_NE(html.find("id=\"availability-limit\""), std::string::npos);
  EXPECT_NE(html.find("3 misleading (error &gt; protection level)"), std::string::npos);
}

}  // namespace
}  // namespace sightfix
