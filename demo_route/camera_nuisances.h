// The realistic world's camera (world_nuisances.h, CameraNuisanceRanges): what a real camera does
// to the ideal render besides its calibration. Per drive: an exposure time set by the light,
// a rolling or global shutter, auto-exposure steps, vignetting, shot and read noise, a JPEG
// quality and, for query vehicles, another mounting height and pitch. The stages, in the order a
// sensor meets them, on the renderer's linear light:
//   motion   blur over the exposure and the rolling shutter's rows (camera_motion.h), from the
//            vehicle's speed and yaw rate at the frame and the render's per-pixel depth;
//   optics   vignetting, 1 - s (1 - cos^4 theta) at field angle theta (the cos^4 law);
//   exposure the auto-exposure's offset, 2^ev (one EV doubles the light collected);
//   sensor   shot noise (Poisson, as a Gaussian of variance equal to the electrons) and read
//            noise: value v of full scale F electrons gets sigma sqrt(v / F + (r / F)^2);
// then FinishImage (demo_drives.h) as in the clean world, its Gaussian noise off (noise_sigma 0).
// Every draw and every pixel's noise come from the project's Rng on per-drive and per-image
// seeds: same bytes on any thread count.
#pragma once

#include <cstdint>
#include <nlohmann/json.hpp>
#include <opencv2/core.hpp>
#include <vector>

#include "demo_route/camera_motion.h"
#include "demo_route/drive_plan.h"
#include "demo_route/random.h"
#include "demo_route/town_renderer.h"
#include "demo_route/world_nuisances.h"
#include "indexer/map/camera_model.h"

namespace sightfix::demo {

enum class LightLevel { kSunlit, kOvercast, kDusk };

// "sunlit", "overcast", "dusk".
const char* LightLevelName(LightLevel level);

// Dusk where the sun stands below 10 degrees or below the horizon (night, whatever its direct
// light), else overcast where the look has no direct sun (sun < 0.1), else sunlit.
LightLevel LightLevelOf(const Appearance& look);

// From time_s on (seconds since the drive's start) the exposure is ev EV off the drive's start
// (the running sum of the steps so far).
struct ExposureStep {
  double time_s = 0;
  double ev = 0;
};

// One drive's camera, drawn from CameraNuisanceRanges.
struct CameraNuisanceDraw {
  LightLevel light = LightLevel::kSunlit;
  double exposure_s = 0;
  bool rolling_shutter = false;
  double readout_s = 0;  // first row's exposure centre to the last row's; 0 with a global shutter
  std::vector<ExposureStep> steps;  // in time order
  double vignetting_strength = 0;
  double full_scale_electrons = 1, read_noise_electrons = 0;
  int jpeg_quality = 92;
  // Query drives: the camera's height above the survey's plan height and its pitch (degrees,
  // positive up); 0 on the survey.
  double mount_height_offset_m = 0, mount_pitch_deg = 0;
};

// A drive of duration_s seconds in `light`; query drives also draw their mount. Draws in a fixed
// order from rng (the drive's own stream). REQUIRES: ranges.Validate() passed (as part of
// WorldNuisances).
CameraNuisanceDraw DrawCameraNuisances(const CameraNuisanceRanges& ranges, LightLevel light,
                                       bool query, double duration_s, Rng& rng);

// The exposure offset in EV at time_s of the drive (0 before the first step).
double ExposureEvAt(const CameraNuisanceDraw& draw, double time_s);

// The camera's motion at an image (camera_motion.h): velocity and yaw rate of the planned path
// between `before` and `after` (its poses a short time either side of the image; no attitude
// jitter, which is not a rate), in the camera frame of `attitude` (the image's).
CameraMotion MotionBetween(const Frame& before, const Frame& after, const Attitude& attitude);

// Relative illumination at pixel (x, y): 1 - s (1 - cos^4 theta), theta the angle between the
// pixel's ray and the optical axis (through the lens model).
double VignettingAt(const CameraModel& camera, double strength, cv::Point2d pixel);

// Multiplies every pixel of *linear (CV_32FC3, the camera's size) by VignettingAt.
void ApplyVignetting(const CameraModel& camera, double strength, cv::Mat* linear);

// Adds shot and read noise to *linear (CV_32FC3, 1 = full scale): per channel a Gaussian of
// sigma sqrt(max(v, 0) / F + (r / F)^2), from Rng(seed). REQUIRES: F > 0.
void AddSensorNoise(double full_scale_electrons, double read_noise_electrons, uint64_t seed,
                    cv::Mat* linear);

// Every stage above for one image of a drive exposed at time_s (the drive's clock) with `motion`:
// from the render `view` (RenderOptions::inverse_depth set) to linear light for FinishImage.
cv::Mat ApplyCameraNuisances(const RenderedView& view, const CameraModel& camera,
                             const CameraNuisanceDraw& draw, const CameraMotion& motion,
                             double time_s, uint64_t noise_seed);

// The draw for town.json; frame_times_s (the images' exposure times) give each step's first image.
nlohmann::json CameraNuisanceJson(const CameraNuisanceDraw& draw,
                                  const std::vector<double>& frame_times_s);

}  // namespace sightfix::demo
