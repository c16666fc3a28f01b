// SelfCalibrateDrive (self_calibration.h): a drive's tracks into a calibration problem; the
// priors and options it takes.
#include <algorithm>
#include <cmath>
#include <numeric>

#include "indexer/builder/self_calibration.h"

namespace sightfix {

namespace {

constexpr double kDegToRad = M_PI / 180.0;

// Points seen most often first, each kept while one of its views has fewer than `cap`.
std::vector<int> PickPoints(const std::vector<StructurePoint>& pts, size_t views, int cap) {
  std::vector<int> order(pts.size());
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](int a, int b) {
    return pts[a].observations.size() > pts[b].observations.size();
  });
  std::vector<int> taken(views, 0), kept;
  for (int i : order) {
    bool wanted = false;
    for (const auto& ob : pts[i].observations) wanted |= taken[ob.first] < cap;
    if (!wanted) continue;
    kept.push_back(i);
    for (const auto& ob : pts[i].observations) ++taken[ob.first];
  }
  std::sort(kept.begin(), kept.end());
  return kept;
}

}  // namespace

CalibrationPrior PriorOf(const CameraModel& c) {
  const CalibrationUncertainty u = UncertaintyOrDefault(c);
  CalibrationPrior p;
  p.sigma[kFocal] = u.focal_px;
  p.sigma[kK1] = u.k1;
  p.sigma[kK2] = u.k2;
  const double b = u.boresight_deg * kDegToRad;
  p.sigma[kBoresightX] = p.sigma[kBoresightY] = p.sigma[kBoresightZ] = b;
  p.time_offset_s = kDefaultTimeOffsetSigmaS;
  return p;
}

bool SelfCalibrationOptions::Validate(std::string* error) const {
  auto fail = [&](const char* m) {
    if (error) *error = m;
    return false;
  };
  if (!(pixel_sigma_px > 0) || !(huber_px > 0)) return fail("pixel_sigma_px, huber_px must be > 0");
  if (max_iterations < 1) return fail("max_iterations must be >= 1");
  if (!(keep_prior_ratio > 0 && keep_prior_ratio <= 1))
    return fail("keep_prior_ratio must be within (0, 1]");
  if (!(alarm_probability > 0 && alarm_probability < 1))
    return fail("alarm_probability must be within (0, 1)");
  if (max_points_per_view < 1) return fail("max_points_per_view must be >= 1");
  if (!(time_offset_sigmas >= 0)) return fail("time_offset_sigmas must be >= 0");
  return tracks.Validate(error);
}

Result<CalibrationEstimate> SelfCalibrateDrive(const std::vector<SurveyView>& views,
                                               const CameraModel& camera,
                                               const CalibrationPrior& prior,
                                               const SelfCalibrationOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  if (views.size() < 3)
    return Status(StatusCode::kFailedPrecondition, "self-calibration needs 3 views or more");
  Result<StructureResult> structure = BuildStructure(views, o.tracks);
  if (!structure.ok()) return structure.status();
  const std::vector<int> picked =
      PickPoints(structure->points, views.size(), o.max_points_per_view);
  if (picked.size() < 30)
    return Status(StatusCode::kFailedPrecondition,
                  "self-calibration: only " + std::to_string(picked.size()) + " points");
  CalibrationProblem p;
  p.camera = camera;
  p.prior = prior;
  for (const SurveyView& v : views) {
    CalibrationView view;
    view.camera_from_world = v.enu_from_camera.t();
    view.center = v.center_enu;
    view.center_sigma_m = v.sigma_h_m;
    view.attitude_sigma_rad =
        v.sigma_h_m > 0
            ? (v.attitude_sigma_deg > 0 ? v.attitude_sigma_deg : o.tracks.attitude_sigma_deg) *
                  kDegToRad
            : 0;
    view.velocity = v.velocity_enu, view.yaw_rate_rad_s = v.yaw_rate_rad_s;
    p.views.push_back(view);
  }
  for (int i : picked) {
    const StructurePoint& sp = structure->points[i];
    const int id = static_cast<int>(p.points.size());
    p.points.push_back(sp.enu);
    for (const auto& [v, k] : sp.observations)
      p.observations.push_back({v, id, cv::Point2d(views[v].features->keypoints[k].pt)});
  }
  return SolveCalibration(p, o);
}

}  // namespace sightfix
