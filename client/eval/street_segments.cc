#include "client/eval/street_segments.h"

#include <algorithm>
#include <cmath>
#include <map>
#include <numeric>

#include "indexer/base/geo.h"

namespace sightfix {

StreetCut CutStreetSegments(const std::vector<QueryResult>& results, double length_m) {
  StreetCut cut;
  cut.length_m = length_m;
  cut.segment.assign(results.size(), -1);
  cut.driven_m.assign(results.size(), 0);
  std::vector<size_t> order;
  for (size_t i = 0; i < results.size(); ++i)
    if (results[i].ran) order.push_back(i);
  std::stable_sort(order.begin(), order.end(), [&](size_t a, size_t b) {
    return results[a].truth.timestamp_s < results[b].truth.timestamp_s;
  });
  double driven = 0;
  for (size_t k = 0; k < order.size(); ++k) {
    if (k > 0) {
      const GeoPoint& a = results[order[k - 1]].truth.position;
      const GeoPoint& b = results[order[k]].truth.position;
      driven += GeodesicBetween(a.lat_deg, a.lon_deg, b.lat_deg, b.lon_deg).distance_m;
    }
    const size_t i = order[k];
    cut.order.push_back(i);
    cut.driven_m[i] = driven;
    cut.segment[i] = static_cast<int>(std::floor(driven / length_m));
    if (cut.segments.empty() || cut.segments.back() != cut.segment[i])
      cut.segments.push_back(cut.segment[i]);
  }
  return cut;
}

std::vector<std::vector<double>> SegmentBlocks(const StreetCut& cut,
                                               const std::function<bool(size_t)>& take,
                                               const std::function<double(size_t)>& value) {
  std::map<int, std::vector<double>> by_segment;
  for (size_t i = 0; i < cut.segment.size(); ++i)
    if (cut.segment[i] >= 0 && take(i)) by_segment[cut.segment[i]].push_back(value(i));
  std::vector<std::vector<double>> blocks;
  for (auto& [segment, values] : by_segment) blocks.push_back(std::move(values));
  return blocks;
}

std::optional<Interval> SegmentBootstrapCi95(const std::vector<std::vector<double>>& blocks,
                                             const SampleStatistic& statistic) {
  if (static_cast<int>(blocks.size()) < kMinBootstrapSegments) return std::nullopt;
  Result<Interval> ci = BlockBootstrapInterval(blocks, statistic);
  return ci.ok() ? std::optional<Interval>(*ci) : std::nullopt;
}

std::optional<Interval> SegmentShareCi95(const StreetCut& cut,
                                         const std::function<bool(size_t)>& trial,
                                         const std::function<bool(size_t)>& success) {
  const std::vector<std::vector<double>> blocks =
      SegmentBlocks(cut, trial, [&](size_t i) { return success(i) ? 1.0 : 0.0; });
  if (blocks.empty()) return std::nullopt;
  size_t trials = 0;
  double successes = 0;
  for (const std::vector<double>& b : blocks) {
    trials += b.size();
    successes = std::accumulate(b.begin(), b.end(), successes);
  }
  const int64_t segments = static_cast<int64_t>(blocks.size());
  if (successes == 0 || successes == static_cast<double>(trials)) {
    Result<Interval> ci = WilsonInterval(successes == 0 ? 0 : segments, segments);
    return ci.ok() ? std::optional<Interval>(*ci) : std::nullopt;
  }
  return SegmentBootstrapCi95(blocks, [](const std::vector<double>& sample) {
    return std::accumulate(sample.begin(), sample.end(), 0.0) / static_cast<double>(sample.size());
  });
}

}  // namespace sightfix
