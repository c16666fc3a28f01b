// The camera's motion during an image, as the realistic world's camera sees it
// (camera_nuisances.h): motion blur over the exposure time and the rolling shutter's row-by-row
// exposure, both from the rendered image and its per-pixel depth.
//
// Model. The camera moves at a constant velocity v and turns at a constant angular velocity w
// (both in the camera frame at the frame's time, the pose drive.csv and truth.csv give). A point
// seen at pixel p with camera-frame depth Z (the ray m = (x, y, 1) of p's ideal normalized
// coordinates) is, tau seconds later, at P(tau) = R(w tau)^T (Z m - v tau) in the moved camera
// (R(w tau) the rotation by the vector w tau), so its image moves by D(tau) = Project(P(tau)) - p:
// for a sideways velocity (0 at the optical axis) |D| = f |v| tau / Z, for a forward one
// |D| = r |v| tau / (Z - |v| tau) with r the distance from the focus of expansion, for a turn
// about the image's vertical axis |D| = f tan(|w| tau) at the centre (pinhole projection, common
// practice). Row y of an image of H rows is exposed from tau_y - t / 2 to tau_y + t / 2 where
// tau_y = readout (y / (H - 1) - 1/2): the middle row at the frame's time (readout 0: a global
// shutter).
//
// Pixel p's value is the mean of what p sees over its exposure. Two passes build it from the
// sharp image I:
//  - gather: the mean of I along the segment p - D(tau), tau over p's exposure, with p's own
//    depth, leaving out samples that land on a surface nearer than p's by kOccluderDepthRatio:
//    what p sees of its own surface or of anything farther (exact for a surface whose depth is
//    smooth around p, the flow at p - D being p's to first order, and for a background that
//    moves with the foreground, as under a pure turn);
//  - nearer surfaces passing over p: every pixel q splats its value along q + D_q(tau) (bilinear
//    weights summing to 1 per q) wherever it lands on a pixel whose surface lies more than
//    kOccluderDepthRatio farther away; the weight W gathered at p is the share of the exposure
//    a nearer surface covers p, and p = (1 - min(W, 1)) gather + min(W, 1) (splatted mean).
// The background hidden behind a nearer surface in the sharp image is estimated from what the
// gather sees of it along p's path (an error only where that path crosses the nearer surface:
// within |D| of an occluding edge). D is linear between the segment's ends (exact for a
// translation parallel to the image; the forward case's 1 / (Z - v tau) bends by |v| t / Z, under
// 1 % at 9 m/s, 8 ms and Z = 8 m). A row's time is its own, whichever row a point came from
// (rows move by D's vertical part: an error of that part times readout / rows, second order).
#pragma once

#include <opencv2/core.hpp>

#include "indexer/map/camera_model.h"

namespace sightfix::demo {

// The camera's motion at an image's time, in the camera frame then (x right, y down, z forward).
struct CameraMotion {
  cv::Vec3d velocity_mps{0, 0, 0};            // of the camera centre
  cv::Vec3d angular_velocity_rad_s{0, 0, 0};  // rotation vector rate
};

// A nearer surface hides p when its depth is below p's divided by this (its inverse depth above
// p's times this): 1.25, a depth step of 20 %, so that one smooth surface seen at a slant (depth
// varying a few per cent over a blur's length) is not taken as hiding itself.
constexpr double kOccluderDepthRatio = 1.25;

// Ideal normalized coordinates (x/z, y/z) of every pixel of the camera (CV_32FC2, its size):
// through the renderer's lens plan (distortion_plan.h) where it distorts, so the same rays the
// image was rendered with.
cv::Mat2f NormalizedCoordinates(const CameraModel& camera);

// The image displacement D(tau) of the point seen at pixel (x, y) with inverse depth
// inverse_depth_per_m (1/Z, 0 for the sky), for the camera model `camera` (lens distortion
// included). False when the moved point is behind the camera (or within 1 mm of its plane);
// a displacement longer than the image's diagonal is cut to it, direction kept.
bool ImageDisplacement(const CameraModel& camera, const CameraMotion& motion, cv::Point2d pixel,
                       double inverse_depth_per_m, double tau_s, cv::Point2d* displacement);

// The image `linear` (CV_32FC3, the renderer's linear light, camera.width_px x camera.height_px)
// exposed for exposure_s seconds by a camera moving as `motion`, its rows read out over
// readout_s seconds (0: global shutter), with inverse_depth (CV_32F, same size, 1/m, 0 for sky:
// RenderedView::inverse_depth). Returns a new image; `linear` unchanged. Deterministic and
// single-threaded. REQUIRES: exposure_s >= 0, readout_s >= 0.
cv::Mat ApplyCameraMotion(const cv::Mat& linear, const cv::Mat& inverse_depth,
                          const CameraModel& camera, const CameraMotion& motion, double exposure_s,
                          double readout_s);

}  // namespace sightfix::demo
