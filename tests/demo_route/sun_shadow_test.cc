// Cast shadows against trigonometry (common practice): a vertical box of height h on flat ground
// with the sun at elevation e casts a shadow reaching h / tan(e) beyond the box's top edge, in
// the direction opposite the sun's azimuth. The box is added to a town's scene (TownScene::
// AddQuad) far from its buildings and rendered by the renderer itself, from straight above, with
// and without shadows; the shadow is the ground the sun no longer reaches, measured back on the
// ground through the camera.
#include "demo_route/sun_shadow.h"

#include <gtest/gtest.h>

#include <cmath>

#include "demo_route/sun_light.h"
#include "demo_route/town_renderer.h"

namespace sightfix::demo {
namespace {

constexpr double kCameraHeightM = 40, kFocalPx = 500;  // 0.08 m of ground per pixel
const cv::Vec2d kBoxCentre(4000, 4000);                // far from every building of the town
constexpr double kBoxHalfM = 0.5, kBoxHeightM = 6;

// A 1 m square white box of kBoxHeightM with a top, at kBoxCentre.
void AddBox(TownScene* scene) {
  const int white = scene->AddTexture(cv::Mat(8, 8, CV_8UC3, cv::Scalar::all(230)), 8);
  const double x0 = kBoxCentre[0] - kBoxHalfM, y0 = kBoxCentre[1] - kBoxHalfM, w = 2 * kBoxHalfM;
  const cv::Vec3d c[4] = {{x0, y0, 0}, {x0 + w, y0, 0}, {x0 + w, y0 + w, 0}, {x0, y0 + w, 0}};
  for (int e = 0; e < 4; ++e) {  // outward normal v x u: walls from their top edge down
    const cv::Vec3d a = c[e], b = c[(e + 1) % 4];
    scene->AddQuad(MakeQuad(a + cv::Vec3d(0, 0, kBoxHeightM), b - a, {0, 0, -kBoxHeightM}, white));
  }
  scene->AddQuad(MakeQuad(c[3] + cv::Vec3d(0, 0, kBoxHeightM), c[0] - c[3], c[2] - c[3], white));
}

CameraModel DownCamera() {
  CameraModel cam;
  cam.width_px = 640, cam.height_px = 480;
  cam.fx = cam.fy = kFocalPx, cam.cx = 319.5, cam.cy = 239.5;
  return cam;
}

// Looking straight down over the box: image x east, image y south.
CameraPose DownPose() {
  return {{kBoxCentre[0], kBoxCentre[1], kCameraHeightM}, cv::Matx33d(1, 0, 0, 0, -1, 0, 0, 0, -1)};
}

struct ShadowExtent {
  double along_m = 0;      // farthest shadowed ground point beyond the box centre, along d
  double bearing_deg = 0;  // of the shadow's centroid from the box centre, clockwise from north
  int pixels = 0;
};

// Ground pixels under 3/4 as bright with shadows as without, mapped back to the ground: shadow
// keeps ambient / (ambient + sun sin e) of the light, 0.40-0.50 for the suns below, so 3/4 sits
// halfway between shadow and sun (the shadow's edge, as PCF blurs it).
ShadowExtent MeasureShadow(const cv::Mat& with, const cv::Mat& without, const cv::Vec2d& d) {
  ShadowExtent s;
  cv::Vec2d sum(0, 0);
  const double m_per_px = kCameraHeightM / kFocalPx;
  for (int y = 0; y < with.rows; ++y)
    for (int x = 0; x < with.cols; ++x) {
      const cv::Vec3f a = with.at<cv::Vec3f>(y, x), b = without.at<cv::Vec3f>(y, x);
      const double bright = b[0] + b[1] + b[2], dim = a[0] + a[1] + a[2];
      if (bright <= 0 || dim > 0.75 * bright) continue;
      const cv::Vec2d g((x - 319.5) * m_per_px, -(y - 239.5) * m_per_px);  // from the centre
      s.along_m = std::max(s.along_m, g.dot(d));
      sum += g;
      ++s.pixels;
    }
  s.bearing_deg = std::fmod(std::atan2(sum[0], sum[1]) * 180 / M_PI + 360, 360);
  return s;
}

TEST(SunShadowTest, BoxShadowLengthIsHeightOverTanElevation) {
  TownOptions options;
  options.seed = 3, options.route_length_m = 120;
  const Town town = BuildTown(options);
  TownScene scene(town, std::vector<DriveWorld>(1));
  AddBox(&scene);
  for (const auto& [azimuth, elevation] :
       std::vector<std::pair<double, double>>{{135, 40}, {250, 30}, {20, 55}, {300, 25}}) {
    Appearance look;
    look.sun_dir = SunDirectionEnu(azimuth, elevation);
    look.sun = 0.7, look.ambient = 0.3, look.haze_m = 1e6;
    look.shadow_texel_m = 0.05, look.shadow_range_m = 40;
    RenderOptions r;
    r.supersample = 1;
    const cv::Mat without = scene.Render(DownPose(), DownCamera(), look, 0, r);
    look.cast_shadows = true;
    const cv::Mat with = scene.Render(DownPose(), DownCamera(), look, 0, r);
    // d: away from the sun, on the ground.
    const cv::Vec2d d(-look.sun_dir[0], -look.sun_dir[1]);
    const cv::Vec2d du = d / cv::norm(d);
    const double corner = kBoxHalfM * (std::abs(du[0]) + std::abs(du[1]));  // top's farthest corner
    const double want = corner + kBoxHeightM / std::tan(elevation * M_PI / 180);
    const ShadowExtent got = MeasureShadow(with, without, du);
    // Tolerance: a ground pixel (0.08 m) and a shadow-map texel (0.05 m: the texel quantises the
    // edge by up to half a texel, the half-texel dilation of occluders by as much again), plus
    // the 0.03 m bias along the ray (0.03 / tan e on the ground, 0.065 m at 25 degrees): 0.2 m.
    EXPECT_NEAR(got.along_m, want, 0.2) << azimuth << " " << elevation;
    EXPECT_NEAR(std::remainder(got.bearing_deg - (azimuth + 180), 360), 0, 2.0) << azimuth;
    EXPECT_GT(got.pixels, 500);
    std::printf("sun %5.1f / %4.1f deg: shadow reaches %.3f m (formula %.3f), bearing %.2f deg\n",
                azimuth, elevation, got.along_m, want, got.bearing_deg);
  }
}

}  // namespace
}  // namespace sightfix::demo
