// Self-calibration: a camera's focal length, radial distortion (k1, k2) and boresight (its
// mounting rotation against the INS), refined by bundle adjustment over a whole drive under
// priors from its calibration file.
//
// Model (pinhole lens, OpenCV's radial-tangential distortion, camera_model.h): one focal length f
// for the drive (fx = f, fy = f fy0/fx0: the supplied aspect ratio is kept, no skew), k1 and k2;
// the principal point, p1, p2 and k3 stay as supplied. A few pixels of principal point cannot be
// told from a small rotation of the camera, so the boresight B (angle-axis, the camera as mounted
// from the camera the INS attitude implies) is estimated instead, and the two are never both free.
// A frame's camera is camera_from_enu = B dR_v R0_v, where R0_v comes from its INS attitude and
// dR_v is the frame's own small correction under the attitude prior.
//
// Priors (1-sigma, CalibrationPrior): > 0 a Gaussian prior around the supplied value; 0 holds the
// parameter at the supplied value; +infinity leaves it free without a prior (checks against
// reference solvers only). Observability, common practice of structure from motion:
//   - straight driving leaves f unobservable: scaling f and the points' offsets from the
//     direction of travel together moves no image point; rotations with known angles (turns,
//     the INS attitude) are what pin f;
//   - k1 trades against f (both scale points away from the centre; k1 grows as r^3);
//   - planar motion weakens the vertical terms (the boresight's pitch, k2);
//   - the boresight is told apart from each frame's own correction only by the frames' attitude
//     priors: where a typical frame's prior is not tighter than the boresight's (EXIF and GPX
//     surveys carry no pitch and roll), the boresight is held at zero.
// Where the data do not improve a parameter (posterior sigma over prior sigma above
// keep_prior_ratio), it is held at the supplied value and reports its prior sigma. A move
// larger than the prior allows is flagged by a chi-square test of the estimate minus the prior
// against (P0 - P), its covariance if the prior were right (move_alarm): a wrong calibration file.
//
// Covariance of (f, k1, k2, boresight) at pixel_sigma_px: the block of H^-1 for those six
// parameters, H = J^T J of the robustified Jacobian (priors included), solved by a sparse
// Cholesky factorization for six right-hand sides, never a dense or full-problem inverse.
//
// Time offset: the camera's clock against the INS's. An image taken dt after its row's time sees
// from the pose the vehicle reached dt later: its centre moved by the velocity times dt and its
// heading turned by the yaw rate times dt (first order; 20 ms at 9 m/s is 0.18 m and, in a
// corner turning 40 deg/s, 0.8 deg). One dt per camera per drive, under a prior (time_offset_s);
// each view carries its velocity and yaw rate from the survey's neighbouring rows. Observability:
// on a straight the shift moves every camera and point together (unobservable: held at zero by
// the keep-prior rule); turns pin it, through the heading turn and the shift's changing direction.
// An estimate within time_offset_sigmas (3) of zero is held at zero: a camera triggered by the
// INS has none, and applying noise moved a clean map's fixes (docs/design.md 4.4.1).
// Left unmodelled, the heading error in corners moves the map's points there (a usable fix 2 m off
// on the realistic demo town: docs/design.md 4.4.1).
//
// Rolling shutter: a row y is exposed at dt + readout (y / (rows - 1) - 1/2) (the camera's
// readout_s, from its file; 0 for a global shutter), and each observation is taken from the pose
// at its row's time. Left out, the rows' skew in corners biases f and dt (docs/design.md 4.4.1).
//
// Frames: ENU metres, camera as rotation.h. Thread safety: reentrant; one thread (Ceres' Schur
// sums depend on thread order, and maps must be byte-identical whatever --jobs is).
#pragma once

#include <array>
#include <limits>
#include <opencv2/core.hpp>
#include <string>
#include <vector>

#include "indexer/base/status.h"
#include "indexer/builder/structure.h"
#include "indexer/map/camera_model.h"

