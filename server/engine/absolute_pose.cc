#include "server/engine/absolute_pose.h"

#include <cmath>
#include <functional>
#include <map>
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

// A residual's weight: the inverse of keypoint noise plus the point's covariance seen through
// the camera (jx: pixels per metre of the point).
cv::Matx22d ResidualWeight(const cv::Matx23d& jx, const cv::Matx33d& point_covariance,
                           double pixel_sigma_px) {
  return (cv::Matx22d::eye() * (pixel_sigma_px * pixel_sigma_px) + jx * point_covariance * jx.t())
      .inv();
}

double VarianceFactor(double chi2, int inliers, const AbsolutePoseOptions& o) {
  return std::max(o.min_variance_factor, chi2 / std::max(1, 2 * inliers - 6));
}

// Fills *out from a solved pose (rvec, tvec in c's conditioned frame) and its covariance.
void SetPose(const Conditioned& c, const cv::Vec6d& pose, const cv::Matx66d& pose_covariance,
             const std::vector<int>& in, int front, size_t correspondences, double sse_px,
             AbsolutePose* out) {
  const cv::Matx<double, 3, 6> jc = CenterJacobian(pose);
  out->center_covariance = jc * pose_covariance * jc.t();
  out->center = CenterOf(pose) + c.origin;
  cv::Rodrigues(cv::Vec3d(pose[0], pose[1], pose[2]), out->camera_from_world);
  out->inliers = static_cast<int>(in.size());
  out->points_in_front = front;
  out->inlier_mask.assign(correspondences, false);
  for (int i : in) out->inlier_mask[i] = true;
  out->rms_px = std::sqrt(sse_px / in.size());
}

// Information matrix of the pose and the residuals' chi-square, in pixel units.
void PoseInformation(const std::vector<PointCorrespondence>& pts, const Conditioned& c,
                     const std::vector<int>& in, const cv::Mat& rvec, const cv::Mat& tvec,
                     const AbsolutePoseOptions& o, cv::Matx66d* info, double* chi2, double* sse_px,
                     cv::Vec6d* gradient = nullptr) {
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
  if (gradient) *gradient = cv::Vec6d::all(0);
  for (size_t n = 0; n < in.size(); ++n) {
    const PointCorrespondence& p = pts[in[n]];
    const cv::Vec3d pc = r * cv::Vec3d(obj[n].x, obj[n].y, obj[n].z) + t;
    const double f = o.focal_px, z = pc[2];
    const cv::Matx23d dproj(f / z, 0, -f * pc[0] / (z * z), 0, f / z, -f * pc[1] / (z * z));
    const cv::Matx22d w = ResidualWeight(dproj * r, p.covariance, o.pixel_sigma_px);
    cv::Matx<double, 2, 6> jp;
    for (int row = 0; row < 2; ++row)
      for (int col = 0; col < 6; ++col) jp(row, col) = jac.at<double>(2 * n + row, col);
    *info += jp.t() * w * jp;
    const cv::Vec2d e(proj[n].x - f * p.normalized.x, proj[n].y - f * p.normalized.y);
    if (gradient) *gradient += jp.t() * (w * e);
    *chi2 += (e.t() * w * e)(0);
    *sse_px += e.dot(e);
  }
}

// The last refinement with the query's focal scale s and k1 change dk as parameters 6 and 7,
// on the pixels the observations came from (the supplied camera maps `normalized` back to them).
using Vec8 = cv::Vec<double, 8>;
using Mat8 = cv::Matx<double, 8, 8>;

// The data's normal equations over a subset of the inliers, over the variance factor.
using GroupNormal = std::function<void(const std::vector<int>&, Mat8*, Vec8*)>;

// Inliers by fault hypothesis: the caller's groups, then the four image quadrants.
std::map<std::pair<PoseSubset::Kind, int>, std::vector<int>> Members(
    const std::vector<PointCorrespondence>& pts, const std::vector<int>& in,
    const AbsolutePoseOptions& o) {
  std::map<std::pair<PoseSubset::Kind, int>, std::vector<int>> members;
  for (int i : in) {
    if (!o.groups.empty() && o.groups[i] >= 0)
      members[{PoseSubset::Kind::kGroup, o.groups[i]}].push_back(i);
    const cv::Point2d& q = pts[i].normalized;
    members[{PoseSubset::Kind::kQuadrant, (q.x >= 0) + 2 * (q.y >= 0)}].push_back(i);
  }
  return members;
}

