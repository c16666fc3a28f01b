#include "demo_route/ground_surface.h"

#include <algorithm>
#include <cmath>

#include "demo_route/random.h"
#include "demo_route/shading_math.h"

namespace sightfix::demo {

GroundSurface::GroundSurface(const Town& town)
    : seed_(static_cast<uint32_t>(HashSeed(town.options.seed, 0x67726e))) {
  cv::Vec2d mn(1e18, 1e18), mx(-1e18, -1e18);
  for (const Street& st : town.streets) {
    const auto& p = st.centre.points();
    for (size_t i = 1; i < p.size(); ++i) {
      segments_.push_back({p[i - 1], p[i], st.centre.arc()[i - 1]});
      for (const cv::Vec2d& q : {p[i - 1], p[i]}) {
        mn = {std::min(mn[0], q[0]), std::min(mn[1], q[1])};
        mx = {std::max(mx[0], q[0]), std::max(mx[1], q[1])};
      }
    }
  }
  IndexSegments(mn, mx);
}

// Lists every segment in each cell within reach of it (the facade line plus a cell), over
// the bounding box mn..mx of the centrelines grown by that reach.
void GroundSurface::IndexSegments(const cv::Vec2d& mn, const cv::Vec2d& mx) {
  const double reach = StreetSection::kFacadeM + kCellM;
  lo_ = mn - cv::Vec2d(reach, reach);
  nx_ = static_cast<int>((mx[0] - mn[0] + 2 * reach) / kCellM) + 1;
  ny_ = static_cast<int>((mx[1] - mn[1] + 2 * reach) / kCellM) + 1;
  cells_.resize(static_cast<size_t>(nx_) * ny_);
  for (size_t i = 0; i < segments_.size(); ++i) {
    const Segment& s = segments_[i];
    const int x0 = std::max(0, int((std::min(s.a[0], s.b[0]) - reach - lo_[0]) / kCellM));
    const int x1 = std::min(nx_ - 1, int((std::max(s.a[0], s.b[0]) + reach - lo_[0]) / kCellM));
    const int y0 = std::max(0, int((std::min(s.a[1], s.b[1]) - reach - lo_[1]) / kCellM));
    const int y1 = std::min(ny_ - 1, int((std::max(s.a[1], s.b[1]) + reach - lo_[1]) / kCellM));
    for (int y = y0; y <= y1; ++y)
      for (int x = x0; x <= x1; ++x) cells_[size_t(y) * nx_ + x].push_back(static_cast<int>(i));
  }
}

bool GroundSurface::Nearest(double x, double y, double* d, double* s) const {
  const int cx = int((x - lo_[0]) / kCellM), cy = int((y - lo_[1]) / kCellM);
  if (cx < 0 || cy < 0 || cx >= nx_ || cy >= ny_) return false;
  double best = 1e18;
  for (int i : cells_[size_t(cy) * nx_ + cx]) {
    const Segment& g = segments_[i];
    const cv::Vec2d ab = g.b - g.a, ap(x - g.a[0], y - g.a[1]);
    const double len2 = ab.dot(ab);
    const double t = std::clamp(ap.dot(ab) / len2, 0.0, 1.0);
    const double dd = cv::norm(ap - t * ab);
    if (dd < best) best = dd, *s = g.s0 + t * std::sqrt(len2);
  }
  *d = best;
  return best < 1e17;
}

cv::Vec3f GroundSurface::Colour(double x, double y, double fp) const {
  double d = 1e9, s = 0;
  Nearest(x, y, &d, &s);
  const float grain = Fbm(x, y, fp, 0.8, 5, seed_);
  if (d < StreetSection::kParkingM) return Asphalt(x, y, d, s, fp, grain);
  if (d < StreetSection::kParkingM + 0.2)
    return cv::Vec3f(0.62f, 0.63f, 0.64f) * (1.0f + 0.2f * grain);  // kerb
  if (d < StreetSection::kFacadeM + 2.0) return Paving(d, s, fp, grain);
  const float g = 0.5f + grain;  // yards and verges
  return cv::Vec3f(0.18f * g, 0.36f * g, 0.3f * g);
}

cv::Vec3f GroundSurface::Asphalt(double x, double y, double d, double s, double fp,
                                 float grain) const {
  const bool parking = d > StreetSection::kCarriagewayM;
  float g = (parking ? 0.36f : 0.31f) + 0.4f * grain;
  if (fp < 0.08) g *= StoneFactor(x, y, fp);
  float paint = MarkingCoverage(d, s, fp, parking);
  const cv::Vec3f asphalt(g, g, g * 1.02f);
  if (paint <= 0) return asphalt;
  paint *= 0.85f + 0.3f * ValueNoise(x * 3, y * 3, seed_ + 5);  // worn paint
  return Lerp(asphalt, cv::Vec3f(0.82f, 0.85f, 0.86f), std::clamp(paint, 0.0f, 1.0f));
}

// One chance in six or so per 0.25 m cell, each stone at its own place in the cell; drawn with
// footprint-filtered edges so they stay put under perspective, and faded out as the footprint
// nears 0.08 m.
float GroundSurface::StoneFactor(double x, double y, double fp) const {
  const int32_t ix = static_cast<int32_t>(std::floor(x * 4)),
                iy = static_cast<int32_t>(std::floor(y * 4));
  const uint32_t hsh = Hash2(ix, iy, seed_ + 9);
  if ((hsh & 0xff) >= 40) return 1.0f;
  const double sx = (ix + 0.25 + 0.5 * ((hsh >> 8) & 0xff) / 255.0) / 4;
  const double sy = (iy + 0.25 + 0.5 * ((hsh >> 16) & 0xff) / 255.0) / 4;
  const double radius = 0.02 + 0.05 * ((hsh >> 24) & 0x0f) / 15.0;
  const float cover =
      Stripe(std::hypot(x - sx, y - sy), radius, fp) * static_cast<float>(1.0 - fp / 0.08);
  const float tone = (hsh >> 28) & 1 ? 1.8f : 0.4f;
  return 1.0f + (tone - 1.0f) * cover;
}

float GroundSurface::MarkingCoverage(double d, double s, double fp, bool parking) {
  float paint = 0;
  paint = std::max(paint, Stripe(d, 0.1, fp));  // centre line
  if (std::fmod(s, 9.0) < 3.0)
    paint = std::max(paint, Stripe(d - StreetSection::kLaneWidthM, 0.07, fp));  // lane dashes
  paint = std::max(paint, Stripe(d - StreetSection::kCarriagewayM, 0.08, fp));  // edge line
  if (parking && std::fmod(s, 6.0) < 0.1) paint = std::max(paint, 0.8f);        // bay marks
  return paint;
}

cv::Vec3f GroundSurface::Paving(double d, double s, double fp, float grain) const {
  const double a = s / 0.6, b = d / 0.6;
  const int32_t ia = static_cast<int32_t>(std::floor(a)), ib = static_cast<int32_t>(std::floor(b));
  const float tint = 0.5f + 0.12f * (HashUnit(ia, ib, seed_ + 3) - 0.5f) + 0.1f * grain;
  const double ja = std::min(a - ia, 1 - (a - ia)) * 0.6, jb = std::min(b - ib, 1 - (b - ib)) * 0.6;
  const float joint = std::max(Stripe(ja, 0.01, fp), Stripe(jb, 0.01, fp));
  float spot = 0;  // a stain or chewing-gum spot on one slab in five, somewhere on it
  const uint32_t hs = Hash2(ia, ib, seed_ + 11);
  if ((hs & 0xff) < 50 && fp < 0.1) {
    const double sa = (ia + 0.2 + 0.6 * ((hs >> 8) & 0xff) / 255.0) * 0.6,
                 sb = (ib + 0.2 + 0.6 * ((hs >> 16) & 0xff) / 255.0) * 0.6;
    spot = Stripe(std::hypot(s - sa, d - sb), 0.02 + 0.06 * ((hs >> 24) & 0xf) / 15.0, fp) *
           static_cast<float>(1 - fp / 0.1);
  }
  const cv::Vec3f slab =
      Lerp(cv::Vec3f(tint * 0.95f, tint, tint * 1.04f), cv::Vec3f(0.3f, 0.3f, 0.3f), joint * 0.7f);
  return Lerp(slab, cv::Vec3f(0.15f, 0.16f, 0.18f), spot * 0.8f);
}

}  // namespace sightfix::demo
