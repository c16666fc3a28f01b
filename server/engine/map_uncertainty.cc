#include "server/engine/map_uncertainty.h"

#include <cmath>

namespace sightfix {

double SurveyVariance(const AbsolutePose& pose, const std::vector<PointCorrespondence>& pts,
                      const std::vector<Verified>& verified, SurveyError model) {
  double sigma2 = 0, inv_frames = 0;
  int n = 0;
  for (const Verified& v : verified) {
    const double s = v.c.tile->data.images[v.c.image].sigma_h_m;
    sigma2 += s * s / verified.size();
  }
  if (model == SurveyError::kCorrelated) return sigma2;
  for (size_t i = 0; i < pts.size(); ++i)
    if (pose.inlier_mask[i]) inv_frames += 1.0 / pts[i].survey_frames, ++n;
  return n ? sigma2 * inv_frames / n : sigma2;
}

double MapCalibrationVariance(const AbsolutePose& pose, const std::vector<PointCorrespondence>& pts,
                              const std::vector<Verified>& verified) {
  if (verified.empty()) return 0;
  double rel2 = 0;
  for (const Verified& v : verified) {
    const TileData& t = v.c.tile->data;
    const CameraModel& cam = t.cameras[t.images[v.c.image].camera_id];
    const double rel = UncertaintyOrDefault(cam).focal_px / cam.fx;
    rel2 += rel * rel / verified.size();
  }
  std::vector<cv::Vec3d> in_camera;
  for (size_t i = 0; i < pts.size(); ++i)
    if (pose.inlier_mask[i])
      in_camera.push_back(pose.camera_from_world * (pts[i].world - pose.center));
  return FocalBiasVariance(std::sqrt(rel2), in_camera);
}

double FocalBiasVariance(double focal_sigma_rel, const std::vector<cv::Vec3d>& camera_points) {
  double w = 0, wz = 0;
  for (const cv::Vec3d& p : camera_points) {
    const double z = p[2], r2 = p[0] * p[0] + p[1] * p[1];
    if (!(z > 0)) continue;
    w += r2 / (z * z * z * z), wz += r2 / (z * z * z);
  }
  if (!(w > 0)) return 0;
  const double z = wz / w;
  return focal_sigma_rel * focal_sigma_rel * z * z;
}

}  // namespace sightfix