// Solution separation (PoseSubset) at the solution `pose`: h and g the all-in information and
// gradient (data over the variance factor plus priors; a 6-parameter pose padded with 1 and 0 on
// 6, 7). The all-in and each subset's solution are one Gauss-Newton step from `pose`, so the
// separation does not depend on how exactly `pose` minimised the weighted cost.
void SeparateSolutions(const std::vector<PointCorrespondence>& pts, const std::vector<int>& in,
                       const AbsolutePoseOptions& o, const cv::Vec6d& pose, const Mat8& h,
                       const Vec8& g, const GroupNormal& group_normal, AbsolutePose* out) {
  const cv::Matx<double, 3, 6> jc = CenterJacobian(pose);
  const Mat8 cov = h.inv(cv::DECOMP_SVD);
  const Vec8 all_in = -(cov * g);
  for (const auto& [key, members] : Members(pts, in, o)) {
    if (static_cast<int>(in.size() - members.size()) < o.min_subset_inliers) {
      ++out->subsets_skipped;
      continue;
    }
    Mat8 hj;
    Vec8 gj;
    group_normal(members, &hj, &gj);
    const Mat8 rest = (h - hj).inv(cv::DECOMP_SVD);
    const Vec8 shift = -(rest * (g - gj)) - all_in;
    PoseSubset s;
    s.kind = key.first, s.index = key.second;
    s.left_out = static_cast<int>(members.size());
    s.center_shift = jc * cv::Vec6d(shift[0], shift[1], shift[2], shift[3], shift[4], shift[5]);
    const cv::Matx66d rest6 = rest.get_minor<6, 6>(0, 0), cov6 = cov.get_minor<6, 6>(0, 0);
    s.shift_covariance = jc * (rest6 - cov6) * jc.t();
    s.center_covariance = jc * rest6 * jc.t();
    out->subsets.push_back(s);
  }
}

// A 6-parameter pose's normal equations padded to 8 (1 and 0 on the unused 6, 7).
void Pad(const cv::Matx66d& h6, const cv::Vec6d& g6, double scale, Mat8* h, Vec8* g) {
  *h = Mat8::zeros(), *g = Vec8::zeros();
  for (int r = 0; r < 6; ++r) {
    (*g)[r] = g6[r] * scale;
    for (int c = 0; c < 6; ++c) (*h)(r, c) = h6(r, c) * scale;
  }
}

class IntrinsicsRefinement {
 public:
  IntrinsicsRefinement(const std::vector<PointCorrespondence>& pts, const Conditioned& c,
                       const CameraModel& cam, const AbsolutePoseOptions& o)
      : pts_(pts), c_(c), cam_(cam), o_(o) {
    const CalibrationUncertainty u = UncertaintyOrDefault(cam);
    prior_ = Vec8::zeros();
    prior_[6] = 1 / Sq(u.focal_px / (0.5 * (cam.fx + cam.fy)));
    prior_[7] = 1 / Sq(u.k1);
    std::vector<cv::Point3d> rays;
    for (const PointCorrespondence& p : pts) rays.emplace_back(p.normalized.x, p.normalized.y, 1);
    cv::projectPoints(rays, cv::Vec3d(0, 0, 0), cv::Vec3d(0, 0, 0), cam.K(), cam.distortion,
                      observed_);
  }

  // Levenberg-Marquardt from x over `in`, data weighted by 1 / variance_factor.
  Vec8 Solve(Vec8 x, const std::vector<int>& in, double variance_factor) const {
    double lambda = 1e-3;
    Mat8 h;
    Vec8 g;
    double cost = Cost(x, in, variance_factor, &h, &g);
    for (int it = 0; it < 20; ++it) {
      Mat8 a = h;
      for (int k = 0; k < 8; ++k) a(k, k) += lambda * h(k, k) + 1e-12;
      const Vec8 step = a.solve(-g, cv::DECOMP_CHOLESKY);
      Mat8 h2;
      Vec8 g2;
      const double cost2 = Cost(x + step, in, variance_factor, &h2, &g2);
      if (cost2 < cost) {
        x += step, h = h2, g = g2, lambda *= 0.1;
        const bool done = cost - cost2 < 1e-9 * cost;
        cost = cost2;
        if (done) break;
      } else {
        lambda *= 10;
        if (lambda > 1e8) break;
      }
    }
    return x;
  }

  // Correspondences within threshold_px of their projection under x, in front of the camera.
  std::vector<int> Inliers(const Vec8& x, int* in_front) const {
    std::vector<int> all(pts_.size());
    for (size_t i = 0; i < all.size(); ++i) all[i] = static_cast<int>(i);
    std::vector<cv::Point2d> proj;
    Project(x, all, &proj, nullptr);
    const cv::Matx33d r = RotationOf(x);
    std::vector<int> in;
    for (int i : all) {
      const cv::Point3d& w = c_.object[i];
      const double z = (r * cv::Vec3d(w.x, w.y, w.z))[2] + x[5];
      if (z > 0 && cv::norm(proj[i] - observed_[i]) <= o_.threshold_px) in.push_back(i);
    }
    *in_front = static_cast<int>(in.size());
    return in;
  }

