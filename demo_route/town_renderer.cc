#include "demo_route/town_renderer.h"

#include <algorithm>
#include <cmath>
#include <mutex>
#include <opencv2/imgproc.hpp>
#include <sstream>

#include "demo_route/random.h"

namespace sightfix::demo {
namespace {

constexpr int kSky = -1;
constexpr int kGround = -2;

inline uint32_t Hash2(int32_t x, int32_t y, uint32_t seed) {
  uint32_t h = static_cast<uint32_t>(x) * 0x8da6b343u ^ static_cast<uint32_t>(y) * 0xd8163841u ^
               seed * 0xcb1ab31fu;
  h ^= h >> 13;
  h *= 0x5bd1e995u;
  return h ^ (h >> 15);
}

inline float HashUnit(int32_t x, int32_t y, uint32_t seed) {
  return (Hash2(x, y, seed) & 0xffffff) / 16777216.0f;
}

// Smooth value noise in [0, 1) at unit lattice spacing.
inline float ValueNoise(double x, double y, uint32_t seed) {
  const int32_t ix = static_cast<int32_t>(x) - (x < 0), iy = static_cast<int32_t>(y) - (y < 0);
  const float tx = static_cast<float>(x - ix), ty = static_cast<float>(y - iy);
  const float sx = tx * tx * (3 - 2 * tx), sy = ty * ty * (3 - 2 * ty);
  const float a = HashUnit(ix, iy, seed), b = HashUnit(ix + 1, iy, seed);
  const float c = HashUnit(ix, iy + 1, seed), d = HashUnit(ix + 1, iy + 1, seed);
  return (a + (b - a) * sx) + ((c + (d - c) * sx) - (a + (b - a) * sx)) * sy;
}

// Band-limited noise: octaves finer than the pixel footprint fade out instead of aliasing.
float Fbm(double x, double y, double footprint, double base_scale, int octaves, uint32_t seed) {
  float sum = 0, norm = 0, amp = 1;
  double scale = base_scale;
  for (int i = 0; i < octaves; ++i, scale *= 0.5, amp *= 0.6f) {
    const float fade = static_cast<float>(std::clamp(2.0 - 2.0 * footprint / scale, 0.0, 1.0));
    norm += amp;
    sum += amp * (fade > 0 ? fade * (ValueNoise(x / scale, y / scale, seed + i) - 0.5f) : 0.0f);
  }
  return sum / norm;
}

// Coverage of a stripe |d| < half_width for a pixel of the given footprint (box filter).
inline float Stripe(double d, double half_width, double footprint) {
  const double w = std::max(footprint, 1e-3);
  return static_cast<float>(std::clamp((half_width - std::abs(d)) / w + 0.5, 0.0, 1.0));
}

cv::Vec3f Lerp(const cv::Vec3f& a, const cv::Vec3f& b, float t) { return a + (b - a) * t; }

cv::Vec3f Bilinear(const cv::Mat& img, double x, double y, float* alpha) {
  x = std::clamp(x, 0.0, img.cols - 1.001);
  y = std::clamp(y, 0.0, img.rows - 1.001);
  const int x0 = static_cast<int>(x), y0 = static_cast<int>(y);
  const float tx = static_cast<float>(x - x0), ty = static_cast<float>(y - y0);
  const int ch = img.channels();
  const uchar* r0 = img.ptr<uchar>(y0) + x0 * ch;
  const uchar* r1 = img.ptr<uchar>(y0 + 1) + x0 * ch;
  cv::Vec3f out;
  for (int c = 0; c < 3; ++c) {
    const float top = r0[c] + (r0[c + ch] - r0[c]) * tx, bottom = r1[c] + (r1[c + ch] - r1[c]) * tx;
    out[c] = (top + (bottom - top) * ty) / 255.0f;
  }
  if (alpha) *alpha = ch == 4 ? r0[3] / 255.0f : 1.0f;
  return out;
}

// Trilinear mip-mapped sample; footprint in texels of level 0.
cv::Vec3f SampleTexture(const Texture& t, double u, double v, double footprint_texels) {
  const double level =
      std::clamp(std::log2(std::max(footprint_texels, 1e-6)), 0.0, double(t.levels.size() - 1));
  const int l0 = static_cast<int>(level);
  const int l1 = std::min<int>(l0 + 1, t.levels.size() - 1);
  const float f = static_cast<float>(level - l0);
  const cv::Mat& a = t.levels[l0];
  const cv::Vec3f ca = Bilinear(a, u * a.cols - 0.5, v * a.rows - 0.5, nullptr);
  if (f < 1e-3 || l1 == l0) return ca;
  const cv::Mat& b = t.levels[l1];
  return Lerp(ca, Bilinear(b, u * b.cols - 0.5, v * b.rows - 0.5, nullptr), f);
}

float SampleAlpha(const Texture& t, double u, double v, double footprint_texels) {
  const int level = std::clamp(static_cast<int>(std::log2(std::max(footprint_texels, 1.0))), 0,
                               int(t.levels.size() - 1));
  const cv::Mat& m = t.levels[level];
  const int x = std::clamp(static_cast<int>(u * m.cols), 0, m.cols - 1);
  const int y = std::clamp(static_cast<int>(v * m.rows), 0, m.rows - 1);
  return m.ptr<uchar>(y)[x * 4 + 3] / 255.0f;
}

}  // namespace

Quad MakeQuad(const cv::Vec3d& origin, const cv::Vec3d& u_axis, const cv::Vec3d& v_axis,
              int texture, double brightness) {
  Quad q;
  q.origin = origin;
  q.u_axis = u_axis;
  q.v_axis = v_axis;
  q.texture = texture;
  q.brightness = brightness;
  q.centre = origin + 0.5 * (u_axis + v_axis);
  q.radius = 0.5 * std::max(cv::norm(u_axis + v_axis), cv::norm(u_axis - v_axis));
  return q;
}

// The road surface: street cross-sections from the nearest centreline segment.
struct TownScene::Ground {
  struct Segment {
    cv::Vec2d a, b;
    double s0;
  };
  static constexpr double kCellM = 4.0;
  std::vector<Segment> segments;
  cv::Vec2d lo;
  int nx = 0, ny = 0;
  std::vector<std::vector<int>> cells;
  uint32_t seed;

