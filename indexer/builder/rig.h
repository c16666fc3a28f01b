// A camera rig on a vehicle with an INS, as a mapping team's survey records it.
//
// rig.yml (OpenCV FileStorage YAML, paths relative to it):
//   ins: ins.csv                      # the INS pose log (below)
//   cameras:
//     - name: front
//       calibration: front.yml        # camera_model.h (pinhole or fisheye)
//       images: front.csv             # `image,timestamp`: image paths, camera-clock times
//       lever_arm_m: [0.0, -0.3, 1.2] # camera centre in the body frame, metres
//       boresight_deg: [0.0, 0.0, 0.0] # heading, pitch, roll of the camera against the body
//       time_offset_s: 0.0            # INS time = camera time + time_offset_s
// Body frame: the frame of a camera looking straight ahead with the INS attitude, as
// rotation.h defines it (x right, y down, z forward). So a camera with zero lever arm and zero
// boresight has the INS pose, and boresight [90, 0, 0] is a camera looking to the right.
// Composed: R_enu_cam = R_enu_body * R_body_cam, R_body_cam = EnuFromCamera(0,0,0)^T *
// EnuFromCamera(boresight); centre = INS position + R_enu_body * lever_arm (in the INS's local
// ENU frame).
// ins.csv: header `timestamp,lat,lon,height,heading_deg,pitch_deg,roll_deg,sigma_h_m`, ISO 8601
// UTC, WGS84 degrees, ellipsoidal metres, attitude as rotation.h, 1-sigma per horizontal axis.
// Times must increase. Thread safety: pure functions.
#pragma once

#include <string>
#include <vector>

#include "indexer/base/geo.h"
#include "indexer/base/rotation.h"
#include "indexer/base/status.h"
#include "indexer/map/drive_manifest.h"

namespace sightfix {

struct RigCamera {
  std::string name, calibration, images;  // paths as written in rig.yml
  cv::Vec3d lever_arm_m;
  Attitude boresight;
  double time_offset_s = 0;
};

struct Rig {
  std::string dir;  // the rig file's folder
  std::string ins;
  std::vector<RigCamera> cameras;
};

struct InsPose {
  double time_s = 0;
  GeoPoint position;
  Attitude attitude;
  double sigma_h_m = 0;
};

Result<Rig> LoadRig(const std::string& path);
Result<std::vector<InsPose>> ReadInsLog(const std::string& path);
// The INS pose at t: position along the geodesic and height linearly, attitude by spherical
// linear interpolation; kInvalidArgument outside the log or across a gap wider than max_gap_s.
Result<InsPose> InsPoseAt(const std::vector<InsPose>& log, double t, double max_gap_s);
// The camera's pose from the body pose and the camera's mounting.
InsPose CameraPose(const InsPose& body, const RigCamera& camera);
// Every image of every camera as survey rows (image and calibration paths relative to the rig's
// folder, times on the INS clock), in time order. With skip_bad, rows that fail (outside the
// log, in a gap) are left out and described in *problems; otherwise the first fails the load.
Result<std::vector<DriveRow>> RigSurvey(const Rig& rig, double max_gap_s, bool skip_bad,
                                        std::vector<std::string>* problems);

}  // namespace sightfix
