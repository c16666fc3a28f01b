// Cast shadows of the sun (realistic world): an orthographic shadow map whose image plane is the
// ground. A point P is mapped along the sun's rays onto z = 0, g = P.xy - P.z s.xy / s.z (s the
// unit vector towards the sun), at t = P.z / s.z along the ray g + t s; each texel of g keeps
// the largest t of any occluder over it (the occluder nearest the sun), so P is in shadow when
// that t exceeds its own. Occluders are the scene's quads (walls, posts, trunks, vehicle boxes,
// canopies alpha-tested like the view), rasterised as the parallelograms they project to. This
// is an ordinary shadow map (Williams 1978, common practice) with an oblique projection: its
// texels are square on the ground, where most shadows fall.
//
// Built once per view over the ground the camera sees to a range; Lit() is const and
// thread-safe; one map per render (not shared between threads while being built).
#pragma once

#include <opencv2/core.hpp>

#include "demo_route/town_painter.h"
#include "demo_route/town_renderer.h"

namespace sightfix::demo {

class SunShadowMap {
 public:
  // A map over the ground rectangle `region` (ENU metres, of mapped points g) with square texels
  // of texel_m. REQUIRES: sun_dir a unit vector with sun_dir[2] > 0.
  SunShadowMap(const cv::Vec3d& sun_dir, const cv::Rect2d& region, double texel_m);

  // The ground rectangle to map for a camera at `position` looking along `forward` (ENU), with
  // a horizontal half field of view of half_fov_rad, drawn to range_m: the camera's ground
  // wedge, grown towards where points up to max_height_m high map (away from the sun, at most
  // range_m further).
  static cv::Rect2d RegionFor(const cv::Vec3d& sun_dir, const cv::Vec3d& position,
                              const cv::Vec3d& forward, double half_fov_rad, double range_m,
                              double max_height_m);

  // Adds the quad as an occluder; `texture` (BGRA cut-outs) is alpha-tested at the map's texel
  // size, nullptr or a BGR texture makes it opaque. Quads seen edge-on from the sun, or mapping
  // outside the region, add nothing.
  void AddQuad(const Quad& q, const Texture* texture);

  // The share of sunlight reaching point p (ENU) on a surface of unit normal n: 1 lit, 0 in
  // shadow, between at a shadow's edge (percentage-closer filtering over the 2 x 2 nearest
  // texels). p is moved normal_offset_texels along n first (normal offset, common practice, so
  // a surface in the map does not shadow itself; the ground is not in it and takes 0); points
  // mapping outside the region are lit.
  float Lit(const cv::Vec3d& p, const cv::Vec3d& n, double normal_offset_texels = 1.5) const;

  double texel_m() const { return texel_m_; }
  cv::Size size() const { return t_max_.size(); }

 private:
  cv::Vec2d Map(const cv::Vec3d& p) const {
    return {p[0] - p[2] * shift_[0], p[1] - p[2] * shift_[1]};
  }

  cv::Vec3d sun_;
  cv::Vec2d shift_;  // s.xy / s.z
  cv::Rect2d region_;
  double texel_m_;
  cv::Mat1f t_max_;  // -inf where nothing occludes
};

}  // namespace sightfix::demo
