// Drives through the demo town: where the camera is at each frame, exactly (truth), and what a
// survey INS or a consumer GNSS receiver would report instead.
//
// A drive is a sequence of passes along the route centreline, each in one direction and lane;
// lateral offsets are to the right of the direction of travel (right-hand traffic).
#pragma once

#include <opencv2/core.hpp>
#include <string>
#include <vector>

#include "demo_route/random.h"
#include "demo_route/town_layout.h"
#include "indexer/base/rotation.h"

namespace sightfix::demo {

struct Pass {
  double s_from_m = 0, s_to_m = 0;  // route arc length; s_to < s_from drives against the route
  double lane_offset_m = 0;         // mean offset to the right of travel
  double wander_m = 0;              // amplitude of a slow sinusoidal weave within the lane
  double wander_phase = 0;
};

struct Frame {
  double time_s = 0;   // seconds since the drive's start
  cv::Vec3d position;  // camera centre, ENU metres
  Attitude attitude;
};

struct DrivePlanOptions {
  double spacing_m = 2.0;         // distance between frames along the drive
  double spacing_jitter_m = 0.0;  // uniform +- jitter of that distance
  double speed_mps = 8.0;
  double turnaround_s = 15.0;  // time between passes
  double camera_height_m = 1.5;
  double camera_pitch_deg = 0;    // the mount's pitch (positive up), added to every frame's jitter
  double heading_jitter_deg = 0;  // 1-sigma, truncated at 2.5 sigma
  double pitch_jitter_deg = 0;
  double roll_jitter_deg = 0;
};

// The camera pose on a pass after travelling `d` metres along it, heading along the travel
// direction (no jitter).
Frame PoseOnPass(const Polyline& route, const Pass& pass, double d, double camera_height_m);
double PassLength(const Pass& pass);

// Frames along the passes, in drive order, with times from the speed.
std::vector<Frame> PlanFrames(const Polyline& route, const std::vector<Pass>& passes,
                              const DrivePlanOptions& o, Rng& rng);
// Total duration of a drive (seconds).
double DriveDuration(const std::vector<Pass>& passes, const DrivePlanOptions& o);
// The true camera pose at time t of the drive (for the GNSS stream).
Frame PoseAtTime(const Polyline& route, const std::vector<Pass>& passes, const DrivePlanOptions& o,
                 double t);

// A spoofing attack on the GNSS receiver: from start_s, the reported position is dragged
// away along bearing_deg at rate_mps for length_s seconds, then snaps back.
struct SpoofSegment {
  double start_s = 0, length_s = 0, rate_mps = 0, bearing_deg = 0;
};

struct GnssOptions {
  double rate_hz = 5;
  double sigma_h_m = 1.2;  // stationary 1-sigma per horizontal axis of the Gauss-Markov error
  double sigma_v_m = 2.0;
  double tau_s = 30;               // its correlation time
  double claimed_sigma_h_m = 1.5;  // what the receiver says about itself
};

struct GnssSample {
  double time_s = 0;
  cv::Vec3d position;  // ENU metres as reported
  cv::Vec3d truth;     // ENU metres, true antenna (camera) position
  double course_deg = 0;
  double claimed_sigma_h_m = 0;
  bool spoofed = false;
};

std::vector<SpoofSegment> PlanSpoofing(double duration_s, Rng& rng);
std::vector<GnssSample> SimulateGnss(const Polyline& route, const std::vector<Pass>& passes,
                                     const DrivePlanOptions& drive, const GnssOptions& o,
                                     const std::vector<SpoofSegment>& spoofing, Rng& rng);

}  // namespace sightfix::demo
