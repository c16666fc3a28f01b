// The four drives of the demo town (demo_town.h): the survey and three query drives, each with
// its light, camera, passes, poses (truth and as reported), GNSS stream and spoofed segments,
// and the camera post-processing that turns a rendered image into a JPEG's pixels. Everything
// follows from the options' seed.
#pragma once

#include <string>
#include <vector>

#include "demo_route/calibration_error.h"
#include "demo_route/camera_nuisances.h"
#include "demo_route/demo_town.h"
#include "demo_route/drive_plan.h"
#include "demo_route/solar_position.h"
#include "demo_route/survey_error.h"
#include "demo_route/town_layout.h"
#include "demo_route/town_renderer.h"
#include "indexer/base/geo.h"
#include "indexer/map/camera_model.h"

namespace sightfix::demo {

// The invented site: open water in no country, an arbitrary datum for the demo (not a place).
inline const GeoPoint kTownOrigin{44.0, -40.0, 40.0};
// 2026-05-04T09:00:00Z, the survey's start; query drives start later the same day.
constexpr double kSurveyStartUnix = 1777885200.0;
// The realistic world's query drive that leaves the map (look_alikes.h, the excursion).
inline constexpr char kOffMapDriveName[] = "query-offmap";
// The realistic world's night query drive (LightRanges).
inline constexpr char kNightDriveName[] = "query-night";

// One drive's look and its camera's post-processing.
struct Condition {
  std::string name;
  int variant = 0;  // which parked vehicles are present
  Appearance look;
  double exposure = 1.0, contrast = 1.0, tone_gamma = 1.0;
  cv::Vec3d tint{1, 1, 1};  // BGR gain
  double noise_sigma = 1.0, blur_sigma = 0.0;
  int jpeg_quality = 92;
  double start_offset_s = 0;  // after the survey's start
};

struct PlannedDrive {
  Condition condition;
  // The centreline the passes follow: the route, or (query-offmap) the excursion's path.
  Polyline path;
  CameraModel camera;                    // the camera the images are rendered with (the truth)
  CameraModel camera_written;            // camera.yml: camera with calibration_error applied
  bool calibration_error_model = false;  // realistic world: camera.yml is not the truth
  CalibrationError calibration_error;    // zero in the clean world
  std::vector<Pass> passes;
  DrivePlanOptions plan;
  std::vector<Frame> truth;     // the true pose at each drive.csv time
  std::vector<Frame> exposure;  // the true pose when each image was exposed (time + offset)
  // drive.csv's poses and sigma_h_m: survey, what its INS reports at the drive.csv time;
  // queries, the exposure poses themselves (0).
  std::vector<Frame> reported;
  std::vector<double> reported_sigma_h_m;
  // The survey in the realistic world: its error's draw, jumps and value at each frame.
  bool survey_error_model = false;
  SurveyErrorDraw survey_draw;
  double canyon_min_aspect_ratio = 0;  // where jumps may happen (SurveyErrorRanges)
  std::vector<MultipathJump> jumps;
  std::vector<SurveyError> survey_errors;
  std::vector<SpoofSegment> spoofing;
  std::vector<GnssSample> gnss;
  // The realistic world's camera (camera_nuisances.h): its draw (the mount already in plan,
  // the JPEG quality in condition) and its motion at each exposure.
  bool camera_nuisance_model = false;
  CameraNuisanceDraw camera_draw;
  std::vector<CameraMotion> camera_motion;
  // The realistic world's light (LightRanges): the sun by the SPA at the town's datum at
  // sun_unix_s, the drive's start, which set condition.look's sun direction and strength.
  bool sun_model = false;
  double sun_unix_s = 0;
  SolarPosition sun;
  // What the drive sees beyond the town's layout (changed_world.h): clean world, its parked
  // vehicles only; realistic, a changed world for query drives and traffic on every drive.
  DriveWorld world;
};

// survey, query-day, query-dusk, query-overcast, in this order (index = vehicle variant), and
// where the town has an excursion (the realistic world) query-offmap last: the query-day look,
// out along the route, into the side street to its end and back; and where the world has its
// light (the realistic world) query-night after it.
// REQUIRES: options.Validate().
std::vector<PlannedDrive> PlanDrives(const Town& town, const DemoOptions& options);

// Whether the true pose of drive d at time t (seconds since its start) stands in a canyon
// (urban_canyon.h) of aspect ratio >= min_aspect_ratio. Borrows town and d.
CanyonTest DriveCanyonTest(const Town& town, const PlannedDrive& d, double min_aspect_ratio);

// The survey's error at times_s (survey_error.h), the same realisation as d.survey_errors.
// REQUIRES: d.survey_error_model.
std::vector<SurveyError> SurveyErrorsAt(const Town& town, const PlannedDrive& d,
                                        const std::vector<double>& times_s);

// The camera's post-processing of a linear render (CV_32FC3, 0..1): exposure, contrast, tint,
// tone curve, blur and sensor noise (seeded), to BGR CV_8UC3.
cv::Mat FinishImage(const cv::Mat& linear, const Condition& c, uint64_t seed);

}  // namespace sightfix::demo
