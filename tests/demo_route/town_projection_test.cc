// The renderer puts a world point where the reference implementation, cv::projectPoints,
// puts it: within 0.5 px, for an ideal pinhole and for a camera with strong lens distortion.
#include <gtest/gtest.h>

#include <opencv2/calib3d.hpp>
#include <opencv2/imgproc.hpp>

#include "demo_route/town_layout.h"
#include "demo_route/town_renderer.h"
#include "indexer/base/rotation.h"

namespace sightfix::demo {
namespace {

struct Marker {
  cv::Vec3d centre;
};

// Intensity-weighted centroid of the darkening in a window around `guess`.
cv::Point2d DarkCentroid(const cv::Mat& linear, cv::Point2d guess, int half) {
  cv::Mat grey;
  cv::cvtColor(linear, grey, cv::COLOR_BGR2GRAY);
  const cv::Rect win(int(guess.x) - half, int(guess.y) - half, 2 * half + 1, 2 * half + 1);
  const cv::Mat patch = grey(win & cv::Rect(0, 0, grey.cols, grey.rows));
  double bg = 0;
  cv::minMaxLoc(patch, nullptr, &bg);
  double sw = 0, sx = 0, sy = 0;
  for (int y = 0; y < patch.rows; ++y)
    for (int x = 0; x < patch.cols; ++x) {
      const double w = std::max(0.0, bg - patch.at<float>(y, x) - 0.05);
      sw += w, sx += w * (x + win.x), sy += w * (y + win.y);
    }
  return {sx / sw, sy / sw};
}

void CheckProjection(const CameraModel& camera) {
  TownOptions o;
  o.route_length_m = 120;
  const Town town = BuildTown(o);
  TownScene scene(town, {VehiclesForVariant(town, 0)});
  // A camera far south of the town looking north and up: sky behind every marker.
  const Attitude att{3.0, 28.0, 2.0};
  const cv::Vec3d c(5, -400, 1.5);
  const cv::Matx33d enu_from_cam = EnuFromCamera(att);
  const int black = scene.AddTexture(cv::Mat(8, 8, CV_8UC3, cv::Scalar(0, 0, 0)), 8 / 0.14);
  std::vector<cv::Point3d> world;
  // Markers on a grid of directions, 9 m from the camera, facing it (0.14 m squares).
  for (double ax : {-0.55, -0.25, 0.0, 0.3, 0.55}) {
    for (double ay : {-0.35, 0.0, 0.35}) {
      const cv::Vec3d dir_cam = cv::normalize(cv::Vec3d(ax, ay, 1.0));
      const cv::Vec3d centre = c + 9.0 * (enu_from_cam * dir_cam);
      const cv::Vec3d right = enu_from_cam * cv::Vec3d(1, 0, 0),
                      down = enu_from_cam * cv::Vec3d(0, 1, 0);
      scene.AddQuad(
          MakeQuad(centre - 0.07 * right - 0.07 * down, 0.14 * right, 0.14 * down, black));
      world.emplace_back(centre[0], centre[1], centre[2]);
    }
  }
  const cv::Matx33d r = enu_from_cam.t();
  const cv::Mat linear = scene.Render({c, r}, camera, Appearance{}, 0);
  // Reference: cv::projectPoints with rvec/tvec of the same pose.
  cv::Vec3d rvec;
  cv::Rodrigues(cv::Mat(r), rvec);
  const cv::Vec3d tvec = -(r * c);
  std::vector<cv::Point2d> ref;
  cv::projectPoints(world, rvec, tvec, cv::Mat(camera.K()),
                    cv::Mat(1, 5, CV_64F, const_cast<double*>(camera.distortion.data())), ref);
  double worst = 0;
  for (const cv::Point2d& p : ref) {
    ASSERT_TRUE(p.x > 10 && p.y > 10 && p.x < camera.width_px - 10 && p.y < camera.height_px - 10)
        << p;
    const cv::Point2d got = DarkCentroid(linear, p, 9);
    worst = std::max(worst, cv::norm(got - p));
    EXPECT_LT(cv::norm(got - p), 0.5) << "marker at " << p << " rendered at " << got;
  }
  std::printf("worst marker error %.3f px over %zu markers\n", worst, ref.size());
}

TEST(TownProjectionTest, PinholeMatchesProjectPoints) {
  CameraModel cam;
  cam.width_px = 640, cam.height_px = 480, cam.fx = cam.fy = 500, cam.cx = 319.5, cam.cy = 239.5;
  CheckProjection(cam);
}

TEST(TownProjectionTest, DistortedCameraMatchesProjectPoints) {
  CameraModel cam;
  cam.width_px = 720, cam.height_px = 540, cam.fx = 445, cam.fy = 447, cam.cx = 362.4,
  cam.cy = 268.1;
  cam.distortion = {-0.22, 0.05, 4e-4, -3e-4, 0.0};
  CheckProjection(cam);
}

}  // namespace
}  // namespace sightfix::demo