  // The data's normal equations (J^T W J, J^T W e) over `in` at x; with chi2 and sse, the
  // residuals' chi-square and sum of squared pixels.
  void NormalEquations(const Vec8& x, const std::vector<int>& in, Mat8* h, Vec8* g,
                       double* chi2 = nullptr, double* sse = nullptr) const {
    double unused_chi2, unused_sse;
    Normal(x, in, h, g, chi2 ? chi2 : &unused_chi2, sse ? sse : &unused_sse);
  }
  const Vec8& prior_information() const { return prior_; }

 private:
  static double Sq(double v) { return v * v; }
  static cv::Matx33d RotationOf(const Vec8& x) {
    cv::Matx33d r;
    cv::Rodrigues(cv::Vec3d(x[0], x[1], x[2]), r);
    return r;
  }

  void Project(const Vec8& x, const std::vector<int>& in, std::vector<cv::Point2d>* proj,
               cv::Mat* jac) const {
    std::vector<cv::Point3d> obj;
    for (int i : in) obj.push_back(c_.object[i]);
    cv::Matx33d k = cam_.K();
    k(0, 0) *= 1 + x[6], k(1, 1) *= 1 + x[6];
    std::array<double, 5> dist = cam_.distortion;
    dist[0] += x[7];
    const cv::Vec3d rvec(x[0], x[1], x[2]), tvec(x[3], x[4], x[5]);
    if (jac)
      cv::projectPoints(obj, rvec, tvec, k, dist, *proj, *jac);
    else
      cv::projectPoints(obj, rvec, tvec, k, dist, *proj);
  }

  // J^T W J and J^T W e of the data, W the inverse of keypoint noise plus the point's covariance
  // seen through the camera.
  void Normal(const Vec8& x, const std::vector<int>& in, Mat8* h, Vec8* g, double* chi2,
              double* sse) const {
    std::vector<cv::Point2d> proj;
    cv::Mat jac;  // per row: rvec 3, tvec 3, fx, fy, cx, cy, k1 ...
    Project(x, in, &proj, &jac);
    const cv::Matx33d r = RotationOf(x);
    *h = Mat8::zeros(), *g = Vec8::zeros(), *chi2 = 0, *sse = 0;
    for (size_t n = 0; n < in.size(); ++n) {
      cv::Matx<double, 2, 8> j;
      cv::Matx23d jt;  // pixels per metre of the point in camera axes
      for (int row = 0; row < 2; ++row) {
        const double* d = jac.ptr<double>(static_cast<int>(2 * n + row));
        for (int col = 0; col < 6; ++col) j(row, col) = d[col];
        for (int col = 0; col < 3; ++col) jt(row, col) = d[3 + col];
        j(row, 6) = d[6] * cam_.fx + d[7] * cam_.fy;
        j(row, 7) = d[10];
      }
      const cv::Matx22d w = ResidualWeight(jt * r, pts_[in[n]].covariance, o_.pixel_sigma_px);
      const cv::Vec2d e(proj[n].x - observed_[in[n]].x, proj[n].y - observed_[in[n]].y);
      *h += j.t() * w * j;
      *g += j.t() * (w * e);
      *chi2 += (e.t() * w * e)(0);
      *sse += e.dot(e);
    }
  }

  // Data chi-square / variance_factor plus the priors' (the normal equations likewise).
  double Cost(const Vec8& x, const std::vector<int>& in, double variance_factor, Mat8* h,
              Vec8* g) const {
    double chi2, sse;
    Normal(x, in, h, g, &chi2, &sse);
    *h *= 1 / variance_factor, *g *= 1 / variance_factor;
    double cost = chi2 / variance_factor;
    for (int k = 6; k < 8; ++k) {
      (*h)(k, k) += prior_[k];
      (*g)[k] += prior_[k] * x[k];
      cost += prior_[k] * x[k] * x[k];
    }
    return cost;
  }

  const std::vector<PointCorrespondence>& pts_;
  const Conditioned& c_;
  const CameraModel& cam_;
  const AbsolutePoseOptions& o_;
  Vec8 prior_;                         // information of the priors (diagonal)
  std::vector<cv::Point2d> observed_;  // pixels, per correspondence
};

