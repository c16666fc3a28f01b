#include "server/engine/reference_pair.h"

#include <map>
#include <utility>

#include "indexer/vision/triangulation.h"

namespace sightfix {
namespace {

// DESIGN.md 5.3: rays closer than this put points metres off.
constexpr double kMinRayAngleDeg = 2.0;
// A triangulated point reprojecting farther than this into either reference is dropped.
constexpr double kMaxReprojectionPx = 2.0;

// Indices of the two references farthest apart, at least min_baseline_m; (-1, -1) when none.
std::pair<int, int> WidestPair(const std::vector<Verified>& verified, double min_baseline_m) {
  std::pair<int, int> pair{-1, -1};
  double best = 0;
  for (size_t i = 0; i < verified.size(); ++i)
    for (size_t j = i + 1; j < verified.size(); ++j) {
      const double d = cv::norm(verified[i].center - verified[j].center);
      if (d >= min_baseline_m && d > best) best = d, pair = {int(i), int(j)};
    }
  return pair;
}

// Wide enough rays, in front of both cameras, reprojecting within kMaxReprojectionPx.
bool WellTriangulated(const std::vector<cv::Matx33d>& rot, const std::vector<cv::Vec3d>& ctr,
                      const std::vector<double>& focal_px, const std::vector<cv::Point2d>& observed,
                      const cv::Vec3d& x) {
  if (!(MaxRayAngleDeg(ctr, x) >= kMinRayAngleDeg)) return false;
  for (int k = 0; k < 2; ++k) {
    const cv::Vec3d p = rot[k] * (x - ctr[k]);
    if (!(p[2] > 0)) return false;
    const cv::Point2d projected(p[0] / p[2], p[1] / p[2]);
    if (!(focal_px[k] * cv::norm(projected - observed[k]) <= kMaxReprojectionPx)) return false;
  }
  return true;
}

}  // namespace

std::vector<PointCorrespondence> PairCorrespondences(const LocalFeatures& query,
                                                     const std::vector<Verified>& verified,
                                                     double min_baseline_m, double pixel_sigma_px) {
  std::vector<PointCorrespondence> out;
  const auto [ia, ib] = WidestPair(verified, min_baseline_m);
  if (ia < 0) return out;
  const Verified &a = verified[ia], &b = verified[ib];
  const ReferenceImage &ra = a.c.tile->data.images[a.c.image],
                       &rb = b.c.tile->data.images[b.c.image];
  const LocalFeatures fa = ReferenceFeatures(ra), fb = ReferenceFeatures(rb);
  const std::vector<double> focal_px{a.c.tile->data.cameras[ra.camera_id].fx,
                                     b.c.tile->data.cameras[rb.camera_id].fx};
  const std::vector<cv::Matx33d> rot{a.camera_from_frame, b.camera_from_frame};
  const std::vector<cv::Vec3d> ctr{a.center, b.center};
  std::map<int, int> b_of_a;  // reference A keypoint -> reference B keypoint
  for (const cv::DMatch& d : MatchFeatures(fa, fb, MatchOptions{})) b_of_a[d.queryIdx] = d.trainIdx;
  std::map<int, int> a_of_query;
  for (auto [qk, rk] : a.matches) a_of_query[qk] = rk;
  for (auto [qk, ak] : a_of_query) {
    auto it = b_of_a.find(ak);
    if (it == b_of_a.end()) continue;
    const std::vector<cv::Point2d> obs{fa.normalized[ak], fb.normalized[it->second]};
    const cv::Vec3d x = TriangulateLinear(rot, ctr, obs);
    if (!WellTriangulated(rot, ctr, focal_px, obs, x)) continue;
    const cv::Matx33d cov = TriangulationCovariance(rot, ctr, focal_px, x, pixel_sigma_px);
    out.push_back({x, cov, query.normalized[qk]});
  }
  return out;
}

}  // namespace sightfix
