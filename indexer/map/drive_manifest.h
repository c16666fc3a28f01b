// drive.csv: the manifest of one drive (survey or query), one row per image.
//
// Header row, then columns in this order:
//   image,timestamp,lat,lon,height,heading_deg,pitch_deg,roll_deg,camera,sigma_h_m
// image: path relative to the manifest's folder; timestamp: ISO 8601 UTC; lat/lon: WGS84
// degrees; height: ellipsoidal metres; attitude as in rotation.h; camera: a calibration file
// (camera_model.h) beside the manifest; sigma_h_m: 1-sigma horizontal accuracy of the pose in
// metres. For query drives the pose columns are ground truth, read only by the evaluator.
#pragma once

#include <string>
#include <vector>

#include "indexer/base/geo.h"
#include "indexer/base/rotation.h"
#include "indexer/base/status.h"

namespace sightfix {

extern const char kDriveManifestHeader[];

struct DriveRow {
  std::string image;
  double timestamp_s = 0;  // Unix seconds, UTC
  GeoPoint position;
  Attitude attitude;
  std::string camera;
  double sigma_h_m = 0;
};

// Writes the header and every row (9 decimals for degrees, 4 for metres).
Status WriteDriveManifest(const std::string& path, const std::vector<DriveRow>& rows);
// Reads and checks every row (column count, numbers, ranges, time format, times increasing).
// The first bad row fails the whole read with "<path>:<line>: <what>"; with bad_rows set, bad
// rows are left out and their messages appended there instead.
// line_numbers, when set, gets each returned row's line in the file (1 = the header).
Result<std::vector<DriveRow>> ReadDriveManifest(const std::string& path,
                                                std::vector<std::string>* bad_rows = nullptr,
                                                std::vector<int>* line_numbers = nullptr);

}  // namespace sightfix
