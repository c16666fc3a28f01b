// The realistic world's camera models against outside formulas: motion blur length and the
// rolling shutter's row shift against the pinhole projection's optical flow (common practice:
// a point at depth Z moves by f v t / Z for a sideways velocity v over t, by f w t at the image
// centre for a turn at rate w, by r v t / (Z - v t) away from the focus of expansion when moving
// forward), measured on rendered markers; vignetting against the cos^4 law with the field angle
// from cv::undistortPoints; shot and read noise against the photon transfer relation
// variance = signal / F + (r / F)^2 (EMVA 1288's linear sensor model, common practice).
#include "demo_route/camera_motion.h"

#include <gtest/gtest.h>

#include <opencv2/calib3d.hpp>
#include <opencv2/imgproc.hpp>

#include "demo_route/camera_nuisances.h"
#include "demo_route/town_layout.h"
#include "demo_route/town_renderer.h"
#include "indexer/base/rotation.h"

namespace sightfix::demo {
namespace {

CameraModel TestCamera() {
  CameraModel c;
  c.width_px = 320, c.height_px = 240, c.fx = c.fy = 300, c.cx = 159.5, c.cy = 119.5;
  return c;
}

CameraModel FleetLikeCamera() {
  CameraModel c;
  c.width_px = 720, c.height_px = 540, c.fx = 445, c.fy = 447, c.cx = 362.4, c.cy = 268.1;
  c.distortion = {-0.22, 0.05, 4e-4, -3e-4, 0.0};
  return c;
}

const Town& TestTown() {
  static const Town town = [] {
    TownOptions o;
    o.route_length_m = 120;
    return BuildTown(o);
  }();
  return town;
}

// A black rectangle width_m x height_m facing the camera at depth_m on its optical axis, seen
// against a cloudless sky (the camera far south of the town, looking up), rendered with its
// inverse depth.
RenderedView RenderMarker(const CameraModel& camera, double width_m, double height_m,
                          double depth_m) {
  const Town& town = TestTown();
  TownScene scene(town, {VehiclesForVariant(town, 0)});
  const cv::Matx33d enu_from_cam = EnuFromCamera({3.0, 28.0, 0.0});
  const cv::Vec3d c(5, -400, 1.5);
  const cv::Vec3d right = enu_from_cam * cv::Vec3d(1, 0, 0),
                  down = enu_from_cam * cv::Vec3d(0, 1, 0),
                  forward = enu_from_cam * cv::Vec3d(0, 0, 1);
  const int black = scene.AddTexture(cv::Mat(8, 8, CV_8UC3, cv::Scalar(0, 0, 0)), 80);
  const cv::Vec3d centre = c + depth_m * forward;
  scene.AddQuad(MakeQuad(centre - 0.5 * width_m * right - 0.5 * height_m * down, width_m * right,
                         height_m * down, black));
  Appearance look;
  look.cloud = 0;
  RenderOptions options;
  options.inverse_depth = true;
  return scene.RenderView({c, enu_from_cam.t()}, camera, look, 0, options);
}

// Darkness against the sky of each pixel of rows [y0, y1] within half_width of column cx: the
// row's sky level (the mean of the window's three outermost columns each side) minus the grey
// value, at least 0.
cv::Mat1d Darkness(const cv::Mat& linear, double cx, int y0, int y1, int half_width, int* x0) {
  cv::Mat grey;
  cv::cvtColor(linear, grey, cv::COLOR_BGR2GRAY);
  *x0 = static_cast<int>(std::round(cx)) - half_width;
  cv::Mat1d out(y1 - y0 + 1, 2 * half_width + 1);
  for (int y = y0; y <= y1; ++y) {
    double sky = 0;
    for (int k = 0; k < 3; ++k)
      sky += grey.at<float>(y, *x0 + k) + grey.at<float>(y, *x0 + 2 * half_width - k);
    sky /= 6;
    for (int x = 0; x < out.cols; ++x)
      out(y - y0, x) = std::max(0.0, sky - grey.at<float>(y, *x0 + x));
  }
  return out;
}

// Horizontal mean and variance (pixels) of the darkness of rows [y0, y1].
void HorizontalMoments(const cv::Mat1d& dark, int x0, double* mean, double* variance) {
  double s = 0, sx = 0, sxx = 0;
  for (int y = 0; y < dark.rows; ++y)
    for (int x = 0; x < dark.cols; ++x) {
      const double w = dark(y, x), px = x0 + x;
      s += w, sx += w * px, sxx += w * px * px;
    }
  *mean = sx / s;
  *variance = sxx / s - *mean * *mean;
}

// The smear length of the marker: a box blur of length L adds L^2 / 12 to the horizontal
// variance (the variance of a uniform distribution), so L = sqrt(12 (var_blurred - var_sharp)).
double SmearLength(const RenderedView& view, const CameraModel& camera, const CameraMotion& motion,
                   double exposure_s, double* centroid_shift) {
  const cv::Mat blurred =
      ApplyCameraMotion(view.image, view.inverse_depth, camera, motion, exposure_s, 0.0);
  const int y0 = static_cast<int>(camera.cy) - 10, y1 = static_cast<int>(camera.cy) + 10;
  int x0 = 0;
  double m0, v0, m1, v1;
  const cv::Mat1d sharp_dark = Darkness(view.image, camera.cx, y0, y1, 40, &x0);
  HorizontalMoments(sharp_dark, x0, &m0, &v0);
  const cv::Mat1d blurred_dark = Darkness(blurred, camera.cx, y0, y1, 40, &x0);
  HorizontalMoments(blurred_dark, x0, &m1, &v1);
  *centroid_shift = m1 - m0;
  return std::sqrt(12 * (v1 - v0));
}

// Tolerance of a smear length: each of the blur's samples is bilinear, which adds up to 1/4 px^2
// to the variance (a linear interpolation at sub-pixel offset d spreads by d (1 - d) <= 1/4):
// sqrt(L^2 + 3) - L is 0.12 px at L = 12; 0.25 px, a quarter of a pixel, covers it.
constexpr double kSmearTolerancePx = 0.25;

// Sideways at 10 m/s for 20 ms: f v t / Z = 12 px at 5 m, 6 px at 10 m (markers 12 px wide).
TEST(CameraMotionTest, SidewaysBlurIsFocalTimesTravelOverDepth) {
  const CameraModel camera = TestCamera();
  CameraMotion motion;
  motion.velocity_mps = {10, 0, 0};
  const double t = 0.02;
  for (double z : {5.0, 10.0}) {
    const RenderedView view = RenderMarker(camera, 0.04 * z, 0.04 * z, z);
    EXPECT_NEAR(view.inverse_depth.at<float>(int(camera.cy), int(camera.cx)), 1 / z, 1e-6);
    double shift = 0;
    const double length = SmearLength(view, camera, motion, t, &shift);
    const double expected = camera.fx * 10 * t / z;  // pinhole flow, common practice
    std::printf("Z %.0f m: smear %.3f px (f v t / Z = %.3f), centroid moved %.3f px\n", z, length,
                expected, shift);
    EXPECT_NEAR(length, expected, kSmearTolerancePx) << z;
    EXPECT_NEAR(shift, 0, 0.05) << "the exposure is centred on the frame's time";
  }
}

// A turn at 2 rad/s about the camera's vertical axis for 20 ms: f w t = 12 px at the centre
// (exactly 2 f tan(w t / 2), 12.002 px), whatever the depth.
TEST(CameraMotionTest, YawBlurIsFocalTimesAngle) {
  const CameraModel camera = TestCamera();
  CameraMotion motion;
  motion.angular_velocity_rad_s = {0, 2, 0};
  const double t = 0.02;
  const RenderedView view = RenderMarker(camera, 0.2, 0.2, 5.0);
  double shift = 0;
  const double length = SmearLength(view, camera, motion, t, &shift);
  std::printf("yaw: smear %.3f px (f w t = %.3f)\n", length, camera.fx * 2 * t);
  EXPECT_NEAR(length, camera.fx * 2 * t, kSmearTolerancePx);
  EXPECT_NEAR(shift, 0, 0.05);
}

// A tall bar, sideways at 10 m/s, rows read out over 30 ms, no exposure blur: row y is seen at
// tau_y = R (y / (H - 1) - 1/2), so the bar's centroid in that row moves by -f v tau_y / Z
// (pinhole flow). A linear interpolation keeps a centroid exactly, so within 0.05 px.
TEST(CameraMotionTest, RollingShutterShiftsEachRowByItsTime) {
  const CameraModel camera = TestCamera();
  const double z = 5, v = 10, readout = 0.03;
  const RenderedView view = RenderMarker(camera, 0.1, 1.6, z);
  CameraMotion motion;
  motion.velocity_mps = {v, 0, 0};
  const cv::Mat sheared =
      ApplyCameraMotion(view.image, view.inverse_depth, camera, motion, 0.0, readout);
  double worst = 0;
  for (int y = int(camera.cy) - 44; y <= int(camera.cy) + 44; y += 4) {
    int x0 = 0;
    double m0, v0, m1, v1;
    const cv::Mat1d sharp_dark = Darkness(view.image, camera.cx, y, y, 20, &x0);
    HorizontalMoments(sharp_dark, x0, &m0, &v0);
    const cv::Mat1d sheared_dark = Darkness(sheared, camera.cx, y, y, 20, &x0);
    HorizontalMoments(sheared_dark, x0, &m1, &v1);
    const double tau = readout * (double(y) / (camera.height_px - 1) - 0.5);
    const double expected = -camera.fx * v * tau / z;
    worst = std::max(worst, std::abs(m1 - m0 - expected));
    EXPECT_NEAR(m1 - m0, expected, 0.05) << "row " << y;
  }
  std::printf("rolling shutter: worst row shift error %.4f px\n", worst);
}

// Forward motion: a point at depth Z seen r pixels from the focus of expansion (the principal
// point, moving along the optical axis) moves radially by r v tau / (Z - v tau) (the pinhole
// projection x = X / Z before and after), about r v tau / Z.
TEST(CameraMotionTest, ForwardFlowIsRadialFromTheFocusOfExpansion) {
  const CameraModel camera = TestCamera();
  CameraMotion motion;
  motion.velocity_mps = {0, 0, 9};
  const double z = 8, tau = 0.004;
  const cv::Point2d r(100, -50);
  cv::Point2d d;
  ASSERT_TRUE(
      ImageDisplacement(camera, motion, {camera.cx + r.x, camera.cy + r.y}, 1 / z, tau, &d));
  const double scale = 9 * tau / (z - 9 * tau);
  EXPECT_NEAR(d.x, r.x * scale, 1e-9);
  EXPECT_NEAR(d.y, r.y * scale, 1e-9);
  EXPECT_NEAR(cv::norm(d), cv::norm(r) * 9 * tau / z, 0.005 * cv::norm(d));
}

// A point 1 m ahead at the image's edge, the camera moving 0.999 m forward: the moved point lies
// almost in the camera's plane and projects some 640 000 px away (x / z = 0.64 / 0.001). Its
// displacement is cut to the image's diagonal, direction kept, and blurring an image holding
// such a pixel finishes (uncut, the blur's reach asked for a 694 GB structuring element).
TEST(CameraMotionTest, APointGrazingTheCameraPlaneMovesAtMostTheDiagonal) {
  const CameraModel camera = TestCamera();
  CameraMotion motion;
  motion.velocity_mps = {0, 0, 99.9};
  const double diagonal = std::hypot(camera.width_px, camera.height_px);
  const cv::Point2d edge(camera.width_px - 1, camera.cy);
  cv::Point2d d;
  ASSERT_TRUE(ImageDisplacement(camera, motion, edge, 1.0, 0.01, &d));
  EXPECT_NEAR(cv::norm(d), diagonal, 1e-6 * diagonal);
  EXPECT_GT(d.x, 0);  // outward, away from the focus of expansion
  EXPECT_NEAR(d.y, 0, 1e-6);
  cv::Mat image(camera.height_px, camera.width_px, CV_32FC3, cv::Scalar::all(0.5));
  cv::Mat inverse_depth(camera.height_px, camera.width_px, CV_32F, cv::Scalar(0.05f));
  inverse_depth.at<float>(static_cast<int>(edge.y), static_cast<int>(edge.x)) = 1.0f;
  const cv::Mat out = ApplyCameraMotion(image, inverse_depth, camera, motion, 0.02, 0.0);
  EXPECT_EQ(out.size(), image.size());
}

// The drive's motion in the camera frame: heading north at 9 m/s, turning right (heading up by
// 10 degrees in 0.1 s): the camera moves forward, and a point straight ahead moves left by
// f w tau (w = 1.745 rad/s).
TEST(CameraMotionTest, DriveMotionTurnsTheRightWay) {
  Frame before, after;
  before.time_s = 0, after.time_s = 0.1;
  before.position = {0, 0, 1.5}, after.position = {0, 0.9, 1.5};
  before.attitude = {0, 0, 0}, after.attitude = {10, 0, 0};
  const CameraMotion m = MotionBetween(before, after, {0, 0, 0});
  EXPECT_NEAR(m.velocity_mps[2], 9, 1e-9);
  EXPECT_NEAR(cv::norm(m.velocity_mps), 9, 1e-9);
  const CameraModel camera = TestCamera();
  cv::Point2d d;
  ASSERT_TRUE(ImageDisplacement(camera, m, {camera.cx, camera.cy}, 0.0, 0.01, &d));
  const double w = 10 * M_PI / 180 / 0.1;
  EXPECT_NEAR(d.x, -camera.fx * std::tan(w * 0.01), 1e-9);
  EXPECT_NEAR(d.y, 0, 1e-9);
}

// cos^4 falloff at the image's corner: theta from the pixel's ray, the ray from
// cv::undistortPoints (iterated to 1e-12) on the distorted camera.
TEST(CameraMotionTest, VignettingFollowsCosFourthAtTheCorner) {
  for (const CameraModel& camera : {TestCamera(), FleetLikeCamera()}) {
    const double s = 0.6;
    cv::Mat img(camera.height_px, camera.width_px, CV_32FC3, cv::Scalar::all(0.5));
    ApplyVignetting(camera, s, &img);
    std::vector<cv::Point2d> corner{{0, 0}}, ray;
    cv::undistortPoints(
        corner, ray, cv::Mat(camera.K()),
        cv::Mat(1, 5, CV_64F, const_cast<double*>(camera.distortion.data())), cv::noArray(),
        cv::noArray(),
        cv::TermCriteria(cv::TermCriteria::COUNT + cv::TermCriteria::EPS, 200, 1e-14));
    const double theta = std::atan(std::hypot(ray[0].x, ray[0].y));
    const double expected = 1 - s * (1 - std::pow(std::cos(theta), 4));
    const double got = img.at<cv::Vec3f>(0, 0)[1] / 0.5;
    std::printf("corner at %.1f deg: %.5f of the centre (model %.5f)\n", theta * 180 / M_PI, got,
                expected);
    EXPECT_NEAR(got, expected, 1e-4);
    EXPECT_NEAR(img.at<cv::Vec3f>(int(camera.cy), int(camera.cx))[0], 0.5, 0.5 * s * 1e-4);
  }
}

// Photon transfer: on flat patches the noise variance is signal / F + (r / F)^2, F electrons at
// full scale and r electrons of read noise. 120 000 values a patch: the sample variance's
// standard error is sqrt(2 / n) = 0.41 %, so 1.5 % is 3.6 standard errors.
TEST(CameraMotionTest, SensorNoiseFollowsPhotonTransfer) {
  const double full = 2000, read = 4;
  for (uint64_t seed : {77, 78})
    for (double level : {0.05, 0.2, 0.5, 0.8}) {
      cv::Mat img(200, 200, CV_32FC3, cv::Scalar::all(level));
      AddSensorNoise(full, read, seed, &img);
      cv::Scalar mean, sd;
      cv::meanStdDev(img.reshape(1), mean, sd);
      const double expected = level / full + (read / full) * (read / full);
      std::printf("seed %d level %.2f: variance / model %.4f, mean - level %+.2g\n", int(seed),
                  level, sd[0] * sd[0] / expected, mean[0] - level);
      EXPECT_NEAR(sd[0] * sd[0] / expected, 1.0, 0.015) << level;
      EXPECT_NEAR(mean[0], level, 4 * std::sqrt(expected / 120000)) << level;
    }
  cv::Mat a(20, 20, CV_32FC3, cv::Scalar::all(0.3)), b = a.clone(), c = a.clone();
  AddSensorNoise(full, read, 5, &a);
  AddSensorNoise(full, read, 5, &b);
  AddSensorNoise(full, read, 6, &c);
  EXPECT_EQ(cv::norm(a, b, cv::NORM_INF), 0) << "same seed, same noise";
  EXPECT_GT(cv::norm(a, c, cv::NORM_INF), 0);
}

// The realistic preset's camera ranges pass; a bad one is refused by name; the clean preset has
// no camera nuisances.
TEST(CameraMotionTest, CameraRangesAreValidated) {
  WorldNuisances n = NuisancesForWorld(World::kRealistic);
  EXPECT_TRUE(n.camera.enabled);
  EXPECT_TRUE(n.Validate().ok()) << n.Validate().ToString();
  EXPECT_FALSE(NuisancesForWorld(World::kClean).camera.enabled);
  const auto refused = [](WorldNuisances bad, const char* field) {
    const Status s = bad.Validate();
    EXPECT_FALSE(s.ok()) << field;
    EXPECT_NE(s.ToString().find(field), std::string::npos) << s.ToString();
  };
  WorldNuisances bad = n;
  bad.camera.readout_ms = {30, 10};
  refused(bad, "camera.readout_ms");
  bad = n;
  bad.camera.vignetting_strength = {0.5, 1.5};
  refused(bad, "camera.vignetting_strength");
  bad = n;
  bad.camera.global_shutter_share = 1.2;
  refused(bad, "camera.global_shutter_share");
  bad = n;
  bad.camera.query_jpeg_quality = {60, 101};
  refused(bad, "jpeg_quality");
  bad = n;
  bad.camera.dusk.full_scale_electrons = {0, 100};
  refused(bad, "camera.dusk.full_scale_electrons");
}

}  // namespace
}  // namespace sightfix::demo
