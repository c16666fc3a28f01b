// SelfCalibrateDrive (self_calibration.h): a drive's tracks into a calibration problem.
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
