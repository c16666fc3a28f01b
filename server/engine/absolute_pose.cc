#include "server/engine/absolute_pose.h"

#include <cmath>
#include <opencv2/calib3d.hpp>

namespace sightfix {
namespace {

struct Conditioned {
  cv::Vec3d origin;  // subtracted from world points for numerical conditioning
  std::vector<cv::Point3d> object;
  std::vector<cv::Point2d> image;
};

Conditioned Condition(const std::vector<PointCorrespondence>& pts) {
  Conditioned c;
  c.origin = cv::Vec3d(0, 0, 0);
  for (const PointCorrespondence& p : pts) c.origin += p.world / static_cast<double>(pts.size());
  for (const PointCorrespondence& p : pts) {
    const cv::Vec3d w = p.world - c.origin;
    c.object.emplace_back(w[0], w[1], w[2]);
    c.image.push_back(p.normalized);
  }
  return c;
}

// Inliers of (rvec, tvec) at threshold (normalized units); marks depth > 0 too.
std::vector<int> Inliers(const Conditioned& c, const cv::Mat& rvec, const cv::Mat& tvec,
                         double threshold, int* in_front) {
  std::vector<cv::Point2d> proj;
  cv::projectPoints(c.object, rvec, tvec, cv::Matx33d::eye(), cv::noArray(), proj);
  cv::Matx33d r;
  cv::Rodrigues(rvec, r);
  const cv::Vec3d t(tvec.at<double>(0), tvec.at<double>(1), tvec.at<double>(2));
  std::vector<int> in;
  *in_front = 0;
  for (size_t i = 0; i < proj.size(); ++i) {
    const double z = (r * cv::Vec3d(c.object[i].x, c.object[i].y, c.object[i].z) + t)[2];
    if (z > 0 && cv::norm(proj[i] - c.image[i]) <= threshold) {
      in.push_back(static_cast<int>(i));
      ++*in_front;
    }
  }
  return in;
}

cv::Vec3d CenterOf(const cv::Vec6d& pose) {
  cv::Matx33d r;
  cv::Rodrigues(cv::Vec3d(pose[0], pose[1], pose[2]), r);
  return -(r.t() * cv::Vec3d(pose[3], pose[4], pose[5]));
}

// d centre / d (rvec, tvec), by central differences.
cv::Matx<double, 3, 6> CenterJacobian(const cv::Vec6d& pose) {
  cv::Matx<double, 3, 6> j;
  for (int k = 0; k < 6; ++k) {
    cv::Vec6d a = pose, b = pose;
    const double h = 1e-6;
    a[k] += h, b[k] -= h;
    const cv::Vec3d d = (CenterOf(a) - CenterOf(b)) / (2 * h);
    for (int r = 0; r < 3; ++r) j(r, k) = d[r];
  }
  return j;
}

// Information matrix of the pose and the residuals' chi-square, in pixel units.
void PoseInformation(const std::vector<PointCorrespondence>& pts, const Conditioned& c,
                     const std::vector<int>& in, const cv::Mat& rvec, const cv::Mat& tvec,
                     const AbsolutePoseOptions& o, cv::Matx66d* info, double* chi2,
                     double* sse_px) {
  std::vector<cv::Point3d> obj;
  for (int i : in) obj.push_back(c.object[i]);
  std::vector<cv::Point2d> proj;
  cv::Mat jac;
  const cv::Matx33d k(o.focal_px, 0, 0, 0, o.focal_px, 0, 0, 0, 1);
  cv::projectPoints(obj, rvec, tvec, k, cv::noArray(), proj, jac);
  cv::Matx33d r;
  cv::Rodrigues(rvec, r);
  const cv::Vec3d t(tvec.at<double>(0), tvec.at<double>(1), tvec.at<double>(2));
  *info = cv::Matx66d::zeros();
  *chi2 = 0, *sse_px = 0;
  for (size_t n = 0; n < in.size(); ++n) {
    const PointCorrespondence& p = pts[in[n]];
    const cv::Vec3d pc = r * cv::Vec3d(obj[n].x, obj[n].y, obj[n].z) + t;
    const double f = o.focal_px, z = pc[2];
    const cv::Matx23d dproj(f / z, 0, -f * pc[0] / (z * z), 0, f / z, -f * pc[1] / (z * z));
    const cv::Matx23d jx = dproj * r;  // pixels per metre of the point
    const cv::Matx22d cov =
        cv::Matx22d::eye() * (o.pixel_sigma_px * o.pixel_sigma_px) + jx * p.covariance * jx.t();
    const cv::Matx22d w = cov.inv();
    cv::Matx<double, 2, 6> jp;
    for (int row = 0; row < 2; ++row)
      for (int col = 0; col < 6; ++col) jp(row, col) = jac.at<double>(2 * n + row, col);
    *info += jp.t() * w * jp;
    const cv::Vec2d e(proj[n].x - f * p.normalized.x, proj[n].y - f * p.normalized.y);
    *chi2 += (e.t() * w * e)(0);
    *sse_px += e.dot(e);
  }
}

}  // namespace

bool AbsolutePoseOptions::Validate(std::string* error) const {
  if (threshold_px > 0 && focal_px > 0 && min_inliers >= 6 && iterations > 0 && confidence > 0 &&
      confidence < 1 && pixel_sigma_px > 0 && min_variance_factor > 0)
    return true;
  if (error)
    *error =
        "absolute pose: threshold_px, focal_px, pixel_sigma_px > 0, min_inliers >= 6, "
        "0 < confidence < 1";
  return false;
}

Result<AbsolutePose> EstimateAbsolutePose(const std::vector<PointCorrespondence>& pts,
                                          const AbsolutePoseOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  if (static_cast<int>(pts.size()) < o.min_inliers)
    return Status(StatusCode::kFailedPrecondition,
                  "too few 2D-3D correspondences (" + std::to_string(pts.size()) + ")");
  const Conditioned c = Condition(pts);
  const double thr = o.threshold_px / o.focal_px;
  cv::Mat rvec, tvec;
  std::vector<int> ransac_in;
  try {
    if (!cv::solvePnPRansac(c.object, c.image, cv::Matx33d::eye(), cv::noArray(), rvec, tvec, false,
                            o.iterations, static_cast<float>(thr), o.confidence, ransac_in,
                            cv::SOLVEPNP_EPNP))
      return Status(StatusCode::kFailedPrecondition, "PnP RANSAC found no pose");
    std::vector<int> in = ransac_in;
    int front = 0;
    for (int round = 0; round < 2 && static_cast<int>(in.size()) >= 6; ++round) {
      std::vector<cv::Point3d> obj;
      std::vector<cv::Point2d> img;
      for (int i : in) obj.push_back(c.object[i]), img.push_back(c.image[i]);
      cv::solvePnPRefineLM(obj, img, cv::Matx33d::eye(), cv::noArray(), rvec, tvec);
      in = Inliers(c, rvec, tvec, thr, &front);
    }
    if (static_cast<int>(in.size()) < o.min_inliers)
      return Status(StatusCode::kFailedPrecondition,
                    "too few PnP inliers (" + std::to_string(in.size()) + ")");
    AbsolutePose out;
    out.inliers = static_cast<int>(in.size());
    out.points_in_front = front;
    out.inlier_mask.assign(pts.size(), false);
    for (int i : in) out.inlier_mask[i] = true;
    cv::Matx66d info;
    double chi2, sse;
    PoseInformation(pts, c, in, rvec, tvec, o, &info, &chi2, &sse);
    const int dof = std::max(1, 2 * out.inliers - 6);
    out.variance_factor = std::max(o.min_variance_factor, chi2 / dof);
    out.rms_px = std::sqrt(sse / out.inliers);
    const cv::Vec6d pose(rvec.at<double>(0), rvec.at<double>(1), rvec.at<double>(2),
                         tvec.at<double>(0), tvec.at<double>(1), tvec.at<double>(2));
    const cv::Matx<double, 3, 6> jc = CenterJacobian(pose);
    out.center_covariance = jc * info.inv(cv::DECOMP_SVD) * jc.t() * out.variance_factor;
    cv::Rodrigues(rvec, out.camera_from_world);
    out.center = CenterOf(pose) + c.origin;
    return out;
  } catch (const cv::Exception& e) {
    return Status::Internal(std::string("PnP failed: ") + e.what());
  }
}

}  // namespace sightfix
