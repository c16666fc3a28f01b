#include "indexer/vision/local_features.h"

#include <opencv2/features2d.hpp>
#include <opencv2/imgproc.hpp>

namespace sightfix {

void ToRootSift(cv::Mat& d) {
  for (int i = 0; i < d.rows; ++i) {
    cv::Mat row = d.row(i);
    const double l1 = cv::norm(row, cv::NORM_L1);
    if (l1 > 0) row /= l1;
    cv::sqrt(row, row);
  }
}

bool FeatureOptions::Validate(std::string* error) const {
  if (!(min_contrast_std >= 0) || !(max_gain >= 1)) {
    if (error) *error = "min_contrast_std must be >= 0 and max_gain >= 1";
    return false;
  }
  if (max_features < 8 || max_features > 100000) {
    if (error) *error = "max_features must be within [8, 100000]";
    return false;
  }
  return true;
}

Result<LocalFeatures> ExtractFeatures(const cv::Mat& image, const CameraModel* camera,
                                      const FeatureOptions& options) {
  std::string error;
  if (!options.Validate(&error)) return Status::InvalidArgument(error);
  if (image.empty()) return Status::InvalidArgument("empty image");
  if (camera && (image.cols != camera->width_px || image.rows != camera->height_px))
    return Status::InvalidArgument("image is " + std::to_string(image.cols) + "x" +
                                   std::to_string(image.rows) + " but the calibration is for " +
                                   std::to_string(camera->width_px) + "x" +
                                   std::to_string(camera->height_px));
  LocalFeatures f;
  f.type = options.type;
  try {
    cv::Mat grey;
    if (image.channels() == 1)
      grey = image;
    else
      cv::cvtColor(image, grey, cv::COLOR_BGR2GRAY);
    if (options.min_contrast_std > 0) {
      cv::Scalar mean, stddev;
      cv::meanStdDev(grey, mean, stddev);
      if (stddev[0] > 0 && stddev[0] < options.min_contrast_std) {
        const double gain = std::min(options.max_gain, options.min_contrast_std / stddev[0]);
        grey.convertTo(grey, CV_8U, gain, 128.0 - gain * mean[0]);  // saturates at 0 and 255
      }
    }
    if (options.type == FeatureType::kRootSift) {
      cv::SIFT::create(options.max_features)
          ->detectAndCompute(grey, cv::noArray(), f.keypoints, f.descriptors);
      ToRootSift(f.descriptors);
    } else {
      cv::ORB::create(options.max_features)
          ->detectAndCompute(grey, cv::noArray(), f.keypoints, f.descriptors);
    }
  } catch (const cv::Exception& e) {
    return Status::Internal(std::string("feature extraction failed: ") + e.what());
  }
  f.normalized.reserve(f.keypoints.size());
  for (const cv::KeyPoint& k : f.keypoints)
    f.normalized.push_back(camera ? camera->PixelToNormalized(k.pt) : cv::Point2d(k.pt));
  return f;
}

cv::Mat CompactDescriptors(const cv::Mat& rootsift) {
  cv::Mat bytes;
  rootsift.convertTo(bytes, CV_8U, kRootSiftByteScale);  // rounds and saturates
  return bytes;
}

cv::Mat ExpandDescriptors(const cv::Mat& bytes) {
  cv::Mat f;
  bytes.convertTo(f, CV_32F, 1.0 / kRootSiftByteScale);
  return f;
}

std::vector<cv::DMatch> MatchFeatures(const LocalFeatures& a, const LocalFeatures& b,
                                      const MatchOptions& options) {
  std::vector<cv::DMatch> out;
  if (a.descriptors.rows < 2 || b.descriptors.rows < 2 || a.type != b.type) return out;
  cv::BFMatcher matcher(a.type == FeatureType::kOrb ? cv::NORM_HAMMING : cv::NORM_L2);
  std::vector<std::vector<cv::DMatch>> ab;
  matcher.knnMatch(a.descriptors, b.descriptors, ab, 2);
  std::vector<int> best_ba;
  if (options.mutual) {
    std::vector<cv::DMatch> ba;
    matcher.match(b.descriptors, a.descriptors, ba);
    best_ba.assign(b.descriptors.rows, -1);
    for (const cv::DMatch& m : ba) best_ba[m.queryIdx] = m.trainIdx;
  }
  for (const auto& m : ab) {
    if (m.size() < 2 || m[0].distance >= options.ratio * m[1].distance) continue;
    if (options.mutual && best_ba[m[0].trainIdx] != m[0].queryIdx) continue;
    out.push_back(m[0]);
  }
  return out;
}

}  // namespace sightfix