namespace sightfix {

// The order of the six calibration parameters in every array and matrix below.
enum CalibrationParameter { kFocal = 0, kK1, kK2, kBoresightX, kBoresightY, kBoresightZ };
constexpr int kCalibrationParameters = 6;
extern const char* const kCalibrationParameterNames[kCalibrationParameters];

// 1-sigma priors: focal in pixels, k1 and k2 dimensionless, boresight in radians per axis (about
// the camera's x, y, z). > 0 Gaussian prior; 0 held fixed; +infinity free.
struct CalibrationPrior {
  std::array<double, kCalibrationParameters> sigma{};
  double time_offset_s = 0;  // 1-sigma of the camera's time offset, seconds, as above
};
// The camera file's stated uncertainty with its defaults (UncertaintyOrDefault), boresight per
// axis; the time offset's kDefaultTimeOffsetSigmaS.
CalibrationPrior PriorOf(const CameraModel& camera);

inline constexpr double kFreeParameter = std::numeric_limits<double>::infinity();
// A camera's time offset against the INS without a hardware trigger: a few to a few tens of
// milliseconds (from memory; the realistic demo world draws 5-30 ms).
inline constexpr double kDefaultTimeOffsetSigmaS = 0.03;

// The generic problem: views with pose priors, points (free or fixed), pixel observations.
struct CalibrationView {
  cv::Matx33d camera_from_world;  // R0, the pose's starting rotation
  cv::Vec3d center;               // world, metres
  double center_sigma_m = 0;      // 0 fixed, +inf free, else a prior per axis
  double attitude_sigma_rad = 0;  // 0 fixed, +inf free, else a prior per axis
  cv::Vec3d velocity;             // world, m/s (the time offset's shift per second)
  double yaw_rate_rad_s = 0;      // about the world's up axis, counterclockwise
};
struct CalibrationObservation {
  int view = 0, point = 0;
  cv::Point2d pixel;
};
struct CalibrationProblem {
  CameraModel camera;  // pinhole; the starting values and the priors' centre
  CalibrationPrior prior;
  std::vector<CalibrationView> views;
  std::vector<cv::Vec3d> points;  // world, metres
  bool points_fixed = false;      // known points (a calibration target)
  std::vector<CalibrationObservation> observations;
};

struct SelfCalibrationOptions {
  double pixel_sigma_px = 1.0;    // keypoint noise (SIFT, common practice ~1 px)
  double huber_px = 2.0;          // Huber loss scale, pixels (as structure.h's adjustment)
  int max_iterations = 50;        // per solve
  double keep_prior_ratio = 0.7;  // posterior / prior sigma above this: held at the prior
  // A time offset within this many posterior sigmas of zero is held at zero: the data cannot tell
  // it from a camera triggered by the INS, and a map built with it would move by noise.
  double time_offset_sigmas = 3.0;
  double alarm_probability = 0.999;  // chi-square quantile of the move test
  // Tracks for a drive (SelfCalibrateDrive): the structure's gates, wider than a map's because
  // the supplied calibration may be a few pixels off at the image's edge, and at most this many
  // points per view (those seen most often first) to keep the adjustment small.
  StructureOptions tracks = [] {
    StructureOptions s;
    s.epipolar_px = 4.0, s.max_reproj_px = 4.0, s.ba_max_iterations = 0, s.jobs = 1;
    return s;
  }();
  int max_points_per_view = 150;
  bool Validate(std::string* error) const;
};

struct CalibrationEstimate {
  CameraModel supplied, refined;
  cv::Vec3d boresight_rad;            // angle-axis, camera as mounted from the INS-implied camera
  cv::Matx33d boresight() const;      // the rotation B
  cv::Matx<double, 6, 6> covariance;  // of the six parameters, at pixel_sigma_px
  // The time offset (image time minus its row's time), its prior and posterior 1-sigma; held at
  // 0 when not estimated (its prior 0, no view moving, or not improved by the data).
  double time_offset_s = 0, time_offset_prior_sigma_s = 0, time_offset_sigma_s = 0;
  bool time_offset_estimated = false;
  std::array<double, kCalibrationParameters> prior_sigma{}, posterior_sigma{};
  // Estimated from the data (false: held at the supplied value, fixed or not improved).
  std::array<bool, kCalibrationParameters> estimated{};
  double move_chi2 = 0;  // of the estimated parameters that have a prior
  int move_dof = 0;
  bool move_alarm = false;
  double variance_factor = 1;  // chi-square of the pixel residuals over their degrees of freedom
  int views = 0, points = 0, observations = 0;
  double rms_before_px = 0, rms_after_px = 0;
  double seconds = 0;  // the adjustment and its covariance (tracks and triangulation not)
  // The adjusted views, in problem order (camera_from_world includes the boresight).
  std::vector<cv::Matx33d> camera_from_world;
  std::vector<cv::Vec3d> centers;
  std::vector<cv::Vec3d> adjusted_points;
};

// Solves a problem. InvalidArgument for a fisheye camera, bad options, an observation naming a
// view or point that does not exist, or fewer than 10 observations.
Result<CalibrationEstimate> SolveCalibration(const CalibrationProblem& problem,
                                             const SelfCalibrationOptions& options);

// A drive's frames of one camera (features borrowed, keypoints in pixels, normalized with
// `camera`): tracks and triangulation as structure.h, then SolveCalibration with the views'
// survey priors. The views' attitude and centre sigmas come from each SurveyView (0 sigma_h_m:
// held, as in structure.h). FailedPrecondition when fewer than 3 views or 30 points remain.
Result<CalibrationEstimate> SelfCalibrateDrive(const std::vector<SurveyView>& views,
                                               const CameraModel& camera,
                                               const CalibrationPrior& prior,
                                               const SelfCalibrationOptions& options);

}  // namespace sightfix
