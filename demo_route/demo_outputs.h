// The files the demo town writes besides its images (demo_town.h has the folder layout): each
// drive's camera.yml, drive.csv, gnss.csv and spoofing.csv; the survey re-exported as
// EXIF-tagged photos or as photos plus a GPX track; town.json (every parameter of the world);
// and the contact sheet. Formats are fixed: same inputs, same bytes.
#pragma once

#include <filesystem>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "demo_route/demo_drives.h"
#include "indexer/base/geo.h"
#include "indexer/base/status.h"

namespace sightfix::demo {

// "images/000017.jpg": the k-th image of a drive, relative to the drive's folder.
std::string DriveImageName(size_t k);

// Written beside drive.csv in the realistic world, for evaluators only: the indexer and the
// engine never read them. truth.csv (survey): drive.csv's columns and rows, each row the image's
// true pose at its true exposure time (timestamp = drive.csv's + the time offset), sigma_h_m 0,
// camera the true calibration. camera-truth.yml (every drive): the camera the images were
// rendered with, while camera.yml carries the calibration error.
inline constexpr char kSurveyTruthFile[] = "truth.csv";
inline constexpr char kCameraTruthFile[] = "camera-truth.yml";

// camera.yml (the calibration as delivered) and drive.csv (reported poses) in dir; in the
// realistic world also truth.csv (survey) and camera-truth.yml (above); for query drives also
// gnss.csv and spoofing.csv (the attacks' ground truth, format in gnss_stream.h). IoError on a
// failed write.
Status WriteDriveFiles(const PlannedDrive& d, const EnuFrame& enu,
                       const std::filesystem::path& dir);

// The survey d (its images already in out/<name>/images) as out/survey-exif (photos = true:
// JPEGs with EXIF position, altitude above sea level, direction, accuracy and time) or
// out/survey-gpx (JPEGs with EXIF times only, and track.gpx, the path at 10 Hz). Replaces the
// folder. Fails if the EGM96 geoid cannot be opened or a write fails.
Status ExportPhotoSurvey(const PlannedDrive& d, const Town& town, const EnuFrame& enu,
                         const std::filesystem::path& out, bool photos);

// occlusion.csv, written beside drive.csv where the drive has moving traffic: one row per image,
// "image,moving_share" (drive.csv's image name; the share of the image's area that moving
// objects cover, 0..1, six decimals). For evaluators: the indexer and the engine never read it.
inline constexpr char kOcclusionFile[] = "occlusion.csv";
Status WriteOcclusionCsv(const std::vector<double>& moving_shares,
                         const std::filesystem::path& dir);

// town.json: the generator, seed, options, origin, layout and, per drive, camera, plan,
// appearance, GNSS model and spoofed segments.
nlohmann::json TownJson(const DemoOptions& o, const Town& town,
                        const std::vector<PlannedDrive>& drives);

// out/contact_sheet.png: four images of each drive, evenly spread, 240 x 180 each, labelled.
void WriteContactSheet(const std::filesystem::path& out, const std::vector<PlannedDrive>& drives);

}  // namespace sightfix::demo
