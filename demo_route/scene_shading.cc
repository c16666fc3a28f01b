#include "demo_route/scene_shading.h"

#include <algorithm>
#include <cmath>

#include "demo_route/shading_math.h"
#include "demo_route/texture_sampling.h"

namespace sightfix::demo {
namespace {

// Colour of one sample: the surface `which` (a VisibilityBuffer id) seen along the normalized
// ray (mx, my, 1), filtered for the footprint of a pixel of focal length f_px.
class SampleShader {
 public:
  explicit SampleShader(const ShadingInputs& in)
      : in_(in),
        look_(*in.look),
        rt_(in.pose->camera_from_enu.t()),
        horizon_(look_.sky_horizon),
        zenith_(look_.sky_zenith),
        haze_(look_.haze) {}

  cv::Vec3f Shade(int which, double mx, double my, double f_px) const {
    const cv::Vec3d m(mx, my, 1.0);
    const cv::Vec3d wdir = rt_ * m;
    const double mn = std::sqrt(mx * mx + my * my + 1.0);
    if (which == kSkySample) return Sky(wdir, mn);
    double dist;
    const cv::Vec3f colour = which == kGroundSample
                                 ? Ground(wdir, mn, f_px, &dist)
                                 : Surface((*in_.rasters)[which], m, mn, f_px, &dist);
    return Lerp(colour, haze_, static_cast<float>(1.0 - std::exp(-dist / look_.haze_m)));
  }

 private:
  // wdir: the ray in ENU; mn: its length.
  cv::Vec3f Sky(const cv::Vec3d& wdir, double mn) const {
    const double e = std::max(0.0, wdir[2] / mn);
    cv::Vec3f colour = Lerp(horizon_, zenith_, static_cast<float>(std::sqrt(e)));
    if (e > 0.03) {
      const double px = wdir[0] / wdir[2] * 1.5, py = wdir[1] / wdir[2] * 1.5;
      const float c = Fbm(px, py, 0.0, 1.0, 2, in_.cloud_seed) + 0.2f;
      colour = Lerp(colour, cv::Vec3f(0.97f, 0.97f, 0.97f),
                    std::clamp(c, 0.0f, 1.0f) * float(look_.cloud) * 2);
    }
    return colour;
  }

  // The road plane under the ray, lit by the sky and by the sun's elevation; *dist in metres.
  cv::Vec3f Ground(const cv::Vec3d& wdir, double mn, double f_px, double* dist) const {
    const double lambda = -in_.pose->position[2] / std::min(wdir[2], -1e-9);
    *dist = lambda * mn;
    const cv::Vec3d p = in_.pose->position + lambda * wdir;
    const double cos_inc = std::abs(wdir[2]) / mn;
    const double fp = *dist / (f_px * std::sqrt(std::max(cos_inc, 1e-3)));
    double direct = std::max(0.0, look_.sun_dir[2]);
    if (in_.shadows && direct > 0) direct *= in_.shadows->Lit(p, kUp, 0.0);
    const double light = look_.ambient + look_.sun * direct;
    const cv::Vec3f albedo = in_.ground->Colour(p[0], p[1], fp);
    cv::Vec3f colour = albedo * static_cast<float>(light);
    if (in_.lamps || in_.headlights) colour += albedo.mul(NightLight(p, kUp));
    return colour;
  }

  // Street lamps' and headlights' light on a surface at p of normal n.
  cv::Vec3f NightLight(const cv::Vec3d& p, const cv::Vec3d& n) const {
    cv::Vec3f e(0, 0, 0);
    if (in_.lamps) e += in_.lamps->Irradiance(p, n, look_.lamp_intensity, look_.lamp_colour);
    if (in_.headlights) e += in_.headlights->Irradiance(p, n);
    return e;
  }

