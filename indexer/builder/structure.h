// Structure of a survey: 3D points seen by several survey frames, with their uncertainty.
//
// 1. Pairs: each frame with the next frames of the drive that stand within max_neighbour_m and
//    look the same way (heading within max_heading_diff_deg).
// 2. Matches: RootSIFT ratio test + mutual check (local_features.h), then kept only if they fit
//    the epipolar geometry the survey poses give (Sampson distance under epipolar_px): the
//    poses are known, so no RANSAC is needed.
// 3. Tracks: union-find over (frame, keypoint); a track with two keypoints in one frame is
//    ambiguous and dropped.
// 4. Triangulation: linear multi-view (DLT) in ENU, then observations reprojecting beyond
//    max_reproj_px are dropped one by one; a point needs two observations whose rays meet at
//    min_triangulation_deg or more (rays meeting at a shallow angle put points metres off:
//    docs/design.md 5.3 measured 2.5 m median error with all points, 0.36 m without those under
//    2 deg).
// 5. Bundle adjustment (Ceres Solver): frame poses and points, reprojection residuals in pixels
//    with a Huber loss, and the survey's GNSS/INS poses as priors (sigma_h_m per axis for the
//    centre, attitude_sigma_deg for the attitude). Frames with sigma_h_m = 0 are held fixed.
// 6. Covariance of each point given the adjusted poses: (sum J^T J)^-1 of its observations at
//    pixel_sigma_px. The survey poses' own uncertainty is left to the consumer (the engine adds
//    the references' sigma_h_m to a fix), so it is not counted twice.
//
// Frames: ENU (metres, any fixed origin), camera frame as rotation.h. Thread safety: BuildStructure
// is reentrant; it runs `jobs` threads of its own and pins nothing.
#pragma once

#include <opencv2/core.hpp>
#include <string>
#include <utility>
#include <vector>

#include "indexer/base/status.h"
#include "indexer/vision/local_features.h"
#include "indexer/vision/triangulation.h"

namespace sightfix {

struct StructureOptions {
  int max_neighbours = 3;              // later frames a frame is matched with
  double max_neighbour_m = 12.0;       // farther frames share too little at street scale
  double max_heading_diff_deg = 30.0;  // frames looking apart share little
  double epipolar_px = 2.0;            // Sampson distance at the frame's focal length
  double min_triangulation_deg = 2.0;  // docs/design.md 5.3
  double max_reproj_px = 2.0;          // per observation, before and after adjustment
  double pixel_sigma_px = 1.0;         // keypoint noise (SIFT, common practice ~1 px)
  double attitude_sigma_deg = 0.1;     // INS attitude prior; drive.csv carries no column for it
  int ba_max_iterations = 50;          // 0: no adjustment (points as triangulated)
  int jobs = 0;                        // threads for matching and the solver; 0 = all cores
  bool Validate(std::string* error) const;
};

// One survey frame. `features` is borrowed and must outlive the call.
struct SurveyView {
  cv::Matx33d enu_from_camera;  // rotation.h's EnuFromCamera
  cv::Vec3d center_enu;
  double sigma_h_m = 0;   // 1-sigma per axis of the centre; 0 = exact, held fixed
  double focal_px = 500;  // for pixel-scaled thresholds
  // 1-sigma of the attitude prior; 0 = StructureOptions::attitude_sigma_deg. Larger for inputs
  // that carry no pitch and roll (EXIF, GPX).
  double attitude_sigma_deg = 0;
  // The vehicle's motion at the row's time (from its neighbouring rows; 0 where it has none):
  // what self-calibration's time offset moves the camera by (self_calibration.h).
  cv::Vec3d velocity_enu;     // m/s
  double yaw_rate_rad_s = 0;  // about up, counterclockwise
  const LocalFeatures* features = nullptr;
};

struct StructurePoint {
  cv::Vec3d enu;
  cv::Matx33d covariance;                         // m^2, ENU
  std::vector<std::pair<int, int>> observations;  // (view, keypoint)
  int representative = 0;                         // index into observations: the medoid descriptor
};

struct StructureSummary {
  int pairs = 0, matches = 0, epipolar_matches = 0, tracks = 0, points = 0;
  int observations = 0;
  double ba_initial_rms_px = 0, ba_final_rms_px = 0;
  double match_s = 0, triangulate_s = 0, adjust_s = 0;
};

struct StructureResult {
  std::vector<StructurePoint> points;
  std::vector<cv::Matx33d> enu_from_camera;  // adjusted, per view
  std::vector<cv::Vec3d> center_enu;         // adjusted, per view
  StructureSummary summary;
};

// Fails (kInvalidArgument) on bad options or a view without features.
Result<StructureResult> BuildStructure(const std::vector<SurveyView>& views,
                                       const StructureOptions& options);

}  // namespace sightfix
