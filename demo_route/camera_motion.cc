#include "demo_route/camera_motion.h"

#include <algorithm>
#include <cmath>
#include <opencv2/calib3d.hpp>
#include <opencv2/imgproc.hpp>

#include "demo_route/distortion_plan.h"

namespace sightfix::demo {
namespace {

// Samples along a segment: one per pixel of its length, at least one (the mean of n evenly
// spaced samples of a box of length L has variance L^2 (1 - 1/n^2) / 12, 1 % short of the box's
// at n = 10; each sample is bilinear, which fills the gaps), at most kMaxSamples.
constexpr int kMaxSamples = 48;

int SampleCount(const cv::Point2f& a, const cv::Point2f& b) {
  return std::min(kMaxSamples, 1 + static_cast<int>(std::ceil(cv::norm(b - a))));
}

// A displacement this small (pixels) all through the exposure leaves a pixel as it is.
constexpr float kStillPx = 0.01f;

bool Still(const cv::Vec2f& a, const cv::Vec2f& b) {
  return std::abs(a[0]) < kStillPx && std::abs(a[1]) < kStillPx && std::abs(b[0]) < kStillPx &&
         std::abs(b[1]) < kStillPx;
}

// The camera at tau seconds in the frame's camera: a point's coordinates move to
// rt (P - shift), rt = R(w tau)^T, shift = v tau.
struct MovedCamera {
  cv::Matx33d rt;
  cv::Vec3d shift;
};

MovedCamera MovedAt(const CameraMotion& motion, double tau_s) {
  MovedCamera c;
  cv::Matx33d r;
  cv::Rodrigues(motion.angular_velocity_rad_s * tau_s, r);
  c.rt = r.t();
  c.shift = motion.velocity_mps * tau_s;
  return c;
}

// CameraModel::Project, the pinhole's without the lens polynomial.
cv::Point2d ProjectFast(const CameraModel& camera, const cv::Vec3d& p) {
  if (camera.HasDistortion()) return camera.Project(p);
  return {camera.fx * p[0] / p[2] + camera.cx, camera.fy * p[1] / p[2] + camera.cy};
}

// Displacement of the point on `ray` (x, y, 1) with inverse depth w: Project(rt (ray - w shift))
// minus `base` = Project(ray) (a homogeneous point, so the sky, w = 0, only turns). False
// behind the camera. A point that passes close to the camera's plane projects arbitrarily far
// (x / z with z near 0): its displacement is cut to the image's diagonal, by which it has left
// the view (uncut, one such pixel asked the blur for a 694 GB structuring element).
bool Displace(const CameraModel& camera, const MovedCamera& c, const cv::Vec3d& ray, double w,
              const cv::Point2d& base, cv::Point2d* d) {
  const cv::Vec3d p = c.rt * (ray - w * c.shift);
  if (p[2] <= 1e-3 * cv::norm(p)) return false;
  *d = ProjectFast(camera, p) - base;
  const double length = std::hypot(d->x, d->y);
  const double diagonal = std::hypot(camera.width_px, camera.height_px);
  if (!std::isfinite(length)) return false;
  if (length > diagonal) *d *= diagonal / length;
  return true;
}

}  // namespace

cv::Mat2f NormalizedCoordinates(const CameraModel& camera) {
  cv::Mat2f m(camera.height_px, camera.width_px);
  const std::shared_ptr<const DistortionPlan> plan =
      camera.HasDistortion() ? PlanFor(camera) : nullptr;
  for (int y = 0; y < m.rows; ++y)
    for (int x = 0; x < m.cols; ++x) {
      if (plan) {
        const cv::Matx33d& k = plan->canvas_k;
        m(y, x) = {static_cast<float>((plan->map_x.at<float>(y, x) - k(0, 2)) / k(0, 0)),
                   static_cast<float>((plan->map_y.at<float>(y, x) - k(1, 2)) / k(1, 1))};
      } else {
        m(y, x) = {static_cast<float>((x - camera.cx) / camera.fx),
                   static_cast<float>((y - camera.cy) / camera.fy)};
      }
    }
  return m;
}

namespace {

// Per pixel, the displacements at the start (*start) and end (*end) of its row's exposure.
void Displacements(const cv::Mat& inverse_depth, const CameraModel& camera,
                   const CameraMotion& motion, double exposure_s, double readout_s,
                   cv::Mat2f* start, cv::Mat2f* end) {
  const cv::Mat2f m = NormalizedCoordinates(camera);
  const int h = camera.height_px;
  start->create(h, camera.width_px);
  end->create(h, camera.width_px);
  for (int y = 0; y < h; ++y) {
    const double tau = h > 1 ? readout_s * (double(y) / (h - 1) - 0.5) : 0.0;
    const MovedCamera a = MovedAt(motion, tau - exposure_s / 2);
    const MovedCamera b = MovedAt(motion, tau + exposure_s / 2);
    for (int x = 0; x < camera.width_px; ++x) {
      const cv::Vec3d ray(m(y, x)[0], m(y, x)[1], 1.0);
      const double w = inverse_depth.at<float>(y, x);
      const cv::Point2d base = ProjectFast(camera, ray);
      cv::Point2d da, db;
      if (!Displace(camera, a, ray, w, base, &da) || !Displace(camera, b, ray, w, base, &db))
        da = db = {0, 0};
      (*start)(y, x) = cv::Vec2f(da.x, da.y);
      (*end)(y, x) = cv::Vec2f(db.x, db.y);
    }
  }
}

// Bilinear sample of a CV_32FC3 image of at least 2 x 2 pixels, the border replicated.
cv::Vec3f Sample(const cv::Mat3f& img, cv::Point2f p) {
  const float x = std::clamp(p.x, 0.0f, float(img.cols - 1));
  const float y = std::clamp(p.y, 0.0f, float(img.rows - 1));
  const int x0 = std::min(int(x), img.cols - 2), y0 = std::min(int(y), img.rows - 2);
  const float fx = x - x0, fy = y - y0;
  const cv::Vec3f* r0 = img.ptr<cv::Vec3f>(y0) + x0;
  const cv::Vec3f* r1 = img.ptr<cv::Vec3f>(y0 + 1) + x0;
  return (1 - fy) * ((1 - fx) * r0[0] + fx * r0[1]) + fy * ((1 - fx) * r1[0] + fx * r1[1]);
}

// Gather: the mean of the sharp image along p - D over p's exposure, leaving out samples that
// land on a surface nearer than p's by kOccluderDepthRatio (they hide the background p sees
// there; SplatNearer brings them in). All left out: p's own value.
cv::Mat3f Gather(const cv::Mat3f& sharp, const cv::Mat1f& inverse_depth, const cv::Mat2f& start,
                 const cv::Mat2f& end) {
  cv::Mat3f out(sharp.size());
  for (int y = 0; y < sharp.rows; ++y)
    for (int x = 0; x < sharp.cols; ++x) {
      if (Still(start(y, x), end(y, x))) {
        out(y, x) = sharp(y, x);
        continue;
      }
      const cv::Point2f p(x, y);
      const cv::Point2f a = p - cv::Point2f(start(y, x)), b = p - cv::Point2f(end(y, x));
      const float nearest = inverse_depth(y, x) * float(kOccluderDepthRatio);
      const int n = SampleCount(a, b);
      cv::Vec3f sum(0, 0, 0);
      int used = 0;
      for (int k = 0; k < n; ++k) {
        const cv::Point2f q = a + (b - a) * ((k + 0.5f) / n);
        const int qx = std::clamp(static_cast<int>(q.x + 0.5f), 0, sharp.cols - 1);
        const int qy = std::clamp(static_cast<int>(q.y + 0.5f), 0, sharp.rows - 1);
        if (inverse_depth(qy, qx) > nearest) continue;
        sum += Sample(sharp, q);
        ++used;
      }
      out(y, x) = used ? sum / used : sharp(y, x);
    }
  return out;
}

// The splats of nearer surfaces: colour times weight into *colour, weight into *weight.
struct Splats {
  cv::Mat3f colour;
  cv::Mat1f weight;
};

// Adds weight wt of pixel q's value v at position t (bilinear), to each of the four pixels only
// where the surface seen there is farther than q's by kOccluderDepthRatio.
void Splat(cv::Point2f t, float wt, const cv::Vec3f& v, float q_inverse_depth,
           const cv::Mat1f& inverse_depth, Splats* s) {
  const int x0 = static_cast<int>(std::floor(t.x)), y0 = static_cast<int>(std::floor(t.y));
  const float fx = t.x - x0, fy = t.y - y0;
  for (int dy = 0; dy < 2; ++dy)
    for (int dx = 0; dx < 2; ++dx) {
      const int x = x0 + dx, y = y0 + dy;
      if (x < 0 || y < 0 || x >= s->weight.cols || y >= s->weight.rows) continue;
      if (!(inverse_depth(y, x) * kOccluderDepthRatio < q_inverse_depth)) continue;
      const float w = wt * (dx ? fx : 1 - fx) * (dy ? fy : 1 - fy);
      s->colour(y, x) += w * v;
      s->weight(y, x) += w;
    }
}

// The longest displacement anywhere, pixels.
double MaxDisplacement(const cv::Mat2f& start, const cv::Mat2f& end) {
  float longest2 = 0;
  for (const cv::Mat2f* m : {&start, &end})
    for (int y = 0; y < m->rows; ++y) {
      const cv::Vec2f* row = m->ptr<cv::Vec2f>(y);
      for (int x = 0; x < m->cols; ++x)
        longest2 = std::max(longest2, row[x][0] * row[x][0] + row[x][1] * row[x][1]);
    }
  return std::sqrt(double(longest2));
}

// Every pixel q spread along q + D over its exposure, where it passes over a farther surface.
// Only a pixel with a farther surface within reach (the least inverse depth over a square of
// the longest displacement's half-width around it) can, so the others are skipped.
Splats SplatNearer(const cv::Mat3f& sharp, const cv::Mat1f& inverse_depth, const cv::Mat2f& start,
                   const cv::Mat2f& end) {
  Splats s{cv::Mat3f(sharp.size(), cv::Vec3f(0, 0, 0)), cv::Mat1f(sharp.size(), 0.0f)};
  const int reach = static_cast<int>(std::ceil(MaxDisplacement(start, end))) + 1;
  cv::Mat1f farthest;
  cv::erode(inverse_depth, farthest,
            cv::getStructuringElement(cv::MORPH_RECT, cv::Size(2 * reach + 1, 2 * reach + 1)),
            cv::Point(-1, -1), 1, cv::BORDER_REPLICATE);
  for (int y = 0; y < sharp.rows; ++y)
    for (int x = 0; x < sharp.cols; ++x) {
      if (!(farthest(y, x) * kOccluderDepthRatio < inverse_depth(y, x)) ||
          Still(start(y, x), end(y, x)))
        continue;
      const cv::Point2f a = cv::Point2f(x, y) + cv::Point2f(start(y, x));
      const cv::Point2f b = cv::Point2f(x, y) + cv::Point2f(end(y, x));
      const int n = SampleCount(a, b);
      for (int k = 0; k < n; ++k)
        Splat(a + (b - a) * ((k + 0.5f) / n), 1.0f / n, sharp(y, x), inverse_depth(y, x),
              inverse_depth, &s);
    }
  return s;
}

}  // namespace

bool ImageDisplacement(const CameraModel& camera, const CameraMotion& motion, cv::Point2d pixel,
                       double inverse_depth_per_m, double tau_s, cv::Point2d* displacement) {
  const cv::Point2d m = camera.PixelToNormalized(pixel);
  const cv::Vec3d ray(m.x, m.y, 1.0);
  return Displace(camera, MovedAt(motion, tau_s), ray, inverse_depth_per_m, camera.Project(ray),
                  displacement);
}

cv::Mat ApplyCameraMotion(const cv::Mat& linear, const cv::Mat& inverse_depth,
                          const CameraModel& camera, const CameraMotion& motion, double exposure_s,
                          double readout_s) {
  CV_Assert(linear.type() == CV_32FC3 && inverse_depth.type() == CV_32F &&
            linear.size() == inverse_depth.size() &&
            linear.size() == cv::Size(camera.width_px, camera.height_px) && linear.cols >= 2 &&
            linear.rows >= 2);
  const bool still =
      cv::norm(motion.velocity_mps) == 0 && cv::norm(motion.angular_velocity_rad_s) == 0;
  if (still || (exposure_s <= 0 && readout_s <= 0)) return linear.clone();
  cv::Mat2f start, end;
  Displacements(inverse_depth, camera, motion, exposure_s, readout_s, &start, &end);
  const cv::Mat3f sharp = linear;
  cv::Mat3f out = Gather(sharp, inverse_depth, start, end);
  const Splats near = SplatNearer(sharp, inverse_depth, start, end);
  for (int y = 0; y < out.rows; ++y)
    for (int x = 0; x < out.cols; ++x) {
      const float w = near.weight(y, x);
      if (w <= 0) continue;
      const float cover = std::min(w, 1.0f);
      out(y, x) = (1 - cover) * out(y, x) + cover * (near.colour(y, x) / w);
    }
  return out;
}

}  // namespace sightfix::demo
