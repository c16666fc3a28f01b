#include "server/engine/place_ambiguity.h"

#include <algorithm>
#include <cmath>

#include "indexer/base/geo.h"

namespace sightfix {

std::vector<size_t> WithRivalCandidates(const std::vector<GeoPoint>& ranked, int top_k, int rivals,
                                        double distinct_m) {
  const size_t kept = std::min(ranked.size(), static_cast<size_t>(std::max(top_k, 0)));
  std::vector<size_t> out;
  for (size_t i = 0; i < kept; ++i) out.push_back(i);
  for (size_t i = kept; i < ranked.size() && static_cast<int>(out.size() - kept) < rivals; ++i) {
    const GeoPoint& r = ranked[i];
    const bool distinct =
        std::all_of(ranked.begin(), ranked.begin() + kept, [&](const GeoPoint& p) {
          return GeodesicBetween(p.lat_deg, p.lon_deg, r.lat_deg, r.lon_deg).distance_m >
                 distinct_m;
        });
    if (distinct) out.push_back(i);
  }
  return out;
}

std::vector<Candidate> WithRivalCandidates(const std::vector<Candidate>& ranked, int top_k,
                                           int rivals, double distinct_m) {
  std::vector<GeoPoint> at;
  for (const Candidate& c : ranked) at.push_back(c.tile->data.images[c.image].position);
  std::vector<Candidate> out;
  for (size_t i : WithRivalCandidates(at, top_k, rivals, distinct_m)) out.push_back(ranked[i]);
  return out;
}

bool AtDistinctPlace(const ReferenceImage& ref, const std::vector<Verified>& verified,
                     double distinct_m) {
  for (const Verified& v : verified) {
    const GeoPoint& p = v.c.tile->data.images[v.c.image].position;
    if (GeodesicBetween(p.lat_deg, p.lon_deg, ref.position.lat_deg, ref.position.lon_deg)
            .distance_m <= distinct_m)
      return false;
  }
  return true;
}

void WeighSupport(const std::vector<cv::Point2d>& query_normalized,
                  const cv::Matx33d& camera_from_world, const cv::Vec3d& center, double threshold,
                  const std::function<cv::Vec3d(const Verified&, int)>& to_frame,
                  std::vector<Verified>* verified) {
  for (Verified& v : *verified) {
    const ReferenceImage& ref = v.c.tile->data.images[v.c.image];
    v.tested = v.agreeing = 0;
    for (auto [qk, rk] : v.matches) {
      const int pid = ref.point_ids[rk];
      if (pid < 0) continue;
      const cv::Vec3d x = camera_from_world * (to_frame(v, pid) - center);
      if (x[2] <= 0) continue;
      ++v.tested;
      const cv::Point2d& q = query_normalized[qk];
      v.agreeing += std::hypot(x[0] / x[2] - q.x, x[1] / x[2] - q.y) <= threshold;
    }
  }
}

std::optional<std::string> AmbiguityReason(const std::vector<Verified>& verified,
                                           const cv::Vec3d& center, double distinct_m,
                                           double ratio) {
  int here = 0, rival = 0;
  double rival_m = 0;
  for (const Verified& v : verified) {
    const double d = cv::norm(v.center - center);
    const bool agrees =
        v.tested >= kMinTestedMatches ? 2 * v.agreeing >= v.tested : d <= distinct_m;
    if (agrees)
      here = std::max(here, v.inliers);
    else if (d > distinct_m && v.inliers > rival)
      rival = v.inliers, rival_m = d;
  }
  if (rival == 0 || rival < ratio * here) return std::nullopt;
  return "ambiguous: a place " + std::to_string(static_cast<int>(rival_m)) +
         " m away verified with " + std::to_string(rival) + " inliers, this one with " +
         std::to_string(here);
}

}  // namespace sightfix