  explicit Ground(const Town& town)
      : seed(static_cast<uint32_t>(HashSeed(town.options.seed, 0x67726e))) {
    cv::Vec2d mn(1e18, 1e18), mx(-1e18, -1e18);
    for (const Street& st : town.streets) {
      const auto& p = st.centre.points();
      for (size_t i = 1; i < p.size(); ++i) {
        segments.push_back({p[i - 1], p[i], st.centre.arc()[i - 1]});
        for (const cv::Vec2d& q : {p[i - 1], p[i]})
          mn = {std::min(mn[0], q[0]), std::min(mn[1], q[1])},
          mx = {std::max(mx[0], q[0]), std::max(mx[1], q[1])};
      }
    }
    const double reach = StreetSection::kFacadeM + kCellM;
    lo = mn - cv::Vec2d(reach, reach);
    nx = static_cast<int>((mx[0] - mn[0] + 2 * reach) / kCellM) + 1;
    ny = static_cast<int>((mx[1] - mn[1] + 2 * reach) / kCellM) + 1;
    cells.resize(static_cast<size_t>(nx) * ny);
    for (size_t i = 0; i < segments.size(); ++i) {
      const Segment& s = segments[i];
      const int x0 = std::max(0, int((std::min(s.a[0], s.b[0]) - reach - lo[0]) / kCellM));
      const int x1 = std::min(nx - 1, int((std::max(s.a[0], s.b[0]) + reach - lo[0]) / kCellM));
      const int y0 = std::max(0, int((std::min(s.a[1], s.b[1]) - reach - lo[1]) / kCellM));
      const int y1 = std::min(ny - 1, int((std::max(s.a[1], s.b[1]) + reach - lo[1]) / kCellM));
      for (int y = y0; y <= y1; ++y)
        for (int x = x0; x <= x1; ++x) cells[size_t(y) * nx + x].push_back(static_cast<int>(i));
    }
  }

