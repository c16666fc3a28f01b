// Inside the engine (not installed): the map's own uncertainty as a fix inherits it, added to the
// pose solver's covariance (localizer.cc). Both terms are biases that every point near a
// reference shares, so more inliers do not average them away.
#pragma once

#include <vector>

#include "server/engine/absolute_pose.h"
#include "server/engine/localizer.h"
#include "server/engine/verified_reference.h"

namespace sightfix {

// The survey term. A survey's GNSS/INS error is correlated over tens of seconds (common
// practice), far longer than the second or two in which the frames that pin a map point drive
// past it, so bundle adjustment cannot average it away: the points near a reference carry that
// reference's error whole, and a fix inherits sigma_h^2 per axis (SurveyError::kCorrelated).
// For a survey whose error is white (the clean demo town's 2 cm), each point averages it over
// the n frames that observed it: sigma_h^2 / n, n the inliers' mean observation count
// (SurveyError::kWhite; the full sigma_h^2 there set a 4.9 cm radius95 for errors of 1.3 cm on
// demo seed 5).
double SurveyVariance(const AbsolutePose& pose, const std::vector<PointCorrespondence>& pts,
                      const std::vector<Verified>& verified, SurveyError model);

// The map camera's term. A survey camera whose focal length is off by a fraction s triangulates
// its points with their offsets across the line of sight scaled by 1 / (1 + s) and their depths
// right (forward motion's parallax does not depend on f); a query with the right focal length
// then sees each point as if from s Z nearer, Z its depth, and its pose settles at the weighted
// mean of those shifts, each point weighted as the normal equations weigh it for the camera's
// distance: (r / Z^2)^2, r its offset from the optical axis. So a fix inherits
// (sigma_f / f)^2 Z_w^2 per axis, Z_w = sum(r^2 / Z^3) / sum(r^2 / Z^4) over the inliers (in the
// fix's camera axes), sigma_f the map camera's remaining focal uncertainty (the tile camera's,
// as self-calibration left it or the file stated, UncertaintyOrDefault) averaged over the
// verified references. After self-calibration sigma_f / f is about 0.05 %; where the drive could
// not pin the focal length (straight ahead) it stays at the file's 1 %: about 0.12 m with points
// 8-40 m away.
double MapCalibrationVariance(const AbsolutePose& pose, const std::vector<PointCorrespondence>& pts,
                              const std::vector<Verified>& verified);
// Its core: focal_sigma_rel^2 Z_w^2 over points in the fix's camera axes (metres; those
// behind it ignored); 0 without any off the axis.
double FocalBiasVariance(double focal_sigma_rel, const std::vector<cv::Vec3d>& camera_points);

}  // namespace sightfix
