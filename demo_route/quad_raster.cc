#include "demo_route/quad_raster.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include "demo_route/texture_sampling.h"

namespace sightfix::demo {
namespace {

// The pixels [*x0, *x1] of one row (normalized y = my) where the quad is hit in front of the
// near plane. Along a row every test (0 <= u <= 1, 0 <= v <= 1, depth > near) is linear in x
// once multiplied by n.m, whose sign is fixed where the quad is in front; so each test cuts
// the span at one point.
bool ScanlineSpan(const QuadRaster& q, double my, double fx, double cx, double near_m, int* x0,
                  int* x1) {
  const double s = q.h > 0 ? 1.0 : -1.0;
  // a . m = alpha x + beta for m = ((x - cx) / fx, my, 1).
  auto lin = [&](const cv::Vec3d& a, double* alpha, double* beta) {
    *alpha = a[0] / fx;
    *beta = -a[0] * cx / fx + a[1] * my + a[2];
  };
  double na, nb, ua, ub, va, vb;
  lin(q.n, &na, &nb);
  lin(q.au, &ua, &ub);
  lin(q.av, &va, &vb);
  double lo = *x0 - 0.5, hi = *x1 + 0.5;
  auto keep = [&](double p, double c) {  // keep x where s * (p x + c) >= 0
    p *= s, c *= s;
    if (std::abs(p) < 1e-15) {
      if (c < 0) hi = lo - 1;
      return;
    }
    const double root = -c / p;
    if (p > 0)
      lo = std::max(lo, root);
    else
      hi = std::min(hi, root);
  };
  keep(na, nb);                                                        // n.m has the sign of h
  keep(-near_m * na, q.h - near_m * nb);                               // depth h / n.m > near
  keep(q.h * ua - q.cu * na, q.h * ub - q.cu * nb);                    // u >= 0
  keep((q.cu + q.nn) * na - q.h * ua, (q.cu + q.nn) * nb - q.h * ub);  // u <= 1
  keep(q.h * va - q.cv * na, q.h * vb - q.cv * nb);                    // v >= 0
  keep((q.cv + q.nn) * na - q.h * va, (q.cv + q.nn) * nb - q.h * vb);  // v <= 1
  // Empty span: say so before converting, since lo may be any far root (5.5e16 was seen by
  // UBSan) and a double outside int's range is undefined behaviour to convert.
  if (!(lo <= hi)) return false;
  const int a = static_cast<int>(std::ceil(lo)), b = static_cast<int>(std::floor(hi));
  *x0 = std::max(*x0, a);
  *x1 = std::min(*x1, b);
  return *x0 <= *x1;
}

// Screen bounding box of the quad's part in front of the near plane; false if none.
bool ScreenBox(const cv::Vec3d c[4], const cv::Matx33d& k, cv::Size size, double near_m,
               cv::Rect* box) {
  std::vector<cv::Vec3d> poly;
  for (int i = 0; i < 4; ++i) {
    const cv::Vec3d& a = c[i];
    const cv::Vec3d& b = c[(i + 1) % 4];
    if (a[2] >= near_m) poly.push_back(a);
    if ((a[2] >= near_m) != (b[2] >= near_m))
      poly.push_back(a + (b - a) * ((near_m - a[2]) / (b[2] - a[2])));
  }
  if (poly.empty()) return false;
  double x0 = 1e18, y0 = 1e18, x1 = -1e18, y1 = -1e18;
  for (const cv::Vec3d& p : poly) {
    const double x = k(0, 0) * p[0] / p[2] + k(0, 2), y = k(1, 1) * p[1] / p[2] + k(1, 2);
    x0 = std::min(x0, x), x1 = std::max(x1, x), y0 = std::min(y0, y), y1 = std::max(y1, y);
  }
  const int ix0 = std::max(0, static_cast<int>(std::floor(x0))),
            iy0 = std::max(0, static_cast<int>(std::floor(y0)));
  const int ix1 = std::min(size.width - 1, static_cast<int>(std::ceil(x1)));
  const int iy1 = std::min(size.height - 1, static_cast<int>(std::ceil(y1)));
  if (ix0 > ix1 || iy0 > iy1) return false;
  *box = cv::Rect(ix0, iy0, ix1 - ix0 + 1, iy1 - iy0 + 1);
  return true;
}

// Whether a cut-out's texel under the ray m (hit at lambda) is opaque, its mip level chosen
// for the sample's footprint on the quad.
inline bool OpaqueAt(const QuadRaster& qr, const cv::Vec3d& m, double lambda, double nm, double fx,
                     double fpn) {
  const Texture& tex = *qr.texture;
  const double uu = std::clamp((lambda * qr.au.dot(m) - qr.cu) / qr.nn, 0.0, 1.0);
  const double vv = std::clamp((lambda * qr.av.dot(m) - qr.cv) / qr.nn, 0.0, 1.0);
  const double mn = cv::norm(m);
  const double fp_m = lambda * mn / (fx * std::sqrt(std::abs(nm) / (fpn * mn)));
  return SampleAlpha(tex, uu, vv, fp_m * tex.texels_per_m) >= 0.5f;
}

}  // namespace

VisibilityBuffer::VisibilityBuffer(cv::Size size)
    : depth(size, std::numeric_limits<float>::infinity()), id(size, kSkySample) {}

bool MayBeVisible(const Quad& q, const CameraPose& pose, const cv::Vec3d& forward,
                  double max_range_m) {
  const cv::Vec3d rel = q.centre - pose.position;
  if (cv::norm(rel) - q.radius > max_range_m || rel.dot(forward) < -q.radius) return false;
  // Back faces of closed boxes are hidden by their front faces.
  if (!q.two_sided && (pose.position - q.origin).dot(q.v_axis.cross(q.u_axis)) <= 0) return false;
  return true;
}

bool SetUpQuadRaster(const Quad& q, const CameraPose& pose, const cv::Matx33d& k, cv::Size size,
                     double near_m, QuadRaster* qr, cv::Rect* box) {
  const cv::Matx33d& r = pose.camera_from_enu;
  const cv::Vec3d o = r * (q.origin - pose.position), u = r * q.u_axis, v = r * q.v_axis;
  const cv::Vec3d corners[4] = {o, o + u, o + u + v, o + v};
  if (!ScreenBox(corners, k, size, near_m, box)) return false;
  qr->quad = &q;
  qr->texture = nullptr;
  qr->n = u.cross(v);
  qr->nn = qr->n.dot(qr->n);
  if (qr->nn < 1e-12) return false;
  qr->h = qr->n.dot(o);
  if (std::abs(qr->h) < 1e-9) return false;  // seen edge-on
  qr->au = v.cross(qr->n);
  qr->av = qr->n.cross(u);
  qr->cu = qr->au.dot(o);
  qr->cv = qr->av.dot(o);
  return true;
}

void RasterizeGround(const CameraPose& pose, const cv::Matx33d& k, double max_range_m,
                     VisibilityBuffer* vis) {
  const cv::Matx33d rt = pose.camera_from_enu.t();
  const double fx = k(0, 0), fy = k(1, 1), cx = k(0, 2), cy = k(1, 2);
  const double cz = pose.position[2];
  // World direction of pixel (x, y): rt * m = col0 * mx + col1 * my + col2, stepped along x.
  const cv::Vec3d col0(rt(0, 0), rt(1, 0), rt(2, 0)), col1(rt(0, 1), rt(1, 1), rt(2, 1)),
      col2(rt(0, 2), rt(1, 2), rt(2, 2));
  const cv::Vec3d step = col0 / fx;
  for (int y = 0; y < vis->depth.rows; ++y) {
    cv::Vec3d wdir = col0 * (-cx / fx) + col1 * ((y - cy) / fy) + col2;
    for (int x = 0; x < vis->depth.cols; ++x, wdir += step) {
      if (wdir[2] < -1e-9) {
        const double lambda = -cz / wdir[2];
        if (lambda * cv::norm(wdir) < max_range_m * 1.5)
          vis->depth(y, x) = static_cast<float>(lambda), vis->id(y, x) = kGroundSample;
      }
    }
  }
}

void RasterizeQuad(const QuadRaster& qr, const cv::Rect& box, const cv::Matx33d& k, double near_m,
                   int raster_id, VisibilityBuffer* vis) {
  const double fx = k(0, 0), fy = k(1, 1), cx = k(0, 2), cy = k(1, 2);
  const bool cut_out = qr.texture->has_alpha;
  const double fpn = std::sqrt(qr.nn);
  for (int y = box.y; y < box.y + box.height; ++y) {
    const double my = (y - cy) / fy;
    int x0 = box.x, x1 = box.x + box.width - 1;
    if (!ScanlineSpan(qr, my, fx, cx, near_m, &x0, &x1)) continue;
    float* drow = vis->depth.ptr<float>(y);
    int* idrow = vis->id.ptr<int>(y);
    for (int x = x0; x <= x1; ++x) {
      const cv::Vec3d m((x - cx) / fx, my, 1.0);
      const double nm = qr.n.dot(m);
      const double lambda = qr.h / nm;
      if (lambda >= drow[x]) continue;
      if (cut_out && !OpaqueAt(qr, m, lambda, nm, fx, fpn)) continue;
      drow[x] = static_cast<float>(lambda);
      idrow[x] = raster_id;
    }
  }
}

}  // namespace sightfix::demo
