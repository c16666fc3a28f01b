// The one camera-rotation helper of sightfix.
//
// Frames: world is local East-North-Up (x east, y north, z up). Camera is OpenCV's (x right,
// y down, z forward, the optical axis).
// Attitude: heading_deg clockwise from true north (0 = looking north, 90 = east); pitch_deg
// up positive; roll_deg positive clockwise as seen from behind the camera (right side down).
// Euler order: intrinsic heading, then pitch about the rotated right axis, then roll about the
// rotated forward axis (the aerospace yaw-pitch-roll sequence of a forward-right-down body).
// Valid for |pitch_deg| < 90; at the gimbal singularity AttitudeFromRotation sets roll to 0.
// Quaternions are Hamilton, unit, (w, x, y, z), and rotate vectors as q v q*.
#pragma once

#include <opencv2/core/matx.hpp>

namespace sightfix {

struct Attitude {
  double heading_deg = 0;
  double pitch_deg = 0;
  double roll_deg = 0;
};

struct Quaternion {
  double w = 1, x = 0, y = 0, z = 0;
};

// R such that v_enu = R * v_camera.
cv::Matx33d EnuFromCamera(const Attitude& attitude);
// Inverse of EnuFromCamera for a proper rotation; heading in [0, 360).
Attitude AttitudeFromEnuFromCamera(const cv::Matx33d& enu_from_camera);

// Rz(yaw): a turn of yaw radians counterclockwise about up (ENU z); a vehicle turning left.
cv::Matx33d RotationAboutUp(double yaw_rad);

// Rotation matrix <-> unit quaternion (Shepperd's method; w >= 0 on output).
Quaternion QuaternionFromRotation(const cv::Matx33d& r);
cv::Matx33d RotationFromQuaternion(const Quaternion& q);

// Smallest angle in degrees between two rotations (angle of a^T b).
double RotationAngleDeg(const cv::Matx33d& a, const cv::Matx33d& b);
// Heading difference wrapped to [-180, 180).
double WrapDeg180(double deg);

}  // namespace sightfix
