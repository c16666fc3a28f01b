#include "server/engine/relative_pose.h"

#include <algorithm>
#include <cmath>
#include <opencv2/calib3d.hpp>

#include "indexer/base/rotation.h"

namespace sightfix {
namespace {

constexpr double kRadToDeg = 180.0 / M_PI;

cv::Vec3d Ray(const cv::Point2d& n) { return cv::normalize(cv::Vec3d(n.x, n.y, 1.0)); }

double MedianParallaxDeg(const std::vector<cv::Point2d>& na, const std::vector<cv::Point2d>& nb,
                         const std::vector<bool>& mask, const cv::Matx33d& r) {
  std::vector<double> angles;
  for (size_t i = 0; i < na.size(); ++i) {
    if (!mask[i]) continue;
    const double c = std::clamp((r * Ray(na[i])).dot(Ray(nb[i])), -1.0, 1.0);
    angles.push_back(std::acos(c) * kRadToDeg);
  }
  if (angles.empty()) return 0;
  std::nth_element(angles.begin(), angles.begin() + angles.size() / 2, angles.end());
  return angles[angles.size() / 2];
}

// Matches whose Sampson distance to the model (first-order geometric error) is within threshold.
cv::Mat SampsonInliers(const cv::Mat& e, const std::vector<cv::Point2d>& na,
                       const std::vector<cv::Point2d>& nb, double threshold) {
  const cv::Matx33d m(e);
  cv::Mat mask(static_cast<int>(na.size()), 1, CV_8U);
  for (size_t i = 0; i < na.size(); ++i) {
    const cv::Vec3d a(na[i].x, na[i].y, 1), b(nb[i].x, nb[i].y, 1);
    const cv::Vec3d ea = m * a, etb = m.t() * b;
    const double r = b.dot(ea);
    const double d2 = r * r / (ea[0] * ea[0] + ea[1] * ea[1] + etb[0] * etb[0] + etb[1] * etb[1]);
    mask.at<uchar>(static_cast<int>(i)) = d2 <= threshold * threshold ? 1 : 0;
  }
  return mask;
}

// cv::recoverPose's cheirality test also drops points triangulated farther than distance_thresh
// baselines (50 by default). Near pure rotation nearly every point is that far, so the count
// falls to the few that noise brings nearer (often under min_inliers, and a rotation from those
// few is poor) although the rotation is well determined by all of them. So the test is repeated
// with points at any distance counted, and that pose replaces the default one when it keeps more
// inliers and its median parallax is under min_parallax_deg: a near pure rotation, whose
// rotation holds and whose translation EstimateRelativePose flags unreliable. A pair with
// parallax keeps the default test.
constexpr double kAnyDistance = 1e12;  // baselines

int RecoverPose(const cv::Mat& e, const std::vector<cv::Point2d>& na,
                const std::vector<cv::Point2d>& nb, const RelativePoseOptions& options,
                const cv::Mat& sampson_mask, cv::Mat* r, cv::Mat* t, cv::Mat* mask) {
  const cv::Mat k = cv::Mat::eye(3, 3, CV_64F);
  *mask = sampson_mask.clone();
  const int inliers = cv::recoverPose(e, na, nb, k, *r, *t, *mask);
  // Counting far points cannot keep more than the Sampson inliers: nothing to gain past them.
  if (inliers >= cv::countNonZero(sampson_mask)) return inliers;
  cv::Mat far_r, far_t, far_mask = sampson_mask.clone();
  const int far_inliers = cv::recoverPose(e, na, nb, k, far_r, far_t, kAnyDistance, far_mask);
  if (far_inliers <= inliers) return inliers;
  std::vector<bool> keep(na.size());
  for (size_t i = 0; i < na.size(); ++i) keep[i] = far_mask.at<uchar>(static_cast<int>(i)) != 0;
  if (MedianParallaxDeg(na, nb, keep, cv::Matx33d(far_r)) >= options.min_parallax_deg)
    return inliers;
  *r = far_r, *t = far_t, *mask = far_mask;
  return far_inliers;
}

}  // namespace

bool RelativePoseOptions::Validate(std::string* error) const {
  auto fail = [&](const char* m) {
    if (error) *error = m;
    return false;
  };
  if (!(threshold_px > 0)) return fail("threshold_px must be positive");
  if (!(focal_px > 0)) return fail("focal_px must be positive");
  if (!(confidence > 0 && confidence < 1)) return fail("confidence must be within (0, 1)");
  if (min_inliers < 5) return fail("min_inliers must be at least 5 (five-point solver)");
  if (!(min_parallax_deg >= 0)) return fail("min_parallax_deg must be >= 0");
  return true;
}

Result<RelativePose> EstimateRelativePose(const std::vector<cv::Point2d>& na,
                                          const std::vector<cv::Point2d>& nb,
                                          const RelativePoseOptions& options) {
  std::string error;
  if (!options.Validate(&error)) return Status::InvalidArgument(error);
  if (na.size() != nb.size()) return Status::InvalidArgument("point lists differ in length");
  RelativePose pose;
  pose.matches = static_cast<int>(na.size());
  if (pose.matches < options.min_inliers)
    return Status(StatusCode::kFailedPrecondition,
                  "too few matches: " + std::to_string(pose.matches));
  cv::Mat mask, r, t;
  try {
    const cv::Mat e =
        cv::findEssentialMat(na, nb, cv::Mat::eye(3, 3, CV_64F), cv::USAC_MAGSAC,
                             options.confidence, options.threshold_px / options.focal_px, mask);
    if (e.rows != 3 || e.cols != 3)
      return Status(StatusCode::kFailedPrecondition, "no essential matrix found");
    // MAGSAC's own mask is stricter than its threshold; count inliers by Sampson distance.
    const cv::Mat sampson = SampsonInliers(e, na, nb, options.threshold_px / options.focal_px);
    pose.inliers = RecoverPose(e, na, nb, options, sampson, &r, &t, &mask);
  } catch (const cv::Exception& ex) {
    return Status::Internal(std::string("essential matrix estimation failed: ") + ex.what());
  }
  if (pose.inliers < options.min_inliers)
    return Status(StatusCode::kFailedPrecondition,
                  "too few inliers: " + std::to_string(pose.inliers));
  pose.b_from_a = cv::Matx33d(r);
  const cv::Vec3d tb(t.at<double>(0), t.at<double>(1), t.at<double>(2));
  pose.translation_dir = cv::normalize(-(pose.b_from_a.t() * tb));
  pose.rotation_deg = RotationAngleDeg(pose.b_from_a, cv::Matx33d::eye());
  pose.inlier_mask.resize(na.size());
  for (size_t i = 0; i < na.size(); ++i)
    pose.inlier_mask[i] = mask.at<uchar>(static_cast<int>(i)) != 0;
  pose.median_parallax_deg = MedianParallaxDeg(na, nb, pose.inlier_mask, pose.b_from_a);
  pose.translation_reliable = pose.median_parallax_deg >= options.min_parallax_deg;
  return pose;
}

}  // namespace sightfix
