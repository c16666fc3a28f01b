// Integrity of a single-image fix: protection levels that bound its horizontal error at a stated
// integrity risk, and whether it is usable at the caller's alert limits.
//
// Method: solution separation as advanced RAIM uses it for satellites (Blanch et al., "Baseline
// advanced RAIM user algorithm and its implementation", IEEE TAES 2015), with groups of 2D-3D
// correspondences in place of satellites: the fix is solved again without each group (one
// verified reference's correspondences, or one image quadrant's: a moving bus, a changed shop
// front or a wrong match cluster sits in one of them). Under no fault every such subset solution
// lies near the all-in solution, their difference having a covariance the least squares predicts
// (the subset's minus the all-in's); a group that pulls the fix away shows as a separation
// beyond that. A separation beyond its threshold flags the fix (fault detected). Otherwise each
// protection level is the larger of
//   fault-free:  k(P_ff) x sigma_0                      (the all-in fix's own error)
//   group j:     T_j + k(P_j) x sigma_j                 (an undetected fault in group j)
// with T_j = k_fa x sigma_sep_j the detection threshold, every sigma multiplied by the overbound
// scale. The error model these sigmas describe must bound the true error's tails (DeCleene,
// "Defining pseudorange integrity - overbounding", ION GPS 2000): the overbound scale is what a fit
// on a drive with truth found necessary (ProtectionParameters::overbound_scale), not a 95 % radius
// inflated by hand. A wrong place where every group agrees (two streets that look alike) is not a
// fault this test can see: the place-ambiguity test covers it (place_ambiguity.h).
//
// Axes: longitudinal along the fix's heading, lateral across it (to the right), horizontal the
// 2D error. Per axis the bound is a two-sided Gaussian quantile; horizontally the Rayleigh bound
// P(|e| > k sqrt(lambda_max)) <= exp(-k^2 / 2) (common practice: a 2D Gaussian's tail lies under
// that of a round one with its largest variance). Risk allocation: half of the integrity risk to
// the fault-free case and half shared equally by the groups (or all of it fault-free without
// groups); the false-alert budget shared equally by the groups and the two axes tested.
//
// A fallback aid's figures, not a certified integrity monitor: what a vehicle does with them is
// for its safety case and local regulations. Pure functions; thread-safe.
#pragma once

#include <opencv2/core/matx.hpp>
#include <string>
#include <vector>

namespace sightfix {

struct ProtectionParameters {
  // Probability per fix that an error exceeds a protection level undetected. Default 1e-3: the
  // demo world's evidence can test no finer (a few thousand independent episodes).
  double integrity_risk = 1e-3;
  // Probability per fix of flagging a fault-free fix (continuity). Default 1e-2.
  double false_alert_rate = 1e-2;
  // Multiplies every sigma: the CDF overbound fitted on a drive with truth (1: none fitted).
  double overbound_scale = 1;
  std::string overbound_drive;  // the drive the scale was fitted on (empty: none fitted)
  bool Validate(std::string* error) const;
};

// One fault hypothesis, in the fix's horizontal east/north (metres, m^2).
struct SeparatedSolution {
  std::string name;              // e.g. "reference 2", "quadrant upper-left"
  cv::Vec2d shift_en;            // subset solution minus the all-in solution
  cv::Matx22d shift_covariance;  // of shift_en with no fault
  cv::Matx22d covariance;        // of the subset solution's error with no fault
};

struct ProtectionLevels {
  double horizontal_m = 0, lateral_m = 0, longitudinal_m = 0;
  bool fault_detected = false;
  std::string fault;  // the first group whose separation broke its threshold, with the figures
  // Largest |separation| / threshold over groups and axes: 1 is the detection threshold.
  double max_test_ratio = 0;
  int hypotheses = 0;  // groups tested
};

// Two-sided standard normal quantile: k with P(|z| > k) = p. REQUIRES: 0 < p < 1.
double TwoSidedNormalQuantile(double p);
// Rayleigh multiplier: k with exp(-k^2 / 2) = p. REQUIRES: 0 < p < 1.
double RayleighMultiplier(double p);

// Protection levels of a fix whose fault-free error covariance is covariance_en (east/north,
// m^2, as the fix states it) and whose heading (degrees clockwise from north) sets the
// longitudinal axis. REQUIRES: p.Validate().
ProtectionLevels ComputeProtectionLevels(const cv::Matx22d& covariance_en, double heading_deg,
                                         const std::vector<SeparatedSolution>& groups,
                                         const ProtectionParameters& p);

}  // namespace sightfix
