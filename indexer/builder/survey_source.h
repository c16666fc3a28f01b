// The survey a map is built from, in whichever form the mapping team has it, as rows of
// image + time + camera pose + calibration (drive_manifest.h's DriveRow). Forms:
//  - drive: `drive.csv` (drive_manifest.h), poses given;
//  - rig:   `rig.yml` with an INS log and per-camera image lists (rig.h);
//  - exif:  JPEGs whose EXIF carries position, time and GPSImgDirection (exif_gps.h);
//  - gpx:   JPEGs with EXIF times plus a GPX 1.1 track (gpx_track.h): positions interpolated at
//           each image's time, heading from the track where the image has no GPSImgDirection.
// EXIF and GPX heights are above mean sea level and become ellipsoidal with EGM96 (geoid.h).
// EXIF and GPX carry no pitch or roll: those rows get pitch = roll = 0 and a wide attitude prior
// (unknown_attitude_sigma_deg) for the bundle adjustment. All images of an exif or gpx survey
// share one calibration (`camera`).
// Thread safety: pure functions.
#pragma once

#include <string>
#include <vector>

#include "indexer/base/status.h"
#include "indexer/map/drive_manifest.h"

namespace sightfix {

enum class SurveyFormat { kAuto, kDrive, kRig, kExif, kGpx };
// "auto", "drive", "rig", "exif", "gpx"; false for anything else.
bool ParseSurveyFormat(const std::string& text, SurveyFormat* format);
const char* SurveyFormatName(SurveyFormat format);

struct SurveySourceOptions {
  std::string dir;  // the survey folder
  // auto: drive.csv if present, else rig.yml, else a .gpx file, else EXIF.
  SurveyFormat format = SurveyFormat::kAuto;
  std::string gpx;                          // gpx: the track; default the one *.gpx in dir
  std::string camera = "camera.yml";        // exif, gpx: calibration of every image (in dir)
  double max_gap_s = 2.0;                   // gpx, rig: widest gap to interpolate across
  double default_sigma_h_m = 0.05;          // exif, gpx: when GPSHPositioningError is absent
  double unknown_attitude_sigma_deg = 2.0;  // exif, gpx: pitch and roll are not known
  bool skip_bad = false;                    // leave bad rows out (listed in problems)
};

struct SurveyRows {
  SurveyFormat format = SurveyFormat::kDrive;
  std::vector<DriveRow> rows;              // image and camera paths relative to dir
  std::vector<double> attitude_sigma_deg;  // per row; 0 = the structure's default
  std::vector<std::string> origin;    // per row, for messages: "<drive.csv>:<line>" or the image
  std::vector<std::string> problems;  // skip_bad: what was left out and why
};

// kNotFound when dir holds no survey; kInvalidArgument naming file and line (or image) for the
// first bad row when skip_bad is false.
// exif and gpx forms open the EGM96 grid (kNotFound without proj-data); the others do not.
Result<SurveyRows> LoadSurveyRows(const SurveySourceOptions& options);

}  // namespace sightfix
