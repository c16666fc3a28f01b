// Local features of one image: keypoints, their undistorted normalized coordinates, and
// descriptors, plus mutual ratio-test matching between two such sets.
//
// RootSIFT (Arandjelovic & Zisserman, CVPR 2012): SIFT (Lowe, IJCV 2004) descriptors
// L1-normalised and square-rooted, so that L2 distance on them is the Hellinger kernel on SIFT.
// ORB (Rublee et al., ICCV 2011) is the fast option, matched with Hamming distance.
// Thread safety: functions are safe to call concurrently (each makes its own detector).
#pragma once

#include <opencv2/core.hpp>
#include <string>
#include <vector>

#include "indexer/base/status.h"
#include "indexer/map/camera_model.h"

namespace sightfix {

enum class FeatureType { kRootSift, kOrb };

struct FeatureOptions {
  FeatureType type = FeatureType::kRootSift;
  // Strongest keypoints kept per image. 2000 keeps matching under ~150 ms a pair here.
  int max_features = 2000;
  // Dim images (dusk, night, under-exposure) are stretched linearly before detection until their
  // grey-level standard deviation reaches this (gain at most max_gain): SIFT's contrast threshold
  // is absolute, so a dark frame otherwise yields a few dozen keypoints. A linear stretch leaves
  // RootSIFT descriptors unchanged (they are normalised), and normal images (std above the target)
  // are not touched. 0 turns it off. The demo's dusk drive: 63 keypoints -> see DEVELOPERS.md.
  double min_contrast_std = 40.0;
  double max_gain = 4.0;
  bool Validate(std::string* error) const;
};

struct LocalFeatures {
  FeatureType type = FeatureType::kRootSift;
  std::vector<cv::KeyPoint> keypoints;  // pixels, as detected in the (distorted) image
  std::vector<cv::Point2d> normalized;  // undistorted (x/z, y/z) per keypoint
  cv::Mat descriptors;                  // n x 128 CV_32F (RootSIFT) or n x 32 CV_8U (ORB)
};

// REQUIRES: image is 8-bit grey or BGR. `camera` (may be null) undistorts the keypoints; with
// null, normalized = pixels (no calibration). Fails on an empty image or a size that does not
// match the calibration.
// SIFT rows (n x 128 CV_32F, non-negative) to RootSIFT in place: L1-normalise, square root.
void ToRootSift(cv::Mat& descriptors);

Result<LocalFeatures> ExtractFeatures(const cv::Mat& image, const CameraModel* camera,
                                      const FeatureOptions& options);
// features->normalized from its keypoints through `camera` (may be null: pixels), as
// ExtractFeatures sets it; for features extracted under another calibration of the same images.
void NormalizeKeypoints(const CameraModel* camera, LocalFeatures* features);

struct MatchOptions {
  double ratio = 0.8;  // Lowe's ratio test (Lowe 2004, section 7.1)
  bool mutual = true;  // keep a -> b only if b's best match is a too
};

// Compact storage of RootSIFT descriptors: each value (at most 1, in practice under 0.45) times
// kRootSiftByteScale, rounded and saturated to a byte; 128 bytes per keypoint instead of 512.
constexpr float kRootSiftByteScale = 512.0f;
cv::Mat CompactDescriptors(const cv::Mat& rootsift);  // n x 128 CV_32F -> CV_8U
cv::Mat ExpandDescriptors(const cv::Mat& bytes);      // n x 128 CV_8U -> CV_32F

// Matches a's features to b's (queryIdx indexes a, trainIdx b). REQUIRES: same FeatureType.
std::vector<cv::DMatch> MatchFeatures(const LocalFeatures& a, const LocalFeatures& b,
                                      const MatchOptions& options);

}  // namespace sightfix
