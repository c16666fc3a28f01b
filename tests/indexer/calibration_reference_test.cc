// The camera model, its Jacobians and the intrinsics solver of self_calibration.h against
// OpenCV's own calibration, on OpenCV's sample chessboard images (Debian's opencv-doc ships
// left01-09 and left11-14.jpg: 13 views of a 9x6 inner-corner board).
// Same corners for both (cv::findChessboardCorners + cv::cornerSubPix), same model: one focal
// length (CALIB_FIX_ASPECT_RATIO at 1), principal point held at the image centre
// (CALIB_FIX_PRINCIPAL_POINT), k1 and k2 only (CALIB_ZERO_TANGENT_DIST | CALIB_FIX_K3).
// cv::calibrateCamera with its standard deviations (the overload Python calls
// calibrateCameraExtended) is the reference: our f, k1 and k2 must agree with it to within a
// tenth of its reported standard deviations (both minimise the same squared pixel error), and our
// standard deviations, scaled by the residuals' variance factor, must agree with its within 1 %
// once the two variance factors' degrees of freedom are aligned: ours divides the chi-square by
// residuals minus parameters (2 per corner; common practice of least squares), OpenCV 4.6 by
// corners minus parameters (read from its results: every ratio is the same, sqrt(621 / 1323) for
// 702 corners and 81 parameters, so it is the divisor alone). This checks the model and the solver,
// not self-calibration, which self_calibration_test and the demo world check.
#include <gtest/gtest.h>

#include <opencv2/calib3d.hpp>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>
#include <string>
#include <vector>

#include "indexer/builder/self_calibration.h"

namespace sightfix {
namespace {

const char kData[] = "/usr/share/doc/opencv-doc/examples/data/";
const cv::Size kBoard(9, 6);

struct Corners {
  cv::Size image_size;
  std::vector<std::vector<cv::Point3f>> object;
  std::vector<std::vector<cv::Point2f>> image;
};

Corners FindCorners() {
  Corners c;
  std::vector<cv::Point3f> board;
  for (int y = 0; y < kBoard.height; ++y)
    for (int x = 0; x < kBoard.width; ++x) board.emplace_back(x, y, 0);  // one square = 1 unit
  for (int i = 1; i <= 14; ++i) {
    char name[32];
    std::snprintf(name, sizeof(name), "left%02d.jpg", i);
    const cv::Mat img = cv::imread(std::string(kData) + name, cv::IMREAD_GRAYSCALE);
    if (img.empty()) continue;  // left10 is not in the set
    std::vector<cv::Point2f> corners;
    if (!cv::findChessboardCorners(img, kBoard, corners)) continue;
    cv::cornerSubPix(img, corners, cv::Size(11, 11), cv::Size(-1, -1),
                     cv::TermCriteria(cv::TermCriteria::EPS + cv::TermCriteria::COUNT, 30, 1e-4));
    c.image_size = img.size();
    c.object.push_back(board);
    c.image.push_back(corners);
  }
  return c;
}

TEST(CalibrationReferenceTest, AgreesWithOpenCvCalibrateCamera) {
  const Corners c = FindCorners();
  ASSERT_GE(c.image.size(), 10u) << "opencv-doc's chessboard images (scripts/deps.sh installs it)";
  const double cx = (c.image_size.width - 1) / 2.0, cy = (c.image_size.height - 1) / 2.0;
  cv::Mat k = (cv::Mat_<double>(3, 3) << 500, 0, cx, 0, 500, cy, 0, 0, 1);
  cv::Mat dist = cv::Mat::zeros(1, 5, CV_64F);
  std::vector<cv::Mat> rvecs, tvecs;
  cv::Mat std_intrinsics, std_extrinsics, per_view;
  const int flags = cv::CALIB_USE_INTRINSIC_GUESS | cv::CALIB_FIX_ASPECT_RATIO |
                    cv::CALIB_FIX_PRINCIPAL_POINT | cv::CALIB_ZERO_TANGENT_DIST | cv::CALIB_FIX_K3;
  const double rms = cv::calibrateCamera(c.object, c.image, c.image_size, k, dist, rvecs, tvecs,
                                         std_intrinsics, std_extrinsics, per_view, flags);
  // Ours from the same start: f = 500, no distortion, each board pose from solvePnP under it.
  CalibrationProblem p;
  p.camera.width_px = c.image_size.width, p.camera.height_px = c.image_size.height;
  p.camera.fx = p.camera.fy = 500, p.camera.cx = cx, p.camera.cy = cy;
  p.prior.sigma = {kFreeParameter, kFreeParameter, kFreeParameter, 0, 0, 0};
  p.points_fixed = true;
  for (const cv::Point3f& x : c.object[0]) p.points.emplace_back(x.x, x.y, x.z);
  for (size_t v = 0; v < c.image.size(); ++v) {
    cv::Vec3d rvec, tvec;
    cv::solvePnP(c.object[v], c.image[v], cv::Mat(p.camera.K()), cv::noArray(), rvec, tvec);
    CalibrationView view;
    cv::Rodrigues(rvec, view.camera_from_world);
    view.center = -(view.camera_from_world.t() * tvec);
    view.center_sigma_m = view.attitude_sigma_rad = kFreeParameter;
    p.views.push_back(view);
    for (size_t i = 0; i < c.image[v].size(); ++i)
      p.observations.push_back({static_cast<int>(v), static_cast<int>(i), c.image[v][i]});
  }
  SelfCalibrationOptions o;
  o.max_iterations = 100;
  o.huber_px = 1e6;  // plain least squares, as OpenCV's
  Result<CalibrationEstimate> e = SolveCalibration(p, o);
  ASSERT_TRUE(e.ok()) << e.status().message();
  const double ours[3] = {e->refined.fx, e->refined.distortion[0], e->refined.distortion[1]};
  const double theirs[3] = {k.at<double>(0, 0), dist.at<double>(0), dist.at<double>(1)};
  // fx is tied to fy (CALIB_FIX_ASPECT_RATIO): OpenCV reports the focal length's sigma as fy's.
  const double their_sigma[3] = {std_intrinsics.at<double>(1), std_intrinsics.at<double>(4),
                                 std_intrinsics.at<double>(5)};
  std::printf("OpenCV rms %.4f px, ours %.4f px\n", rms, e->rms_after_px);
  const int corners = static_cast<int>(p.observations.size());
  const int parameters = 3 + 6 * static_cast<int>(p.views.size());
  for (int i = 0; i < 3; ++i) {
    SCOPED_TRACE(kCalibrationParameterNames[i]);
    const double our_sigma = e->posterior_sigma[i] * std::sqrt(e->variance_factor);
    const double opencv_dof_sigma =
        our_sigma * std::sqrt((2.0 * corners - parameters) / (1.0 * corners - parameters));
    std::printf("%s: ours %.6f +- %.6f, OpenCV %.6f +- %.6f\n", kCalibrationParameterNames[i],
                ours[i], our_sigma, theirs[i], their_sigma[i]);
    ASSERT_GT(their_sigma[i], 0);
    EXPECT_LT(std::fabs(ours[i] - theirs[i]), 0.1 * their_sigma[i]);
    EXPECT_NEAR(opencv_dof_sigma / their_sigma[i], 1.0, 0.01);
  }
  EXPECT_NEAR(e->rms_after_px, rms, 0.01 * rms);
}

}  // namespace
}  // namespace sightfix
