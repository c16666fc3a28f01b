#include "demo_route/calibration_error.h"

#include <cmath>

namespace sightfix::demo {
namespace {

double Signed(const Range& r, Rng& rng) {
  const double magnitude = rng.Uniform(r.lo, r.hi);
  return rng.Chance(0.5) ? magnitude : -magnitude;
}

}  // namespace

CalibrationError DrawCalibrationError(const CalibrationErrorRanges& r, const CameraModel& truth,
                                      Rng& rng) {
  CalibrationError e;
  e.focal_scale = 1 + Signed(r.focal_error_fraction, rng);
  const double offset = rng.Uniform(r.principal_point_error_px.lo, r.principal_point_error_px.hi);
  const double direction = rng.Uniform(0, 2 * M_PI);
  e.principal_point_px = offset * cv::Vec2d(std::cos(direction), std::sin(direction));
  e.k1 = Signed(r.k1_error, rng);
  e.k2 = truth.distortion[1] != 0 ? Signed(r.k2_error, rng) : 0.0;
  e.time_offset_s = rng.Uniform(r.time_offset_s.lo, r.time_offset_s.hi);
  return e;
}

CameraModel WithCalibrationError(const CameraModel& truth, const CalibrationError& e) {
  CameraModel c = truth;
  c.fx *= e.focal_scale, c.fy *= e.focal_scale;
  c.cx += e.principal_point_px[0], c.cy += e.principal_point_px[1];
  c.distortion[0] += e.k1, c.distortion[1] += e.k2;
  return c;
}

}  // namespace sightfix::demo