  // Unsigned distance to the nearest centreline and arc length along it; false off-street.
  bool Nearest(double x, double y, double* d, double* s) const {
    const int cx = int((x - lo[0]) / kCellM), cy = int((y - lo[1]) / kCellM);
    if (cx < 0 || cy < 0 || cx >= nx || cy >= ny) return false;
    double best = 1e18;
    for (int i : cells[size_t(cy) * nx + cx]) {
      const Segment& g = segments[i];
      const cv::Vec2d ab = g.b - g.a, ap(x - g.a[0], y - g.a[1]);
      const double len2 = ab.dot(ab);
      const double t = std::clamp(ap.dot(ab) / len2, 0.0, 1.0);
      const double dd = cv::norm(ap - t * ab);
      if (dd < best) best = dd, *s = g.s0 + t * std::sqrt(len2);
    }
    *d = best;
    return best < 1e17;
  }

  cv::Vec3f Colour(double x, double y, double fp) const {
    double d = 1e9, s = 0;
    Nearest(x, y, &d, &s);
    const float grain = Fbm(x, y, fp, 0.8, 5, seed);
    if (d < StreetSection::kParkingM) {
      const bool parking = d > StreetSection::kCarriagewayM;
      float g = (parking ? 0.36f : 0.31f) + 0.4f * grain;
      // Sparse round stones and oil spots, one chance per 0.25 m cell, each at its own place in
      // the cell; drawn with footprint-filtered edges so they stay put under perspective.
      if (fp < 0.08) {
        const int32_t ix = static_cast<int32_t>(std::floor(x * 4)),
                      iy = static_cast<int32_t>(std::floor(y * 4));
        const uint32_t hsh = Hash2(ix, iy, seed + 9);
        if ((hsh & 0xff) < 40) {
          const double sx = (ix + 0.25 + 0.5 * ((hsh >> 8) & 0xff) / 255.0) / 4;
          const double sy = (iy + 0.25 + 0.5 * ((hsh >> 16) & 0xff) / 255.0) / 4;
          const double radius = 0.02 + 0.05 * ((hsh >> 24) & 0x0f) / 15.0;
          const float cover =
              Stripe(std::hypot(x - sx, y - sy), radius, fp) * static_cast<float>(1.0 - fp / 0.08);
          const float tone = (hsh >> 28) & 1 ? 1.8f : 0.4f;
          g *= 1.0f + (tone - 1.0f) * cover;
        }
      }
      float paint = 0;
      paint = std::max(paint, Stripe(d, 0.1, fp));  // centre line
      if (std::fmod(s, 9.0) < 3.0)
        paint = std::max(paint, Stripe(d - StreetSection::kLaneWidthM, 0.07, fp));  // lane dashes
      paint = std::max(paint, Stripe(d - StreetSection::kCarriagewayM, 0.08, fp));  // edge line
      if (parking && std::fmod(s, 6.0) < 0.1) paint = std::max(paint, 0.8f);        // bay marks
      const cv::Vec3f asphalt(g, g, g * 1.02f);
      if (paint <= 0) return asphalt;
      paint *= 0.85f + 0.3f * ValueNoise(x * 3, y * 3, seed + 5);  // worn paint
      return Lerp(asphalt, cv::Vec3f(0.82f, 0.85f, 0.86f), std::clamp(paint, 0.0f, 1.0f));
    }
    if (d < StreetSection::kParkingM + 0.2)
      return cv::Vec3f(0.62f, 0.63f, 0.64f) * (1.0f + 0.2f * grain);  // kerb
    if (d < StreetSection::kFacadeM + 2.0) {  // paving slabs, 0.6 m, aligned with the street
      const double a = s / 0.6, b = d / 0.6;
      const int32_t ia = static_cast<int32_t>(std::floor(a)),
                    ib = static_cast<int32_t>(std::floor(b));
      const float tint = 0.5f + 0.12f * (HashUnit(ia, ib, seed + 3) - 0.5f) + 0.1f * grain;
      const double ja = std::min(a - ia, 1 - (a - ia)) * 0.6,
                   jb = std::min(b - ib, 1 - (b - ib)) * 0.6;
      const float joint = std::max(Stripe(ja, 0.01, fp), Stripe(jb, 0.01, fp));
      float spot = 0;  // a stain or chewing-gum spot on one slab in five, somewhere on it
      const uint32_t hs = Hash2(ia, ib, seed + 11);
      if ((hs & 0xff) < 50 && fp < 0.1) {
        const double sa = (ia + 0.2 + 0.6 * ((hs >> 8) & 0xff) / 255.0) * 0.6,
                     sb = (ib + 0.2 + 0.6 * ((hs >> 16) & 0xff) / 255.0) * 0.6;
        spot = Stripe(std::hypot(s - sa, d - sb), 0.02 + 0.06 * ((hs >> 24) & 0xf) / 15.0, fp) *
               static_cast<float>(1 - fp / 0.1);
      }
      const cv::Vec3f slab = Lerp(cv::Vec3f(tint * 0.95f, tint, tint * 1.04f),
                                  cv::Vec3f(0.3f, 0.3f, 0.3f), joint * 0.7f);
      return Lerp(slab, cv::Vec3f(0.15f, 0.16f, 0.18f), spot * 0.8f);
    }
    const float g = 0.5f + grain;  // yards and verges
    return cv::Vec3f(0.18f * g, 0.36f * g, 0.3f * g);
  }
};

TownScene::TownScene(const Town& town, const std::vector<std::vector<Vehicle>>& variants)
    : town_(town), glyphs_(town.options.seed), ground_(std::make_unique<Ground>(town)) {
  const GlyphSet* glyphs = &glyphs_;
  for (const Building& b : town.buildings) {
    std::array<int, 5> tex{};
    for (int e = 0; e < 4; ++e) {
      const double w = cv::norm(b.footprint[(e + 1) % 4] - b.footprint[e]);
      const uint64_t seed = HashSeed(b.seed, e);
      if (e == b.front_edge) {
        const FacadeSpec spec{w, b.height_m, b.floors, seed};
        tex[e] =
            textures_.Add([spec, glyphs] { return PaintFacade(spec, *glyphs); }, kFacadeTexelsPerM);
      } else {
        const double h = b.height_m;
        tex[e] =
            textures_.Add([w, h, seed] { return PaintPlainWall(w, h, seed); }, kPlainTexelsPerM);
      }
    }
    tex[4] = -1;
    AddBox(b.footprint, 0.0, b.height_m, tex, 1.0, &quads_);
  }
  for (const Pole& p : town.poles) {
    const int metal = textures_.Add([s = p.seed] { return PaintMetal(s); }, 8 / 0.16);
    const double hw = p.kind == Pole::kLamp ? 0.08 : 0.04;
    const cv::Vec2d dx(hw, 0), dy(0, hw);
    AddBox({p.base - dx - dy, p.base + dx - dy, p.base + dx + dy, p.base - dx + dy}, 0, p.height_m,
           {metal, metal, metal, metal, metal}, 1.0, &quads_);
    const cv::Vec2d f(std::cos(p.facing_rad), std::sin(p.facing_rad)), side(-f[1], f[0]);
    if (p.kind == Pole::kLamp) {  // arm with a lamp head over the road
      const cv::Vec2d a = p.base, b = p.base + 1.6 * f;
      AddBox({a - 0.06 * side, b - 0.06 * side, b + 0.06 * side, a + 0.06 * side},
             p.height_m - 0.15, p.height_m, {metal, metal, metal, metal, metal}, 1.0, &quads_);
    } else {  // sign panel, seen from both sides (the back in plain metal)
      const int face =
          textures_.Add([s = p.seed, glyphs] { return PaintSign(s, *glyphs); }, kObjectTexelsPerM);
      const cv::Vec2d c = p.base + 0.06 * f;
      const cv::Vec3d o(c[0] + 0.35 * side[0], c[1] + 0.35 * side[1], p.height_m + 0.35);
      quads_.push_back(
          MakeQuad(o, cv::Vec3d(-0.7 * side[0], -0.7 * side[1], 0), {0, 0, -0.7}, face));
      quads_.back().two_sided = true;
    }
  }
  for (const Tree& t : town.trees) {
    const int bark = textures_.Add([s = t.seed] { return PaintBark(s); }, 16 / 0.3);
    const cv::Vec2d dx(0.13, 0), dy(0, 0.13);
    AddBox({t.base - dx - dy, t.base + dx - dy, t.base + dx + dy, t.base - dx + dy}, 0,
           t.trunk_height_m + 0.5, {bark, bark, bark, bark, bark}, 1.0, &quads_);
    const int leaves =
        textures_.Add([s = t.seed] { return PaintCanopy(s); }, 128 / (2 * t.canopy_radius_m));
    const double r = t.canopy_radius_m, top = t.trunk_height_m + 2 * r;
    for (double a : {0.3, 0.3 + M_PI / 2}) {
      const cv::Vec3d u(2 * r * std::cos(a), 2 * r * std::sin(a), 0);
      quads_.push_back(
          MakeQuad(cv::Vec3d(t.base[0], t.base[1], top) - 0.5 * u, u, {0, 0, -2 * r}, leaves));
      quads_.back().two_sided = true;
    }
  }
  // Vehicles: textures per vehicle (by id), quads per drive variant.
  std::map<int, std::array<int, 5>> vehicle_tex;
  for (const Vehicle& v : town.vehicles) {
    std::array<int, 5> tex{};
    for (int face = 0; face < 5; ++face) {
      const double len = face < 2 ? v.length_m : v.width_m, h = face == 4 ? v.length_m : v.height_m;
      tex[face] = textures_.Add(
          [len, h, s = v.seed, face, glyphs] { return PaintVehicle(len, h, s, face, *glyphs); },
          kObjectTexelsPerM);
    }
    vehicle_tex[v.id] = tex;
  }
  for (const std::vector<Vehicle>& variant : variants) {
    std::vector<Quad> quads;
    for (const Vehicle& v : variant) {
      const cv::Vec2d ax(std::cos(v.yaw_rad), std::sin(v.yaw_rad)), ay(-ax[1], ax[0]);
      const cv::Vec2d hx = ax * (v.length_m / 2), hy = ay * (v.width_m / 2);
      const auto& t = vehicle_tex.at(v.id);
      // Edges: 0 right side, 1 front, 2 left side, 3 back (counter-clockwise from the rear right).
      AddBox({v.centre - hx - hy, v.centre + hx - hy, v.centre + hx + hy, v.centre - hx + hy}, 0.25,
             0.25 + v.height_m, {t[0], t[2], t[1], t[3], t[4]}, 1.0, &quads);
    }
    vehicle_quads_.push_back(std::move(quads));
  }
}

TownScene::~TownScene() = default;

int TownScene::AddTexture(cv::Mat image, double texels_per_m) {
  return textures_.Add([image] { return image; }, texels_per_m);
}

void TownScene::AddQuad(const Quad& q) { quads_.push_back(q); }

// Walls of a box on a counter-clockwise footprint, textured from the outside; textures[4] is the
// top (none when negative).
void TownScene::AddBox(const std::array<cv::Vec2d, 4>& fp, double z0, double z1,
                       const std::array<int, 5>& textures, double brightness,
                       std::vector<Quad>* out) {
  for (int e = 0; e < 4; ++e) {
    const cv::Vec2d a = fp[e], b = fp[(e + 1) % 4];
    out->push_back(MakeQuad({a[0], a[1], z1}, {b[0] - a[0], b[1] - a[1], 0}, {0, 0, z0 - z1},
                            textures[e], brightness));
  }
  if (textures[4] >= 0) {
    const cv::Vec3d o(fp[3][0], fp[3][1], z1);
    out->push_back(MakeQuad(o, cv::Vec3d(fp[0][0] - fp[3][0], fp[0][1] - fp[3][1], 0),
                            cv::Vec3d(fp[2][0] - fp[3][0], fp[2][1] - fp[3][1], 0), textures[4],
                            brightness));
  }
}

namespace {

struct QuadRaster {
  const Quad* quad;
  cv::Vec3d n;       // U x V in camera coordinates
  double h, nn;      // n . o_c and n . n
  cv::Vec3d au, av;  // u = (lambda au.m - cu) / nn, v likewise
  double cu, cv;
};

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

}  // namespace

cv::Mat TownScene::RenderPinhole(const CameraPose& pose, const cv::Matx33d& k, cv::Size size,
                                 int ss, const Appearance& look, int variant,
                                 const RenderOptions& options) const {
  const cv::Matx33d& r = pose.camera_from_enu;
  const cv::Matx33d rt = r.t();
  const double fx = k(0, 0), fy = k(1, 1), cx = k(0, 2), cy = k(1, 2);
  const int w = size.width, h = size.height;
  cv::Mat1f depth(h, w, std::numeric_limits<float>::infinity());
  cv::Mat1i id(h, w, kSky);
  // Ground first: every ray that goes down meets the road plane z = 0.
  const double cz = pose.position[2];
  // World direction of pixel (x, y): rt * m = col0 * mx + col1 * my + col2, stepped along x.
  const cv::Vec3d col0(rt(0, 0), rt(1, 0), rt(2, 0)), col1(rt(0, 1), rt(1, 1), rt(2, 1)),
      col2(rt(0, 2), rt(1, 2), rt(2, 2));
  const cv::Vec3d step = col0 / fx;
  auto row_start = [&](int y) { return col0 * (-cx / fx) + col1 * ((y - cy) / fy) + col2; };
  for (int y = 0; y < h; ++y) {
    cv::Vec3d wdir = row_start(y);
    for (int x = 0; x < w; ++x, wdir += step) {
      if (wdir[2] < -1e-9) {
        const double lambda = -cz / wdir[2];
        if (lambda * cv::norm(wdir) < options.max_range_m * 1.5)
          depth(y, x) = static_cast<float>(lambda), id(y, x) = kGround;
      }
    }
  }
  const std::vector<Quad>* lists[2] = {
      &quads_, variant < int(vehicle_quads_.size()) ? &vehicle_quads_[variant] : nullptr};
  const cv::Vec3d forward = rt * cv::Vec3d(0, 0, 1);
  std::vector<QuadRaster> rasters;
  for (int li = 0; li < 2; ++li) {
    if (!lists[li]) continue;
    for (const Quad& q : *lists[li]) {
      const cv::Vec3d rel = q.centre - pose.position;
      if (cv::norm(rel) - q.radius > options.max_range_m || rel.dot(forward) < -q.radius) continue;
      // Back faces of closed boxes are hidden by their front faces: skip them.
      if (!q.two_sided && (pose.position - q.origin).dot(q.v_axis.cross(q.u_axis)) <= 0) continue;
      const cv::Vec3d o = r * (q.origin - pose.position), u = r * q.u_axis, v = r * q.v_axis;
      const cv::Vec3d corners[4] = {o, o + u, o + u + v, o + v};
      cv::Rect box;
      if (!ScreenBox(corners, k, size, options.near_m, &box)) continue;
      QuadRaster qr;
      qr.quad = &q;
      qr.n = u.cross(v);
      qr.nn = qr.n.dot(qr.n);
      if (qr.nn < 1e-12) continue;
      qr.h = qr.n.dot(o);
      if (std::abs(qr.h) < 1e-9) continue;  // seen edge-on
      qr.au = v.cross(qr.n);
      qr.av = qr.n.cross(u);
      qr.cu = qr.au.dot(o);
      qr.cv = qr.av.dot(o);
      const Texture& tex = textures_.Get(q.texture);
      const double fpn = std::sqrt(qr.nn);
      const int raster_id = static_cast<int>(rasters.size());
      for (int y = box.y; y < box.y + box.height; ++y) {
        const double my = (y - cy) / fy;
        int x0 = box.x, x1 = box.x + box.width - 1;
        if (!ScanlineSpan(qr, my, fx, cx, options.near_m, &x0, &x1)) continue;
        float* drow = depth.ptr<float>(y);
        for (int x = x0; x <= x1; ++x) {
          const cv::Vec3d m((x - cx) / fx, my, 1.0);
          const double nm = qr.n.dot(m);
          const double lambda = qr.h / nm;
          if (lambda >= drow[x]) continue;
          if (tex.has_alpha) {
            const double uu = std::clamp((lambda * qr.au.dot(m) - qr.cu) / qr.nn, 0.0, 1.0);
            const double vv = std::clamp((lambda * qr.av.dot(m) - qr.cv) / qr.nn, 0.0, 1.0);
            const double mn = cv::norm(m);
            const double fp_m = lambda * mn / (fx * std::sqrt(std::abs(nm) / (fpn * mn)));
            if (SampleAlpha(tex, uu, vv, fp_m * tex.texels_per_m) < 0.5f) continue;
          }
          drow[x] = static_cast<float>(lambda);
          id(y, x) = raster_id;
        }
      }
      rasters.push_back(qr);
    }
  }
  // Shading. With supersampling, a block of ss x ss samples that all see the same surface is
  // shaded once at the block centre; blocks that straddle an edge shade every sample and average
  // them. Surface coordinates are recomputed from the ray, so no per-sample texture coordinates are
  // stored.
  const cv::Vec3f horizon(look.sky_horizon), zenith(look.sky_zenith), haze(look.haze);
  const uint32_t cloud_seed = static_cast<uint32_t>(HashSeed(town_.options.seed, 0x636c64));
  auto shade = [&](int which, double mx, double my, double f_px) -> cv::Vec3f {
    const cv::Vec3d m(mx, my, 1.0);
    const cv::Vec3d wdir = rt * m;
    const double mn = std::sqrt(mx * mx + my * my + 1.0);
    if (which == kSky) {
      const double e = std::max(0.0, wdir[2] / mn);
      cv::Vec3f colour = Lerp(horizon, zenith, static_cast<float>(std::sqrt(e)));
      if (e > 0.03) {
        const double px = wdir[0] / wdir[2] * 1.5, py = wdir[1] / wdir[2] * 1.5;
        const float c = Fbm(px, py, 0.0, 1.0, 2, cloud_seed) + 0.2f;
        colour = Lerp(colour, cv::Vec3f(0.97f, 0.97f, 0.97f),
                      std::clamp(c, 0.0f, 1.0f) * float(look.cloud) * 2);
      }
      return colour;
    }
    cv::Vec3f colour;
    double dist;
    if (which == kGround) {
      const double lambda = -cz / std::min(wdir[2], -1e-9);
      dist = lambda * mn;
      const cv::Vec3d p = pose.position + lambda * wdir;
      const double cos_inc = std::abs(wdir[2]) / mn;
      const double fp = dist / (f_px * std::sqrt(std::max(cos_inc, 1e-3)));
      const double light = look.ambient + look.sun * std::max(0.0, look.sun_dir[2]);
      colour = ground_->Colour(p[0], p[1], fp) * static_cast<float>(light);
    } else {
      const QuadRaster& qr = rasters[which];
      const Texture& tex = textures_.Get(qr.quad->texture);
      const double nm = qr.n.dot(m);
      const double lambda = qr.h / nm;
      dist = lambda * mn;
      const double uu = std::clamp((lambda * qr.au.dot(m) - qr.cu) / qr.nn, 0.0, 1.0);
      const double vv = std::clamp((lambda * qr.av.dot(m) - qr.cv) / qr.nn, 0.0, 1.0);
      const double fpn = std::sqrt(qr.nn);
      const double cos_inc = std::abs(nm) / (fpn * mn);
      const double fp_m = dist / (f_px * std::sqrt(std::max(cos_inc, 1e-3)));
      colour = SampleTexture(tex, uu, vv, fp_m * tex.texels_per_m);
      // Outward normal in ENU is V x U; two-sided surfaces (alpha cut-outs) take |n . sun|.
      const cv::Vec3d nw = qr.quad->v_axis.cross(qr.quad->u_axis) / fpn;
      const double ns = nw.dot(look.sun_dir);
      const double light =
          qr.quad->brightness *
          (look.ambient + look.sun * (tex.has_alpha ? std::abs(ns) : std::max(0.0, ns)));
      colour *= static_cast<float>(light);
    }
    return Lerp(colour, haze, static_cast<float>(1.0 - std::exp(-dist / look.haze_m)));
  };
  const int ow = w / ss, oh = h / ss;
  cv::Mat3f out(oh, ow);
  for (int oy = 0; oy < oh; ++oy) {
    for (int ox = 0; ox < ow; ++ox) {
      const int which = id(oy * ss, ox * ss);
      bool uniform = true;
      for (int j = 0; j < ss && uniform; ++j)
        for (int i = 0; i < ss && uniform; ++i) uniform = id(oy * ss + j, ox * ss + i) == which;
      if (uniform) {
        const double x = ox * ss + (ss - 1) / 2.0, y = oy * ss + (ss - 1) / 2.0;
        // Filtered for the sample footprint, as a sample of an edge block would be: measured to
        // keep the detail that four averaged samples keep (the output pixel's own footprint
        // blurs one mip level more and cost the town a tenth of its matches).
        out(oy, ox) = shade(which, (x - cx) / fx, (y - cy) / fy, fx);
        continue;
      }
      cv::Vec3f sum(0, 0, 0);
      for (int j = 0; j < ss; ++j)
        for (int i = 0; i < ss; ++i) {
          const int x = ox * ss + i, y = oy * ss + j;
          sum += shade(id(y, x), (x - cx) / fx, (y - cy) / fy, fx);
        }
      out(oy, ox) = sum / static_cast<float>(ss * ss);
    }
  }
  return out;
}

namespace {

// Ideal-pinhole canvas covering every output pixel of a distorted camera, and the remap table
// from output pixels to canvas pixels. Cached per camera.
struct DistortionPlan {
  cv::Matx33d canvas_k;
  cv::Size canvas_size;
  cv::Mat map_x, map_y;  // CV_32F, output size
};

std::string CameraKey(const CameraModel& c) {
  std::ostringstream s;
  s.precision(17);
  s << c.width_px << ' ' << c.height_px << ' ' << c.fx << ' ' << c.fy << ' ' << c.cx << ' ' << c.cy;
  for (double d : c.distortion) s << ' ' << d;
  return s.str();
}

std::shared_ptr<const DistortionPlan> PlanFor(const CameraModel& cam) {
  static std::mutex mu;
  static std::map<std::string, std::shared_ptr<const DistortionPlan>> cache;
  const std::string key = CameraKey(cam);
  {
    std::lock_guard<std::mutex> lock(mu);
    auto it = cache.find(key);
    if (it != cache.end()) return it->second;
  }
  auto plan = std::make_shared<DistortionPlan>();
  cv::Mat nx(cam.height_px, cam.width_px, CV_64F), ny(cam.height_px, cam.width_px, CV_64F);
  double x0 = 1e18, y0 = 1e18, x1 = -1e18, y1 = -1e18;
  for (int y = 0; y < cam.height_px; ++y) {
    for (int x = 0; x < cam.width_px; ++x) {
      const cv::Point2d n = cam.PixelToNormalized({double(x), double(y)});
      nx.at<double>(y, x) = n.x, ny.at<double>(y, x) = n.y;
      x0 = std::min(x0, n.x), x1 = std::max(x1, n.x), y0 = std::min(y0, n.y),
      y1 = std::max(y1, n.y);
    }
  }
  const int margin = 3;
  const double cx = -x0 * cam.fx + margin, cy = -y0 * cam.fy + margin;
  plan->canvas_k = cv::Matx33d(cam.fx, 0, cx, 0, cam.fy, cy, 0, 0, 1);
  plan->canvas_size = cv::Size(static_cast<int>(std::ceil((x1 - x0) * cam.fx)) + 2 * margin,
                               static_cast<int>(std::ceil((y1 - y0) * cam.fy)) + 2 * margin);
  plan->map_x.create(cam.height_px, cam.width_px, CV_32F);
  plan->map_y.create(cam.height_px, cam.width_px, CV_32F);
  for (int y = 0; y < cam.height_px; ++y)
    for (int x = 0; x < cam.width_px; ++x) {
      plan->map_x.at<float>(y, x) = static_cast<float>(cam.fx * nx.at<double>(y, x) + cx);
      plan->map_y.at<float>(y, x) = static_cast<float>(cam.fy * ny.at<double>(y, x) + cy);
    }
  std::lock_guard<std::mutex> lock(mu);
  return cache.emplace(key, std::move(plan)).first->second;
}

// Renders at `ss` times the resolution then averages ss x ss blocks. The high-resolution
// principal point is ss * c + (ss - 1) / 2 so that pixel centres line up exactly.
cv::Matx33d Supersampled(const cv::Matx33d& k, int ss) {
  return cv::Matx33d(k(0, 0) * ss, 0, k(0, 2) * ss + (ss - 1) / 2.0, 0, k(1, 1) * ss,
                     k(1, 2) * ss + (ss - 1) / 2.0, 0, 0, 1);
}

}  // namespace

cv::Mat TownScene::Render(const CameraPose& pose, const CameraModel& camera, const Appearance& look,
                          int variant, const RenderOptions& options) const {
  const int ss = std::max(1, options.supersample);
  cv::Matx33d k = camera.K();
  cv::Size size(camera.width_px, camera.height_px);
  std::shared_ptr<const DistortionPlan> plan;
  if (camera.HasDistortion()) {
    plan = PlanFor(camera);
    k = plan->canvas_k;
    size = plan->canvas_size;
  }
  cv::Mat img = RenderPinhole(pose, Supersampled(k, ss), size * ss, ss, look, variant, options);
  if (!plan) return img;
  cv::Mat out;
  cv::remap(img, out, plan->map_x, plan->map_y, cv::INTER_LINEAR, cv::BORDER_REPLICATE);
  return out;
}

}  // namespace sightfix::demo
