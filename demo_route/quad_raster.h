// Visibility pass of the demo town's renderer (town_renderer.h): which surface each sample of
// an ideal pinhole canvas sees, and at what depth. The ground plane is written first, then
// every quad that survives culling, nearest wins; cut-out textures are alpha-tested. Shading
// (scene_shading.h) then recomputes each sample's surface point from its ray, so nothing but
// the depth and the surface id is stored per sample.
//
// Canvas conventions: intrinsics k (fx, fy, cx, cy in canvas pixels, no skew), sample (x, y) at
// the normalized ray m = ((x - cx) / fx, (y - cy) / fy, 1) in the camera frame. Single-threaded
// per buffer; the functions hold no state.
#pragma once

#include <opencv2/core.hpp>

#include "demo_route/town_painter.h"
#include "demo_route/town_renderer.h"

namespace sightfix::demo {

// Surface ids of a VisibilityBuffer besides quad raster indices (>= 0).
constexpr int kSkySample = -1;
constexpr int kGroundSample = -2;

struct VisibilityBuffer {
  explicit VisibilityBuffer(cv::Size size);  // all sky
  cv::Mat1f depth;  // camera-frame z of the nearest hit (the ray lambda m); inf for sky
  cv::Mat1i id;     // kSkySample, kGroundSample or an index into the QuadRaster list
};

// A quad set up for one view: its plane and texture axes in camera coordinates, so that along
// the ray m it is hit at lambda = h / n.m with texture coordinates u, v below.
struct QuadRaster {
  const Quad* quad;
  const Texture* texture;
  cv::Vec3d n;       // U x V in camera coordinates
  double h, nn;      // n . o_c and n . n
  cv::Vec3d au, av;  // u = (lambda au.m - cu) / nn, v likewise
  double cu, cv;
};

// False when q cannot be seen from the pose: beyond max_range_m, wholly behind the camera
// (forward: the camera's optical axis in ENU), or a back face of a one-sided quad.
bool MayBeVisible(const Quad& q, const CameraPose& pose, const cv::Vec3d& forward,
                  double max_range_m);

// Sets up *qr (without its texture) and the canvas box *box the quad covers in front of the
// near plane; false if it covers none, is degenerate, or is seen edge-on.
bool SetUpQuadRaster(const Quad& q, const CameraPose& pose, const cv::Matx33d& k, cv::Size size,
                     double near_m, QuadRaster* qr, cv::Rect* box);

// Every ray going down meets the road plane z = 0: writes its depth and kGroundSample where the
// hit lies within 1.5 max_range_m.
void RasterizeGround(const CameraPose& pose, const cv::Matx33d& k, double max_range_m,
                     VisibilityBuffer* vis);

// Writes depth and raster_id for every sample in box where the quad is hit in front of the
// near plane and nearer than what the buffer holds (and, for cut-outs, opaque).
void RasterizeQuad(const QuadRaster& qr, const cv::Rect& box, const cv::Matx33d& k, double near_m,
                   int raster_id, VisibilityBuffer* vis);

}  // namespace sightfix::demo
