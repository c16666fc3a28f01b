#include "indexer/map/camera_model.h"

#include <gtest/gtest.h>

#include <cstdio>
#include <opencv2/calib3d.hpp>
#include <random>

namespace sightfix {
namespace {

CameraModel Distorted() {
  CameraModel c;
  c.width_px = 720;
  c.height_px = 540;
  c.fx = 430;
  c.fy = 432;
  c.cx = 361.2;
  c.cy = 268.7;
  c.distortion = {-0.27, 0.08, 6e-4, -4e-4, -0.01};
  return c;
}

// Reference implementation: cv::projectPoints with the same intrinsics and coefficients.
TEST(CameraModelTest, ProjectMatchesOpenCvProjectPoints) {
  std::mt19937 rng(3);
  std::uniform_real_distribution<double> xy(-0.8, 0.8), z(1, 60);
  for (const CameraModel& cam :
       {CameraModel{640, 480, 500, 500, 319.5, 239.5, {}, LensModel::kPinhole, {}}, Distorted()}) {
    std::vector<cv::Point3d> pts;
    for (int i = 0; i < 400; ++i) {
      const double depth = z(rng);
      pts.emplace_back(xy(rng) * depth, xy(rng) * depth * 0.75, depth);
    }
    std::vector<cv::Point2d> ref;
    cv::projectPoints(pts, cv::Vec3d(0, 0, 0), cv::Vec3d(0, 0, 0), cv::Mat(cam.K()),
                      cv::Mat(1, 5, CV_64F, const_cast<double*>(cam.distortion.data())), ref);
    for (size_t i = 0; i < pts.size(); ++i) {
      const cv::Point2d p = cam.Project({pts[i].x, pts[i].y, pts[i].z});
      EXPECT_LT(cv::norm(p - ref[i]), 1e-9);
    }
  }
}

TEST(CameraModelTest, UndistortInvertsDistortAcrossTheImage) {
  const CameraModel cam = Distorted();
  for (int y = 0; y < cam.height_px; y += 27) {
    for (int x = 0; x < cam.width_px; x += 36) {
      const cv::Point2d n = cam.PixelToNormalized({double(x), double(y)});
      const cv::Point2d back = cam.Project({n.x, n.y, 1.0});
      EXPECT_LT(cv::norm(back - cv::Point2d(x, y)), 1e-7) << x << "," << y;
    }
  }
}

TEST(CameraModelTest, SaveLoadRoundTripAndValidation) {
  const std::string path = ::testing::TempDir() + "/cam_roundtrip.yml";
  const CameraModel cam = Distorted();
  ASSERT_TRUE(SaveCameraModel(cam, path).ok());
  Result<CameraModel> loaded = LoadCameraModel(path);
  ASSERT_TRUE(loaded.ok()) << loaded.status().ToString();
  EXPECT_EQ(loaded->width_px, 720);
  EXPECT_DOUBLE_EQ(loaded->fy, 432);
  EXPECT_DOUBLE_EQ(loaded->distortion[4], -0.01);
  EXPECT_EQ(LoadCameraModel("/nonexistent/cam.yml").status().code(), StatusCode::kNotFound);

  CameraModel bad = cam;
  bad.cx = 900;
  std::string error;
  EXPECT_FALSE(bad.IsValid(&error));
  EXPECT_NE(error.find("principal point"), std::string::npos);
}

// A file in the layout OpenCV's calibration sample writes (4 coefficients, column vector).
TEST(CameraModelTest, ReadsOpenCvCalibrationLayout) {
  const std::string path = ::testing::TempDir() + "/cam_opencv.yml";
  std::FILE* f = std::fopen(path.c_str(), "w");
  ASSERT_NE(f, nullptr);
  std::fputs(
      "%YAML:1.0\n---\nimage_width: 640\nimage_height: 480\ncamera_matrix: !!opencv-matrix\n"
      "   rows: 3\n   cols: 3\n   dt: d\n   data: [ 5.2e+02, 0., 3.2e+02, 0., 5.2e+02, 2.4e+02, "
      "0., "
      "0., 1. ]\ndistortion_coefficients: !!opencv-matrix\n   rows: 4\n   cols: 1\n   dt: d\n"
      "   data: [ -0.1, 0.01, 0., 0. ]\navg_reprojection_error: 0.3\n",
      f);
  std::fclose(f);
  Result<CameraModel> cam = LoadCameraModel(path);
  ASSERT_TRUE(cam.ok()) << cam.status().ToString();
  EXPECT_DOUBLE_EQ(cam->fx, 520);
  EXPECT_DOUBLE_EQ(cam->distortion[0], -0.1);
  EXPECT_DOUBLE_EQ(cam->distortion[4], 0.0);
  EXPECT_EQ(cam->uncertainty.focal_px, 0);  // not stated: the consumer's default applies
}

// The optional uncertainty keys: written only when stated, read back, and refused when negative.
TEST(CameraModelTest, CalibrationUncertaintyRoundTrip) {
  const std::string path = ::testing::TempDir() + "/cam_sigma.yml";
  CameraModel cam = Distorted();
  cam.uncertainty = {2.5, 0.004, 0.002, 0.3};
  ASSERT_TRUE(SaveCameraModel(cam, path).ok());
  Result<CameraModel> loaded = LoadCameraModel(path);
  ASSERT_TRUE(loaded.ok()) << loaded.status().ToString();
  EXPECT_DOUBLE_EQ(loaded->uncertainty.focal_px, 2.5);
  EXPECT_DOUBLE_EQ(loaded->uncertainty.k1, 0.004);
  EXPECT_DOUBLE_EQ(loaded->uncertainty.k2, 0.002);
  EXPECT_DOUBLE_EQ(loaded->uncertainty.boresight_deg, 0.3);
  std::FILE* f = std::fopen(path.c_str(), "a");
  ASSERT_NE(f, nullptr);
  std::fputs("k1_sigma_extra: 1\n", f);
  std::fclose(f);
  ASSERT_TRUE(LoadCameraModel(path).ok());  // unknown keys stay ignored, as OpenCV's own
  const std::string bad = ::testing::TempDir() + "/cam_sigma_bad.yml";
  cam.uncertainty.k1 = -1;  // SaveCameraModel leaves a negative out: write it by hand
  ASSERT_TRUE(SaveCameraModel(cam, bad).ok());
  f = std::fopen(bad.c_str(), "a");
  ASSERT_NE(f, nullptr);
  std::fputs("k1_sigma: -0.5\n", f);
  std::fclose(f);
  Result<CameraModel> refused = LoadCameraModel(bad);
  EXPECT_EQ(refused.status().code(), StatusCode::kInvalidArgument);
  EXPECT_NE(refused.status().message().find("k1_sigma"), std::string::npos);
}

// The optional rolling-shutter readout: written only when stated, read back in seconds, absent
// means 0 (a global shutter), and refused when negative or beyond 200 ms (a wrong unit).
TEST(CameraModelTest, RollingShutterReadoutRoundTrip) {
  const std::string path = ::testing::TempDir() + "/cam_readout.yml";
  CameraModel cam = Distorted();
  ASSERT_TRUE(SaveCameraModel(cam, path).ok());
  Result<CameraModel> global = LoadCameraModel(path);
  ASSERT_TRUE(global.ok()) << global.status().ToString();
  EXPECT_EQ(global->readout_s, 0);
  cam.readout_s = 0.0212;
  ASSERT_TRUE(SaveCameraModel(cam, path).ok());
  Result<CameraModel> loaded = LoadCameraModel(path);
  ASSERT_TRUE(loaded.ok()) << loaded.status().ToString();
  EXPECT_NEAR(loaded->readout_s, 0.0212, 1e-12);
  for (const char* bad : {"-1", "250", "fast"}) {
    SCOPED_TRACE(bad);
    cam.readout_s = 0;
    ASSERT_TRUE(SaveCameraModel(cam, path).ok());
    std::FILE* f = std::fopen(path.c_str(), "a");
    ASSERT_NE(f, nullptr);
    std::fprintf(f, "rolling_shutter_readout_ms: %s\n", bad);
    std::fclose(f);
    Result<CameraModel> refused = LoadCameraModel(path);
    EXPECT_EQ(refused.status().code(), StatusCode::kInvalidArgument);
    EXPECT_NE(refused.status().message().find("rolling_shutter_readout_ms"), std::string::npos)
        << refused.status().message();
  }
}

}  // namespace
}  // namespace sightfix
