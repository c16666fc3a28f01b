#include "demo_route/distortion_plan.h"

#include <algorithm>
#include <cmath>
#include <map>
#include <mutex>
#include <sstream>
#include <string>

namespace sightfix::demo {
namespace {

std::string CameraKey(const CameraModel& c) {
  std::ostringstream s;
  s.precision(17);
  s << c.width_px << ' ' << c.height_px << ' ' << c.fx << ' ' << c.fy << ' ' << c.cx << ' ' << c.cy;
  for (double d : c.distortion) s << ' ' << d;
  return s.str();
}

// Undistorted normalized coordinates of every output pixel (CV_64F, output size), and their
// bounding box lo..hi.
void NormalizePixels(const CameraModel& cam, cv::Mat* nx, cv::Mat* ny, cv::Point2d* lo,
                     cv::Point2d* hi) {
  nx->create(cam.height_px, cam.width_px, CV_64F);
  ny->create(cam.height_px, cam.width_px, CV_64F);
  double x0 = 1e18, y0 = 1e18, x1 = -1e18, y1 = -1e18;
  for (int y = 0; y < cam.height_px; ++y) {
    for (int x = 0; x < cam.width_px; ++x) {
      const cv::Point2d n = cam.PixelToNormalized({double(x), double(y)});
      nx->at<double>(y, x) = n.x, ny->at<double>(y, x) = n.y;
      x0 = std::min(x0, n.x), x1 = std::max(x1, n.x), y0 = std::min(y0, n.y),
      y1 = std::max(y1, n.y);
    }
  }
  *lo = {x0, y0};
  *hi = {x1, y1};
}

std::shared_ptr<DistortionPlan> BuildPlan(const CameraModel& cam) {
  auto plan = std::make_shared<DistortionPlan>();
  cv::Mat nx, ny;
  cv::Point2d lo, hi;
  NormalizePixels(cam, &nx, &ny, &lo, &hi);
  const int margin = 3;
  const double cx = -lo.x * cam.fx + margin, cy = -lo.y * cam.fy + margin;
  plan->canvas_k = cv::Matx33d(cam.fx, 0, cx, 0, cam.fy, cy, 0, 0, 1);
  plan->canvas_size = cv::Size(static_cast<int>(std::ceil((hi.x - lo.x) * cam.fx)) + 2 * margin,
                               static_cast<int>(std::ceil((hi.y - lo.y) * cam.fy)) + 2 * margin);
  plan->map_x.create(cam.height_px, cam.width_px, CV_32F);
  plan->map_y.create(cam.height_px, cam.width_px, CV_32F);
  for (int y = 0; y < cam.height_px; ++y)
    for (int x = 0; x < cam.width_px; ++x) {
      plan->map_x.at<float>(y, x) = static_cast<float>(cam.fx * nx.at<double>(y, x) + cx);
      plan->map_y.at<float>(y, x) = static_cast<float>(cam.fy * ny.at<double>(y, x) + cy);
    }
  return plan;
}

}  // namespace

std::shared_ptr<const DistortionPlan> PlanFor(const CameraModel& cam) {
  static std::mutex mu;
  static std::map<std::string, std::shared_ptr<const DistortionPlan>> cache;
  const std::string key = CameraKey(cam);
  {
    std::lock_guard<std::mutex> lock(mu);
    auto it = cache.find(key);
    if (it != cache.end()) return it->second;
  }
  std::shared_ptr<const DistortionPlan> plan = BuildPlan(cam);  // outside the lock: it is slow
  std::lock_guard<std::mutex> lock(mu);
  return cache.emplace(key, std::move(plan)).first->second;
}

}  // namespace sightfix::demo
