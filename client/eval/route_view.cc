#include "client/eval/route_view.h"

#include <algorithm>
#include <cstdio>

namespace sightfix {

const char* ColourOf(const QueryResult& q) {
  if (q.fix.quality == FixQuality::kNone || q.error_m < 0) return kNoFixColour;
  for (const ErrorClass& c : kErrorClasses)
    if (q.error_m <= c.max_m) return c.colour;
  return std::end(kErrorClasses)[-1].colour;
}

std::vector<const QueryResult*> InTimeOrder(const RouteReport& r) {
  std::vector<const QueryResult*> out;
  for (const QueryResult& q : r.results)
    if (q.ran) out.push_back(&q);
  std::sort(out.begin(), out.end(), [](const QueryResult* a, const QueryResult* b) {
    return a->truth.timestamp_s < b->truth.timestamp_s;
  });
  return out;
}

bool SpoofedAt(const RouteReport& r, double t) {
  for (const SpoofedSpan& s : r.spoof_truth)
    if (t >= s.span.start_s && t < s.span.end_s) return true;
  return false;
}

std::string FormatNumber(const char* format, double v) {
  char buf[64];
  std::snprintf(buf, sizeof(buf), format, v);
  return buf;
}

}  // namespace sightfix
