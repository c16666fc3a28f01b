#include "demo_route/sun_shadow.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "demo_route/texture_sampling.h"

namespace sightfix::demo {
namespace {

// Keeps the indices i in [*lo, *hi] where lo_value <= a i + b <= hi_value.
void ClipLinear(double a, double b, double lo_value, double hi_value, double* lo, double* hi) {
  if (std::abs(a) < 1e-12) {
    if (b < lo_value || b > hi_value) *hi = *lo - 1;
    return;
  }
  const double r0 = (lo_value - b) / a, r1 = (hi_value - b) / a;
  *lo = std::max(*lo, std::min(r0, r1));
  *hi = std::min(*hi, std::max(r0, r1));
}

inline double Cross(const cv::Vec2d& a, const cv::Vec2d& b) { return a[0] * b[1] - a[1] * b[0]; }

// Along the ray, metres: what separates an occluder from the point it would shadow, beside the
// normal offset (texel quantisation of the occluder's t).
constexpr double kBiasM = 0.03;

}  // namespace

SunShadowMap::SunShadowMap(const cv::Vec3d& sun_dir, const cv::Rect2d& region, double texel_m)
    : sun_(sun_dir),
      shift_(sun_dir[0] / sun_dir[2], sun_dir[1] / sun_dir[2]),
      region_(region),
      texel_m_(texel_m),
      t_max_(std::max(1, static_cast<int>(std::ceil(region.height / texel_m))),
             std::max(1, static_cast<int>(std::ceil(region.width / texel_m))),
             -std::numeric_limits<float>::infinity()) {}

cv::Rect2d SunShadowMap::RegionFor(const cv::Vec3d& sun_dir, const cv::Vec3d& position,
                                   const cv::Vec3d& forward, double half_fov_rad, double range_m,
                                   double max_height_m) {
  const cv::Vec2d c(position[0], position[1]);
  cv::Vec2d f(forward[0], forward[1]);
  const double fn = cv::norm(f);
  f = fn > 1e-6 ? f / fn : cv::Vec2d(1, 0);
  const double fov = fn > 1e-6 ? half_fov_rad : M_PI;  // looking straight down: all round
  std::vector<cv::Vec2d> pts = {c - 5 * f};
  for (double a : {-fov, -fov / 2, 0.0, fov / 2, fov}) {
    const double ca = std::cos(a), sa = std::sin(a);
    pts.push_back(c + range_m * cv::Vec2d(ca * f[0] - sa * f[1], sa * f[0] + ca * f[1]));
  }
  // Points up to max_height_m map away from the sun by height * |shift|, at most range_m.
  cv::Vec2d away(-sun_dir[0] / sun_dir[2], -sun_dir[1] / sun_dir[2]);
  away *= max_height_m;
  if (cv::norm(away) > range_m) away *= range_m / cv::norm(away);
  for (size_t i = 0, n = pts.size(); i < n; ++i) pts.push_back(pts[i] + away);
  double x0 = 1e18, y0 = 1e18, x1 = -1e18, y1 = -1e18;
  for (const cv::Vec2d& p : pts)
    x0 = std::min(x0, p[0]), y0 = std::min(y0, p[1]), x1 = std::max(x1, p[0]),
    y1 = std::max(y1, p[1]);
  return {x0, y0, x1 - x0, y1 - y0};
}

void SunShadowMap::AddQuad(const Quad& q, const Texture* texture) {
  const cv::Vec2d g0 = Map(q.origin);
  const cv::Vec2d du = Map(q.u_axis), dv = Map(q.v_axis);  // linear: Map of a direction
  const double det = Cross(du, dv);
  if (std::abs(det) < 1e-9) return;  // edge-on from the sun: casts no area
  double gx0 = 1e18, gy0 = 1e18, gx1 = -1e18, gy1 = -1e18;
  for (const cv::Vec2d& g : {g0, g0 + du, g0 + dv, g0 + du + dv})
    gx0 = std::min(gx0, g[0]), gy0 = std::min(gy0, g[1]), gx1 = std::max(gx1, g[0]),
    gy1 = std::max(gy1, g[1]);
  const double t = texel_m_;
  const int i0 = std::max(0, static_cast<int>(std::floor((gx0 - region_.x) / t - 1)));
  const int i1 = std::min(t_max_.cols - 1, static_cast<int>(std::ceil((gx1 - region_.x) / t)));
  const int j0 = std::max(0, static_cast<int>(std::floor((gy0 - region_.y) / t - 1)));
  const int j1 = std::min(t_max_.rows - 1, static_cast<int>(std::ceil((gy1 - region_.y) / t)));
  if (i0 > i1 || j0 > j1) return;
  // Texels within half a texel of the parallelogram count (so posts thinner than a texel still
  // cast an unbroken shadow): u's and v's margins are that distance over the edges' spacing.
  const double mu = 0.5 * t * cv::norm(dv) / std::abs(det),
               mv = 0.5 * t * cv::norm(du) / std::abs(det);
  const double t0 = q.origin[2] / sun_[2], tu = q.u_axis[2] / sun_[2], tv = q.v_axis[2] / sun_[2];
  const bool cut_out = texture != nullptr && texture->has_alpha;
  const double footprint = cut_out ? t * texture->texels_per_m : 0;
  const double ex = region_.x + 0.5 * t - g0[0];  // texel 0's centre relative to g0
  for (int j = j0; j <= j1; ++j) {
    const double cy = region_.y + (j + 0.5) * t - g0[1];
    // u = cross(c, dv) / det and v = cross(du, c) / det for c = (ex + i t, cy): linear in i.
    const double ua = t * dv[1] / det, ub = (ex * dv[1] - cy * dv[0]) / det;
    const double va = -t * du[1] / det, vb = (du[0] * cy - du[1] * ex) / det;
    double lo = i0, hi = i1;
    ClipLinear(ua, ub, -mu, 1 + mu, &lo, &hi);
    ClipLinear(va, vb, -mv, 1 + mv, &lo, &hi);
    if (!(lo <= hi)) continue;
    float* row = t_max_.ptr<float>(j);
    for (int i = static_cast<int>(std::ceil(lo)), e = static_cast<int>(std::floor(hi)); i <= e;
         ++i) {
      const double u = std::clamp(ua * i + ub, 0.0, 1.0), v = std::clamp(va * i + vb, 0.0, 1.0);
      const float tt = static_cast<float>(t0 + u * tu + v * tv);
      if (tt <= row[i]) continue;
      if (cut_out && SampleAlpha(*texture, u, v, footprint) < 0.5f) continue;
      row[i] = tt;
    }
  }
}

float SunShadowMap::Lit(const cv::Vec3d& p, const cv::Vec3d& n, double normal_offset_texels) const {
  const cv::Vec3d q = p + n * (normal_offset_texels * texel_m_);
  const cv::Vec2d g = Map(q);
  const float tq = static_cast<float>(q[2] / sun_[2] + kBiasM);
  const double fx = (g[0] - region_.x) / texel_m_ - 0.5, fy = (g[1] - region_.y) / texel_m_ - 0.5;
  const int ix = static_cast<int>(std::floor(fx)), iy = static_cast<int>(std::floor(fy));
  const float wx = static_cast<float>(fx - ix), wy = static_cast<float>(fy - iy);
  float lit = 0;
  for (int dy = 0; dy < 2; ++dy)
    for (int dx = 0; dx < 2; ++dx) {
      const int x = ix + dx, y = iy + dy;
      const bool inside = x >= 0 && y >= 0 && x < t_max_.cols && y < t_max_.rows;
      const bool open = !inside || t_max_(y, x) <= tq;
      lit += open ? (dx ? wx : 1 - wx) * (dy ? wy : 1 - wy) : 0.0f;
    }
  return lit;
}

}  // namespace sightfix::demo
