#include "demo_route/night_light.h"

#include <algorithm>
#include <cmath>

namespace sightfix::demo {
namespace {

constexpr double kMinDistanceM = 0.5;  // no light source is a point nearer than this

}  // namespace

StreetLamps::StreetLamps(const Town& town) {
  for (const Pole& p : town.poles) {
    if (p.kind != Pole::kLamp) continue;
    // The lamp head at the end of the 1.6 m arm, under it (town_renderer.cc draws the arm).
    const cv::Vec2d f(std::cos(p.facing_rad), std::sin(p.facing_rad));
    const cv::Vec2d head = p.base + 1.6 * f;
    lights_.emplace_back(head[0], head[1], p.height_m - 0.2);
  }
  if (lights_.empty()) return;
  double x0 = 1e18, y0 = 1e18, x1 = -1e18, y1 = -1e18;
  for (const cv::Vec3d& l : lights_)
    x0 = std::min(x0, l[0]), y0 = std::min(y0, l[1]), x1 = std::max(x1, l[0]),
    y1 = std::max(y1, l[1]);
  grid_origin_ = {x0, y0};
  grid_cols_ = static_cast<int>((x1 - x0) / kReachM) + 1;
  grid_rows_ = static_cast<int>((y1 - y0) / kReachM) + 1;
  cells_.resize(size_t(grid_cols_) * grid_rows_);
  for (size_t i = 0; i < lights_.size(); ++i) {
    const int cx = static_cast<int>((lights_[i][0] - x0) / kReachM);
    const int cy = static_cast<int>((lights_[i][1] - y0) / kReachM);
    cells_[size_t(cy) * grid_cols_ + cx].push_back(static_cast<int>(i));
  }
}

cv::Vec3f StreetLamps::Irradiance(const cv::Vec3d& p, const cv::Vec3d& n, double intensity,
                                  const cv::Vec3d& colour) const {
  double sum = 0;
  const int cx = static_cast<int>(std::floor((p[0] - grid_origin_[0]) / kReachM));
  const int cy = static_cast<int>(std::floor((p[1] - grid_origin_[1]) / kReachM));
  for (int y = std::max(0, cy - 1); y <= std::min(grid_rows_ - 1, cy + 1); ++y)
    for (int x = std::max(0, cx - 1); x <= std::min(grid_cols_ - 1, cx + 1); ++x)
      for (int i : cells_[size_t(y) * grid_cols_ + x]) {
        const cv::Vec3d to_light = lights_[i] - p;
        const double r = std::max(kMinDistanceM, cv::norm(to_light));
        if (r > kReachM) continue;
        const double facing = n.dot(to_light) / r, down = to_light[2] / r;
        if (facing <= 0 || down <= 0) continue;
        sum += std::sqrt(down) * facing / (r * r);
      }
  const float e = static_cast<float>(sum * intensity);
  return cv::Vec3f(colour) * e;
}

Headlights::Headlights(const cv::Vec3d& camera_position, const cv::Vec3d& forward,
                       double intensity_, const cv::Vec3d& colour_)
    : intensity(intensity_), colour(colour_) {
  cv::Vec2d f(forward[0], forward[1]);
  f = cv::norm(f) > 1e-9 ? f / cv::norm(f) : cv::Vec2d(1, 0);
  heading = {f[0], f[1], 0};
  position = {camera_position[0] + 1.5 * f[0], camera_position[1] + 1.5 * f[1], 0.7};
}

cv::Vec3f Headlights::Irradiance(const cv::Vec3d& p, const cv::Vec3d& n) const {
  const cv::Vec3d d = p - position;
  const double r = std::max(kMinDistanceM, cv::norm(d));
  const double ahead = heading.dot(d) / r;
  if (ahead <= 0) return {0, 0, 0};
  const double facing = -n.dot(d) / r;
  if (facing <= 0) return {0, 0, 0};
  // Spread: the angle off the heading in the horizontal; cut-off: 0.6 deg above horizontal full
  // off, 0 deg full on.
  const double side = std::abs(heading[0] * d[1] - heading[1] * d[0]);
  const double yaw = std::atan2(side, heading.dot(d));
  const double rise = d[2] / r;
  const double cut = std::clamp((0.0105 - rise) / 0.0105, 0.0, 1.0);
  // Aimed about 1 % down: the road a few metres ahead gets little, far road the most.
  const double below = std::max(0.0, -rise - 0.015) / 0.1;
  const double pattern = std::exp(-(yaw / 0.3) * (yaw / 0.3) - below * below) * cut;
  return colour * static_cast<float>(intensity * pattern * facing / (r * r));
}

}  // namespace sightfix::demo