// Refines pose and intrinsics from (rvec, tvec) on `in`, recounts the inliers once and refines
// again; fills the pose, inliers and the marginal covariance into *out.
void RefineWithIntrinsics(const std::vector<PointCorrespondence>& pts, const Conditioned& c,
                          const AbsolutePoseOptions& o, double variance_factor, const cv::Mat& rvec,
                          const cv::Mat& tvec, std::vector<int> in, AbsolutePose* out) {
  const IntrinsicsRefinement m(pts, c, *o.camera, o);
  Vec8 x = Vec8::zeros();
  for (int k = 0; k < 3; ++k) x[k] = rvec.at<double>(k), x[3 + k] = tvec.at<double>(k);
  int front = out->points_in_front;
  for (int round = 0; round < 2; ++round) {
    x = m.Solve(x, in, variance_factor);
    int next_front = 0;
    std::vector<int> next = m.Inliers(x, &next_front);
    if (static_cast<int>(next.size()) < o.min_inliers) break;
    in = std::move(next), front = next_front;
  }
  Mat8 h;
  Vec8 g;
  double chi2, sse;
  m.NormalEquations(x, in, &h, &g, &chi2, &sse);
  out->variance_factor = VarianceFactor(chi2, static_cast<int>(in.size()), o);
  const double scale = 1 / out->variance_factor;
  h *= scale;
  for (int k = 6; k < 8; ++k) h(k, k) += m.prior_information()[k];
  const Mat8 cov = h.inv(cv::DECOMP_SVD);
  const cv::Vec6d pose(x[0], x[1], x[2], x[3], x[4], x[5]);
  SetPose(c, pose, cov.get_minor<6, 6>(0, 0), in, front, pts.size(), sse, out);
  out->intrinsics = {x[6], std::sqrt(cov(6, 6)), x[7], std::sqrt(cov(7, 7))};
  if (!o.separate_solutions) return;
  g *= scale;
  for (int k = 6; k < 8; ++k) g[k] += m.prior_information()[k] * x[k];
  SeparateSolutions(
      pts, in, o, pose, h, g,
      [&](const std::vector<int>& members, Mat8* hj, Vec8* gj) {
        m.NormalEquations(x, members, hj, gj);
        *hj *= scale, *gj *= scale;
      },
      out);
}

}  // namespace

bool AbsolutePoseOptions::Validate(std::string* error) const {
  for (int g : groups)
    if (g < -1) {
      if (error) *error = "absolute pose: groups must be labels >= 0, or -1 for none";
      return false;
    }
  if (threshold_px > 0 && focal_px > 0 && min_inliers >= 6 && min_subset_inliers >= 6 &&
      iterations > 0 && confidence > 0 && confidence < 1 && pixel_sigma_px > 0 &&
      min_variance_factor > 0)
    return true;
  if (error)
    *error =
        "absolute pose: threshold_px, focal_px, pixel_sigma_px > 0, min_inliers >= 6, "
        "min_subset_inliers >= 6, "
        "0 < confidence < 1";
  return false;
}

Result<AbsolutePose> EstimateAbsolutePose(const std::vector<PointCorrespondence>& pts,
                                          const AbsolutePoseOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  if (!o.groups.empty() && o.groups.size() != pts.size())
    return Status::InvalidArgument("absolute pose: groups must hold one label per correspondence");
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
    cv::Matx66d info;
    cv::Vec6d gradient;
    double chi2, sse;
    PoseInformation(pts, c, in, rvec, tvec, o, &info, &chi2, &sse, &gradient);
    AbsolutePose out;
    out.variance_factor = VarianceFactor(chi2, static_cast<int>(in.size()), o);
    const cv::Vec6d pose(rvec.at<double>(0), rvec.at<double>(1), rvec.at<double>(2),
                         tvec.at<double>(0), tvec.at<double>(1), tvec.at<double>(2));
    SetPose(c, pose, info.inv(cv::DECOMP_SVD) * out.variance_factor, in, front, pts.size(), sse,
            &out);
    if (o.camera && o.camera->lens == LensModel::kPinhole) {
      RefineWithIntrinsics(pts, c, o, out.variance_factor, rvec, tvec, in, &out);
    } else if (o.separate_solutions) {
      const double scale = 1 / out.variance_factor;
      Mat8 h;
      Vec8 g;
      Pad(info, gradient, scale, &h, &g);
      h(6, 6) = h(7, 7) = 1;
      SeparateSolutions(
          pts, in, o, pose, h, g,
          [&](const std::vector<int>& members, Mat8* hj, Vec8* gj) {
            cv::Matx66d i6;
            cv::Vec6d g6;
            double unused_chi2, unused_sse;
            PoseInformation(pts, c, members, rvec, tvec, o, &i6, &unused_chi2, &unused_sse, &g6);
            Pad(i6, g6, scale, hj, gj);
          },
          &out);
    }
    return out;
  } catch (const cv::Exception& e) {
    return Status::Internal(std::string("PnP failed: ") + e.what());
  }
}

}  // namespace sightfix
