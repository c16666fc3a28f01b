#include "client/eval/integrity.h"

#include <algorithm>
#include <cmath>
#include <set>

#include "client/eval/route_view.h"

namespace sightfix {

bool IsUsableFix(const QueryResult& q) {
  return q.ran && q.error.empty() && q.fix.quality != FixQuality::kNone && q.error_m >= 0 &&
         std::isfinite(q.fix.radius95_m) && q.fix.radius95_m > 0;
}

bool IsMisleading(const QueryResult& q, double bound_factor) {
  return IsUsableFix(q) && q.error_m > bound_factor * q.fix.radius95_m;
}

IntegrityCounts CountIntegrity(const std::vector<QueryResult>& results, const StreetCut& cut,
                               double bound_factor) {
  IntegrityCounts c;
  c.bound_factor = bound_factor;
  std::set<int> segments, failed;
  int run = 0;
  for (size_t i : cut.order) {
    const QueryResult& q = results[i];
    if (!IsUsableFix(q)) continue;
    ++c.usable_fixes;
    segments.insert(cut.segment[i]);
    if (!IsMisleading(q, bound_factor)) {
      run = 0;
      continue;
    }
    ++c.misleading_fixes;
    failed.insert(cut.segment[i]);
    c.episodes += run == 0;
    c.longest_episode = std::max(c.longest_episode, ++run);
  }
  c.segments = static_cast<int>(segments.size());
  c.misleading_segments = static_cast<int>(failed.size());
  if (c.usable_fixes == 0) return c;
  c.fix_share = static_cast<double>(c.misleading_fixes) / c.usable_fixes;
  c.fix_share_ci95 = SegmentShareCi95(
      cut, [&](size_t i) { return IsUsableFix(results[i]); },
      [&](size_t i) { return IsMisleading(results[i], bound_factor); });
  Result<double> bound = ClopperPearsonUpperBound(c.misleading_segments, c.segments);
  if (bound.ok()) c.segment_share_upper95 = *bound;
  return c;
}

std::string IntegrityLine(const IntegrityCounts& c) {
  const std::string name =
      c.bound_factor == 1
          ? "misleading (error > radius95)"
          : "confidently wrong (error > " + FormatNumber("%g", c.bound_factor) + " x radius95)";
  std::string out = name + ": " + std::to_string(c.misleading_fixes) + " of " +
                    std::to_string(c.usable_fixes) + " usable fixes";
  if (c.usable_fixes == 0) return out;
  out += ", " + FormatNumber("%.3f", c.fix_share) + IntervalText(c.fix_share_ci95, 1, "%.3f") +
         ", " + std::to_string(c.episodes) + " episodes (longest " +
         std::to_string(c.longest_episode) + "), in " + std::to_string(c.misleading_segments) +
         " of " + std::to_string(c.segments) + " segments";
  if (c.segment_share_upper95)
    out += ", at most " + FormatNumber("%.3f", *c.segment_share_upper95) + " of segments (95 % CP)";
  return out;
}

}  // namespace sightfix
