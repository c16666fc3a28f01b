// What a survey's GNSS-INS reports against the truth, in the realistic world: a first-order
// Gauss-Markov position error per ENU axis and a Gauss-Markov attitude error (gauss_markov.h),
// both sampled on a 20 Hz grid (a GNSS-INS solution rate, common practice), plus multipath
// jumps: an extra horizontal offset held for a few seconds where the street is a deep canyon
// (urban_canyon.h). The receiver's own 1-sigma (drive.csv's sigma_h_m) is honest: the process's
// sigma, grown during a jump by the offset's per-axis RMS (|offset| / sqrt 2, its direction
// being unknown to the receiver).
//
// Determinism: every value follows from the draw's seed; the processes' grid values do not
// depend on which times are asked for, so two calls with the same draw agree where their times
// meet the same grid sample. Not thread-safe per call; calls share nothing.
#pragma once

#include <cstdint>
#include <functional>
#include <opencv2/core.hpp>
#include <vector>

#include "demo_route/random.h"
#include "demo_route/world_nuisances.h"

namespace sightfix::demo {

constexpr double kSurveyErrorStepS = 0.05;  // the 20 Hz grid

// One drive's survey error parameters, each drawn from its SurveyErrorRanges range.
struct SurveyErrorDraw {
  double sigma_horizontal_m = 0, sigma_vertical_m = 0, tau_s = 1;  // per axis, metres; seconds
  double heading_sigma_deg = 0, pitch_roll_sigma_deg = 0, attitude_tau_s = 1;
  uint64_t seed = 0;
};

struct MultipathJump {
  double start_s = 0, hold_s = 0;  // seconds since the drive's start
  cv::Vec2d offset_m;              // east, north
};

// The survey's report minus the truth at one time.
struct SurveyError {
  cv::Vec3d position_m;  // east, north, up
  double heading_deg = 0, pitch_deg = 0, roll_deg = 0;
  double sigma_h_m = 0;    // the receiver's honest 1-sigma per horizontal axis
  bool multipath = false;  // a jump's offset is in position_m
};

// Whether the vehicle is in a deep canyon at time t (seconds since the drive's start).
using CanyonTest = std::function<bool(double t_s)>;

SurveyErrorDraw DrawSurveyError(const SurveyErrorRanges& ranges, Rng& rng);

// ranges.jumps jumps (drawn count), each starting at a whole second of [0, duration_s] where
// in_canyon holds, not overlapping another jump (1 s apart at least), sorted by start. Fewer
// (possibly none) where the drive has too few such seconds.
std::vector<MultipathJump> PlanMultipathJumps(const SurveyErrorRanges& ranges, double duration_s,
                                              const CanyonTest& in_canyon, Rng& rng);

// The errors at times_s (seconds since the drive's start, non-decreasing, >= 0): each time takes
// the grid sample nearest to it; a jump adds its offset at the times within [start, start + hold)
// where in_canyon holds.
std::vector<SurveyError> SimulateSurveyError(const SurveyErrorDraw& draw,
                                             const std::vector<MultipathJump>& jumps,
                                             const CanyonTest& in_canyon,
                                             const std::vector<double>& times_s);

}  // namespace sightfix::demo
