#include "demo_route/urban_canyon.h"

#include <algorithm>
#include <cmath>

namespace sightfix::demo {
namespace {

double Cross(const cv::Vec2d& a, const cv::Vec2d& b) { return a[0] * b[1] - a[1] * b[0]; }

// Distance along the unit ray p + t dir (t > 0) to segment a-b; infinity if it misses.
double RayToSegment(const cv::Vec2d& p, const cv::Vec2d& dir, const cv::Vec2d& a,
                    const cv::Vec2d& b) {
  const cv::Vec2d e = b - a;
  const double denom = Cross(dir, e);
  if (std::abs(denom) < 1e-12) return INFINITY;  // parallel
  const cv::Vec2d ap = a - p;
  const double t = Cross(ap, e) / denom, u = Cross(ap, dir) / denom;
  return t > 0 && u >= 0 && u <= 1 ? t : INFINITY;
}

// Nearest facade hit by the ray: *distance_m (infinity if none) and *height_m.
void NearestFacade(const Town& town, const cv::Vec2d& p, const cv::Vec2d& dir, double* distance_m,
                   double* height_m) {
  *distance_m = INFINITY, *height_m = 0;
  for (const Building& b : town.buildings) {
    for (int i = 0; i < 4; ++i) {
      const double t = RayToSegment(p, dir, b.footprint[i], b.footprint[(i + 1) % 4]);
      if (t < *distance_m) *distance_m = t, *height_m = b.height_m;
    }
  }
}

}  // namespace

Canyon CanyonAt(const Town& town, const cv::Vec2d& p, const cv::Vec2d& travel) {
  const cv::Vec2d along = travel / cv::norm(travel);
  const cv::Vec2d left(-along[1], along[0]);
  double l, r, lh, rh;
  NearestFacade(town, p, left, &l, &lh);
  NearestFacade(town, p, -left, &r, &rh);
  Canyon c;
  if (l <= Canyon::kMaxReachM) c.left_m = l, c.left_height_m = lh;
  if (r <= Canyon::kMaxReachM) c.right_m = r, c.right_height_m = rh;
  if (c.left_m > 0 && c.right_m > 0) c.aspect_ratio = std::min(lh, rh) / (c.left_m + c.right_m);
  return c;
}

}  // namespace sightfix::demo
