// The realistic world's calibration error: the camera.yml a drive is delivered with differs from
// the camera its images were rendered with (focal length, principal point, radial distortion),
// and its images were exposed a little after the times its drive.csv gives them.
#pragma once

#include <opencv2/core.hpp>

#include "demo_route/random.h"
#include "demo_route/world_nuisances.h"
#include "indexer/map/camera_model.h"

namespace sightfix::demo {

// Written calibration minus the true one; all zero (and focal_scale 1) in the clean world.
struct CalibrationError {
  double focal_scale = 1;        // fx' = fx focal_scale, fy' = fy focal_scale
  cv::Vec2d principal_point_px;  // (cx', cy') - (cx, cy), pixels
  double k1 = 0, k2 = 0;         // k1' - k1, k2' - k2 (distortion[0], distortion[1])
  double time_offset_s = 0;      // exposure time minus drive.csv's time, seconds
};

// Each value from its range (signs and the principal point's direction uniformly random); k2
// only where the true lens has a k2 term (non-zero distortion[1]).
CalibrationError DrawCalibrationError(const CalibrationErrorRanges& ranges,
                                      const CameraModel& truth, Rng& rng);

// truth with e's focal, principal point and distortion errors applied.
CameraModel WithCalibrationError(const CameraModel& truth, const CalibrationError& e);

}  // namespace sightfix::demo
