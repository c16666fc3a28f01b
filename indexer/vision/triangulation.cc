#include "indexer/vision/triangulation.h"

#include <algorithm>
#include <cmath>

namespace sightfix {
namespace {

constexpr double kDegToRad = M_PI / 180.0;

}  // namespace

double MaxRayAngleDeg(const std::vector<cv::Vec3d>& centers, const cv::Vec3d& x) {
  double best = 0;
  for (size_t i = 0; i < centers.size(); ++i)
    for (size_t j = i + 1; j < centers.size(); ++j) {
      const cv::Vec3d a = cv::normalize(x - centers[i]), b = cv::normalize(x - centers[j]);
      best = std::max(best, std::acos(std::clamp(a.dot(b), -1.0, 1.0)) / kDegToRad);
    }
  return best;
}

cv::Matx33d TriangulationCovariance(const std::vector<cv::Matx33d>& cam_from_enu,
                                    const std::vector<cv::Vec3d>& centers,
                                    const std::vector<double>& focal_px, const cv::Vec3d& x,
                                    double pixel_sigma_px) {
  cv::Matx33d info = cv::Matx33d::zeros();
  for (size_t i = 0; i < centers.size(); ++i) {
    const cv::Vec3d p = cam_from_enu[i] * (x - centers[i]);
    const double s = focal_px[i] / pixel_sigma_px;
    const cv::Matx23d dproj(s / p[2], 0, -s * p[0] / (p[2] * p[2]), 0, s / p[2],
                            -s * p[1] / (p[2] * p[2]));
    const cv::Matx23d j = dproj * cam_from_enu[i];
    info += j.t() * j;
  }
  return info.inv(cv::DECOMP_SVD);
}

cv::Vec3d TriangulateLinear(const std::vector<cv::Matx33d>& cam_from_enu,
                            const std::vector<cv::Vec3d>& centers,
                            const std::vector<cv::Point2d>& normalized) {
  // Centre on the cameras' mean for conditioning.
  cv::Vec3d mean(0, 0, 0);
  for (const cv::Vec3d& c : centers) mean += c / static_cast<double>(centers.size());
  cv::Mat a(static_cast<int>(2 * centers.size()), 4, CV_64F);
  for (size_t i = 0; i < centers.size(); ++i) {
    const cv::Matx33d& r = cam_from_enu[i];
    const cv::Vec3d t = -(r * (centers[i] - mean));
    cv::Matx34d p(r(0, 0), r(0, 1), r(0, 2), t[0], r(1, 0), r(1, 1), r(1, 2), t[1], r(2, 0),
                  r(2, 1), r(2, 2), t[2]);
    for (int c = 0; c < 4; ++c) {
      a.at<double>(2 * i, c) = normalized[i].x * p(2, c) - p(0, c);
      a.at<double>(2 * i + 1, c) = normalized[i].y * p(2, c) - p(1, c);
    }
  }
  cv::Mat w, u, vt;
  cv::SVD::compute(a, w, u, vt, cv::SVD::FULL_UV);
  const double h = vt.at<double>(3, 3);
  if (std::fabs(h) < 1e-12) return mean + cv::Vec3d(1e9, 1e9, 1e9);
  return mean +
         cv::Vec3d(vt.at<double>(3, 0) / h, vt.at<double>(3, 1) / h, vt.at<double>(3, 2) / h);
}

}  // namespace sightfix
