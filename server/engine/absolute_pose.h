// Metric camera pose from 2D-3D correspondences, and how sure it is.
//
// PnP in RANSAC (cv::solvePnPRansac: EPnP hypotheses, Lepetit et al., IJCV 2009), then
// Levenberg-Marquardt on the inliers (cv::solvePnPRefineLM), inliers recounted and refined once
// more. Covariance of the camera centre: first-order propagation through the pose Jacobian
// (cv::projectPoints), each residual weighted by its own covariance, keypoint noise plus the
// 3D point's covariance seen through the camera, then scaled by the a-posteriori variance
// factor (chi-square of the residuals over their degrees of freedom, common practice in
// least-squares adjustment), so a sharp day image and a noisy dusk one get the covariance their
// residuals show. The factor is floored at min_variance_factor: a handful of lucky residuals must
// not make a fix over-confident.
//
// With the query camera given (a pinhole lens), the last refinement also estimates the camera's
// focal length (fx and fy scaled together) and k1 under Gaussian priors of its stated
// uncertainty (UncertaintyOrDefault): Levenberg-Marquardt on the pixel residuals of the full
// lens model, the observations mapped back to the pixels they came from. The centre's covariance
// is then the pose block of the inverse of the whole information (data plus priors), i.e. with
// the intrinsics marginalised out: a focal length known to 1 % leaves the distance to points at
// one depth uncertain by about 1 %, and the radius says so. Frames: world is a local ENU
// (metres), camera as rotation.h. Thread-safe.
#pragma once

#include <opencv2/core.hpp>
#include <optional>
#include <vector>

#include "indexer/base/status.h"
#include "indexer/map/camera_model.h"

namespace sightfix {

struct PointCorrespondence {
  cv::Vec3d world;         // metres
  cv::Matx33d covariance;  // of `world`, m^2
  cv::Point2d normalized;  // undistorted (x/z, y/z) in the query image
  int survey_frames = 2;   // survey frames whose poses pinned `world` (for the survey term)
};

// The query camera as the pose estimated it against what was supplied: fx and fy times
// (1 + focal_scale), k1 + k1_change, each with its posterior 1-sigma. All 0 where held.
struct IntrinsicsChange {
  double focal_scale = 0, focal_scale_sigma = 0;
  double k1_change = 0, k1_change_sigma = 0;
};

// A fault hypothesis of solution separation (protection_levels.h): the solution without the
// inliers of one group, linearised at the all-in solution (one Gauss-Newton step from it, exact
// for a linear model; the separation's covariance is the subset's minus the all-in's).
struct PoseSubset {
  enum class Kind { kGroup, kQuadrant };
  Kind kind = Kind::kGroup;
  // kGroup: the AbsolutePoseOptions::groups label; kQuadrant: 0 upper-left, 1 upper-right,
  // 2 lower-left, 3 lower-right (of the image, about the optical axis).
  int index = 0;
  int left_out = 0;               // inliers in the group
  cv::Vec3d center_shift;         // subset centre minus the all-in centre, world metres
  cv::Matx33d shift_covariance;   // of center_shift with no fault, m^2
  cv::Matx33d center_covariance;  // of the subset centre, m^2 (as center_covariance)
};

struct AbsolutePoseOptions {
  double threshold_px = 3.0;  // RANSAC and inlier threshold, pixels at focal_px
  double focal_px = 500;
  int min_inliers = 25;
  int iterations = 2000;
  double confidence = 0.9999;
  double pixel_sigma_px = 1.0;  // keypoint noise assumed before the variance factor
  // Floor of the variance factor: 0.25 keeps the effective keypoint noise >= 0.5 px.
  double min_variance_factor = 0.25;
  // The query camera (`normalized` undistorted with it). Pinhole: focal and k1 estimated as
  // above. Unset, or a fisheye lens: intrinsics held exact.
  std::optional<CameraModel> camera;
  // Solution separation: a label >= 0 per correspondence (e.g. the reference image it came
  // from; -1 none), each label a group; empty: quadrants only. A group (or quadrant) is tested
  // when leaving it out keeps min_subset_inliers inliers; the others are counted as skipped.
  std::vector<int> groups;
  // Fewer than min_inliers: min_inliers guards the all-in pose against a chance consensus, which
  // a subset solution (one Gauss-Newton step from the all-in pose) does not face; it needs only
  // a well-posed step. Its sigma grows as the rest thins, and its protection level with it.
  int min_subset_inliers = 10;
  bool separate_solutions = true;  // false: no subsets (the pose alone)
  bool Validate(std::string* error) const;
};

struct AbsolutePose {
  cv::Matx33d camera_from_world = cv::Matx33d::eye();
  cv::Vec3d center;               // camera centre in world
  cv::Matx33d center_covariance;  // m^2
  int inliers = 0;
  std::vector<bool> inlier_mask;  // per correspondence
  double rms_px = 0;              // of the inliers
  double variance_factor = 1;     // applied to center_covariance
  int points_in_front = 0;        // inliers with positive depth
  IntrinsicsChange intrinsics;
  std::vector<PoseSubset> subsets;  // tested fault hypotheses
  int subsets_skipped = 0;          // groups too large to leave out
};

// kFailedPrecondition with a reason when there are too few correspondences or inliers.
Result<AbsolutePose> EstimateAbsolutePose(const std::vector<PointCorrespondence>& points,
                                          const AbsolutePoseOptions& options);

}  // namespace sightfix
