// A calibrated camera: pinhole intrinsics plus a lens model, either OpenCV's radial-tangential
// distortion (k1, k2, p1, p2, k3), the model cv::projectPoints and cv::calibrateCamera use, or
// OpenCV's fisheye (equidistant, Kannala-Brandt) model with k1..k4, the one cv::fisheye uses:
// theta = atan(r), theta_d = theta (1 + k1 theta^2 + k2 theta^4 + k3 theta^6 + k4 theta^8).
//
// Pixels follow OpenCV: (0, 0) is the centre of the top-left pixel, x right, y down.
// Files are OpenCV FileStorage YAML with `camera_matrix` (3x3), `distortion_coefficients`
// (1x4, 1x5, 4x1 or 5x1), `image_width`, `image_height`, i.e. what OpenCV's calibration tools
// write, so an existing calibration is used as is. A fisheye calibration says so with
// `distortion_model: fisheye` or with `fisheye_model: 1` (the key OpenCV's calibration sample
// writes, from memory) and has exactly 4 coefficients. Immutable after construction; thread-safe.
#pragma once

#include <array>
#include <opencv2/core.hpp>
#include <string>

#include "indexer/base/status.h"

namespace sightfix {

enum class LensModel { kPinhole, kFisheye };

// A calibration's own stated 1-sigma uncertainty: optional keys of the file
// (focal_length_sigma_px, k1_sigma, k2_sigma, boresight_sigma_deg) or fields of the wire's
// Calibration. 0 = not stated: UncertaintyOrDefault fills it in.
struct CalibrationUncertainty {
  double focal_px = 0;       // fx and fy together
  double k1 = 0, k2 = 0;     // distortion[0], distortion[1]
  double boresight_deg = 0;  // the camera's mounting rotation against the INS, per axis
};

// The longest readout a file may state: a slow CMOS sensor reads a frame in tens of milliseconds
// (from memory); 200 ms is surely a wrong unit.
inline constexpr double kMaxReadoutS = 0.2;

struct CameraModel {
  int width_px = 0;
  int height_px = 0;
  double fx = 0, fy = 0, cx = 0, cy = 0;  // pixels
  // Pinhole: k1, k2, p1, p2, k3. Fisheye: k1, k2, k3, k4, (unused 0).
  std::array<double, 5> distortion{0, 0, 0, 0, 0};
  LensModel lens = LensModel::kPinhole;
  CalibrationUncertainty uncertainty;
  // A rolling shutter's readout: seconds from the first row's exposure centre to the last's, the
  // middle row at the image's time (optional key rolling_shutter_readout_ms, the sensor's line
  // time times its rows from its datasheet; 0 = global shutter or not stated).
  double readout_s = 0;

  // Names the bad field in *error when false (non-positive size or focal length, principal
  // point outside the image, non-finite coefficients).
  bool IsValid(std::string* error) const;
  bool HasDistortion() const;
  cv::Matx33d K() const { return {fx, 0, cx, 0, fy, cy, 0, 0, 1}; }

  // Pixel of a point in camera coordinates. REQUIRES: p_camera[2] > 0.
  cv::Point2d Project(const cv::Vec3d& p_camera) const;
  // Distortion applied to normalized ideal coordinates (x/z, y/z).
  cv::Point2d Distort(const cv::Point2d& ideal) const;
  // Inverse of Distort by Newton iteration; converges for the distortion of ordinary lenses
  // inside the image (checked in tests to 1e-9 against Distort).
  cv::Point2d Undistort(const cv::Point2d& distorted) const;
  // Normalized ideal coordinates (x/z, y/z) of a pixel.
  cv::Point2d PixelToNormalized(const cv::Point2d& pixel) const;
};

// camera.uncertainty with the documented defaults where it states none, the spread of a
// workshop calibration that heat and refocusing have since moved (common practice, from memory):
// focal 1 % of fx, k1 0.03, k2 0.01 (or 0, held, where the lens has no k2), boresight 0.5 deg.
CalibrationUncertainty UncertaintyOrDefault(const CameraModel& camera);

// Reads and writes the OpenCV FileStorage layout above.
Result<CameraModel> LoadCameraModel(const std::string& path);
Status SaveCameraModel(const CameraModel& camera, const std::string& path);

}  // namespace sightfix
