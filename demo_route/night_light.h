// Artificial light of the realistic world's night drive: the town's street lamps (town_layout.h
// poles of kind kLamp, the light under the end of each arm) and the camera car's low beams, as
// irradiance on a surface in the units of Appearance::sun (a sunlit surface facing the sun gets
// Appearance::sun). Inverse-square point lights (common practice); the lamp's luminaire sends
// its light down (intensity times sqrt of the cosine from straight down), the low beams ahead
// within a Gaussian spread of 0.3 rad, aimed about 1 % down (Gaussian of 0.1 in slope below
// that) and nothing above a cut-off just over the horizontal (a low beam's cut-off, common
// practice). No shadows from these lights.
//
// Immutable after construction; thread-safe.
#pragma once

#include <opencv2/core.hpp>
#include <vector>

#include "demo_route/town_layout.h"

namespace sightfix::demo {

class StreetLamps {
 public:
  explicit StreetLamps(const Town& town);

  // Where each lamp's light is (ENU metres), in the town's pole order.
  const std::vector<cv::Vec3d>& lights() const { return lights_; }

  // Sum over lamps within kReachM of p of intensity * pattern * max(0, n . l) / r^2, times
  // colour (BGR). n: the surface's unit normal towards the viewer's side.
  cv::Vec3f Irradiance(const cv::Vec3d& p, const cv::Vec3d& n, double intensity,
                       const cv::Vec3d& colour) const;

  // Lamps further than this light nothing (their light there is under 2 % of that under them).
  static constexpr double kReachM = 25;

 private:
  std::vector<cv::Vec3d> lights_;
  // Lamps by cell of a kReachM grid over their bounding box.
  cv::Vec2d grid_origin_;
  int grid_cols_ = 0, grid_rows_ = 0;
  std::vector<std::vector<int>> cells_;
};

// The camera car's low beams: one light 0.7 m above the road, 1.5 m ahead of the camera along its
// heading (forward: the camera's optical axis, any pitch).
struct Headlights {
  Headlights(const cv::Vec3d& camera_position, const cv::Vec3d& forward, double intensity,
             const cv::Vec3d& colour);
  cv::Vec3f Irradiance(const cv::Vec3d& p, const cv::Vec3d& n) const;

  cv::Vec3d position, heading;  // heading: unit, horizontal
  double intensity;
  cv::Vec3f colour;
};

}  // namespace sightfix::demo