  // The quad's texture under the ray (camera frame m), lit by the sky and the sun; *dist in
  // metres. Outward normal in ENU is V x U; two-sided surfaces (alpha cut-outs) take |n . sun|.
  cv::Vec3f Surface(const QuadRaster& qr, const cv::Vec3d& m, double mn, double f_px,
                    double* dist) const {
    const Texture& tex = *qr.texture;
    const double nm = qr.n.dot(m);
    const double lambda = qr.h / nm;
    *dist = lambda * mn;
    const double uu = std::clamp((lambda * qr.au.dot(m) - qr.cu) / qr.nn, 0.0, 1.0);
    const double vv = std::clamp((lambda * qr.av.dot(m) - qr.cv) / qr.nn, 0.0, 1.0);
    const double fpn = std::sqrt(qr.nn);
    const double cos_inc = std::abs(nm) / (fpn * mn);
    const double fp_m = *dist / (f_px * std::sqrt(std::max(cos_inc, 1e-3)));
    const cv::Vec3f albedo = SampleTexture(tex, uu, vv, fp_m * tex.texels_per_m);
    const cv::Vec3d nw = qr.quad->v_axis.cross(qr.quad->u_axis) / fpn;
    const double ns = nw.dot(look_.sun_dir);
    double direct = tex.has_alpha ? std::abs(ns) : std::max(0.0, ns);
    const bool extra = in_.shadows || in_.lamps || in_.headlights || look_.window_glow > 0;
    if (!extra) {  // the clean world's path, unchanged
      const double light = qr.quad->brightness * (look_.ambient + look_.sun * direct);
      return albedo * static_cast<float>(light);
    }
    const cv::Vec3d p = in_.pose->position + rt_ * (lambda * m);
    // A cut-out is lit on whichever side faces the sun, and seen from the camera's side.
    const cv::Vec3d towards_sun = ns < 0 ? -nw : nw;
    if (in_.shadows && direct > 0) direct *= in_.shadows->Lit(p, towards_sun);
    const double light = qr.quad->brightness * (look_.ambient + look_.sun * direct);
    cv::Vec3f colour = albedo * static_cast<float>(light);
    if (in_.lamps || in_.headlights) {
      const cv::Vec3d to_camera = nw.dot(in_.pose->position - p) < 0 ? -nw : nw;
      colour += albedo.mul(NightLight(p, to_camera)) * static_cast<float>(qr.quad->brightness);
    }
    if (look_.window_glow > 0 && qr.quad->emission >= 0)
      colour +=
          SampleTexture(in_.textures->Get(qr.quad->emission), uu, vv, fp_m * tex.texels_per_m) *
          static_cast<float>(look_.window_glow);
    return colour;
  }

  static inline const cv::Vec3d kUp{0, 0, 1};
  const ShadingInputs& in_;
  const Appearance& look_;
  const cv::Matx33d rt_;  // ENU from camera
  const cv::Vec3f horizon_, zenith_, haze_;
};

// Whether the ss x ss block of samples at (x0, y0) all see the same surface as its first.
inline bool UniformBlock(const cv::Mat1i& id, int x0, int y0, int ss) {
  const int which = id(y0, x0);
  bool uniform = true;
  for (int j = 0; j < ss && uniform; ++j)
    for (int i = 0; i < ss && uniform; ++i) uniform = id(y0 + j, x0 + i) == which;
  return uniform;
}

}  // namespace

cv::Mat3f ShadeCanvas(const ShadingInputs& in, const VisibilityBuffer& vis, const cv::Matx33d& k,
                      int ss) {
  const SampleShader shader(in);
  const double fx = k(0, 0), fy = k(1, 1), cx = k(0, 2), cy = k(1, 2);
  const cv::Mat1i& id = vis.id;
  const int ow = id.cols / ss, oh = id.rows / ss;
  cv::Mat3f out(oh, ow);
  for (int oy = 0; oy < oh; ++oy) {
    for (int ox = 0; ox < ow; ++ox) {
      if (UniformBlock(id, ox * ss, oy * ss, ss)) {
        const double x = ox * ss + (ss - 1) / 2.0, y = oy * ss + (ss - 1) / 2.0;
        // Filtered for the sample footprint, as a sample of an edge block would be: measured to
        // keep the detail that four averaged samples keep (the output pixel's own footprint
        // blurs one mip level more and cost the town a tenth of its matches).
        out(oy, ox) = shader.Shade(id(oy * ss, ox * ss), (x - cx) / fx, (y - cy) / fy, fx);
        continue;
      }
      cv::Vec3f sum(0, 0, 0);
      for (int j = 0; j < ss; ++j)
        for (int i = 0; i < ss; ++i) {
          const int x = ox * ss + i, y = oy * ss + j;
          sum += shader.Shade(id(y, x), (x - cx) / fx, (y - cy) / fy, fx);
        }
      out(oy, ox) = sum / static_cast<float>(ss * ss);
    }
  }
  return out;
}

}  // namespace sightfix::demo
