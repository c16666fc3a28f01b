#include "indexer/base/rotation.h"

#include <algorithm>
#include <cmath>

namespace sightfix {
namespace {

constexpr double kDegToRad = M_PI / 180.0;

// ENU axes of the north-east-down frame: columns are N, E, D expressed in ENU.
const cv::Matx33d kEnuFromNed(0, 1, 0, 1, 0, 0, 0, 0, -1);
// Camera axes in the forward-right-down body: x_cam = right, y_cam = down, z_cam = forward.
const cv::Matx33d kBodyFromCamera(0, 0, 1, 1, 0, 0, 0, 1, 0);

cv::Matx33d NedFromBody(double yaw, double pitch, double roll) {
  const double cy = std::cos(yaw), sy = std::sin(yaw);
  const double cp = std::cos(pitch), sp = std::sin(pitch);
  const double cr = std::cos(roll), sr = std::sin(roll);
  const cv::Matx33d rz(cy, -sy, 0, sy, cy, 0, 0, 0, 1);
  const cv::Matx33d ry(cp, 0, sp, 0, 1, 0, -sp, 0, cp);
  const cv::Matx33d rx(1, 0, 0, 0, cr, -sr, 0, sr, cr);
  return rz * ry * rx;
}

}  // namespace

cv::Matx33d RotationAboutUp(double yaw_rad) {
  const double c = std::cos(yaw_rad), s = std::sin(yaw_rad);
  return cv::Matx33d(c, -s, 0, s, c, 0, 0, 0, 1);
}

cv::Matx33d EnuFromCamera(const Attitude& a) {
  return kEnuFromNed *
         NedFromBody(a.heading_deg * kDegToRad, a.pitch_deg * kDegToRad, a.roll_deg * kDegToRad) *
         kBodyFromCamera;
}

Attitude AttitudeFromEnuFromCamera(const cv::Matx33d& enu_from_camera) {
  const cv::Matx33d m = kEnuFromNed.t() * enu_from_camera * kBodyFromCamera.t();  // NED from body
  Attitude a;
  const double sp = std::clamp(-m(2, 0), -1.0, 1.0);
  a.pitch_deg = std::asin(sp) / kDegToRad;
  if (std::abs(sp) < 1.0 - 1e-12) {
    a.heading_deg = std::atan2(m(1, 0), m(0, 0)) / kDegToRad;
    a.roll_deg = std::atan2(m(2, 1), m(2, 2)) / kDegToRad;
  } else {
    a.heading_deg = std::atan2(-m(0, 1), m(1, 1)) / kDegToRad;
    a.roll_deg = 0;
  }
  if (a.heading_deg < 0) a.heading_deg += 360.0;
  if (a.heading_deg >= 360.0) a.heading_deg -= 360.0;
  return a;
}

Quaternion QuaternionFromRotation(const cv::Matx33d& r) {
  Quaternion q;
  const double trace = r(0, 0) + r(1, 1) + r(2, 2);
  if (trace > 0) {
    const double s = 2.0 * std::sqrt(1.0 + trace);
    q = {0.25 * s, (r(2, 1) - r(1, 2)) / s, (r(0, 2) - r(2, 0)) / s, (r(1, 0) - r(0, 1)) / s};
  } else if (r(0, 0) > r(1, 1) && r(0, 0) > r(2, 2)) {
    const double s = 2.0 * std::sqrt(1.0 + r(0, 0) - r(1, 1) - r(2, 2));
    q = {(r(2, 1) - r(1, 2)) / s, 0.25 * s, (r(0, 1) + r(1, 0)) / s, (r(0, 2) + r(2, 0)) / s};
  } else if (r(1, 1) > r(2, 2)) {
    const double s = 2.0 * std::sqrt(1.0 + r(1, 1) - r(0, 0) - r(2, 2));
    q = {(r(0, 2) - r(2, 0)) / s, (r(0, 1) + r(1, 0)) / s, 0.25 * s, (r(1, 2) + r(2, 1)) / s};
  } else {
    const double s = 2.0 * std::sqrt(1.0 + r(2, 2) - r(0, 0) - r(1, 1));
    q = {(r(1, 0) - r(0, 1)) / s, (r(0, 2) + r(2, 0)) / s, (r(1, 2) + r(2, 1)) / s, 0.25 * s};
  }
  if (q.w < 0) q = {-q.w, -q.x, -q.y, -q.z};
  const double n = std::sqrt(q.w * q.w + q.x * q.x + q.y * q.y + q.z * q.z);
  return {q.w / n, q.x / n, q.y / n, q.z / n};
}

cv::Matx33d RotationFromQuaternion(const Quaternion& q) {
  const double w = q.w, x = q.x, y = q.y, z = q.z;
  return cv::Matx33d(1 - 2 * (y * y + z * z), 2 * (x * y - w * z), 2 * (x * z + w * y),
                     2 * (x * y + w * z), 1 - 2 * (x * x + z * z), 2 * (y * z - w * x),
                     2 * (x * z - w * y), 2 * (y * z + w * x), 1 - 2 * (x * x + y * y));
}

double RotationAngleDeg(const cv::Matx33d& a, const cv::Matx33d& b) {
  // atan2 of the sine and cosine parts stays exact near 0 where acos of the trace does not.
  const cv::Matx33d d = a.t() * b;
  const double c = (d(0, 0) + d(1, 1) + d(2, 2) - 1.0) / 2.0;
  const double s = 0.5 * std::sqrt(std::pow(d(2, 1) - d(1, 2), 2) + std::pow(d(0, 2) - d(2, 0), 2) +
                                   std::pow(d(1, 0) - d(0, 1), 2));
  return std::atan2(s, c) / kDegToRad;
}

double WrapDeg180(double deg) {
  double w = std::fmod(deg + 180.0, 360.0);
  if (w < 0) w += 360.0;
  return w - 180.0;
}

}  // namespace sightfix
