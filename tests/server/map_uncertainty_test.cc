// The map camera's term (map_uncertainty.h) against the error it claims to bound: a survey drives
// straight ahead past points 8-40 m away with a camera whose focal length is off by s, its map
// is triangulated through that focal length (linear least squares over six frames, as the
// forward-motion geometry of a street survey), and a query with the right focal length solves
// its pose against that map (cv::solvePnPRansac and Levenberg-Marquardt, absolute_pose.h). The
// fix's error along the line of sight comes out as the term predicts, s Z_w within a fifth (Z_w
// the depth as the pose solve weighs the points), for either sign of s and at two query positions;
// s times the median depth would overstate it twice (measured: 0.12 m against 0.235 m at s = 1 %),
// the points' depths weighted 1 / Z^2 alone by a third.
#include "server/engine/map_uncertainty.h"

#include <gtest/gtest.h>

#include <random>

namespace sightfix {
namespace {

constexpr double kFocal = 500, kCx = 320, kCy = 240;

// Pixel of world point w seen from centre c, camera axes = world axes (z forward).
cv::Point2d Pixel(const cv::Vec3d& w, const cv::Vec3d& c) {
  const cv::Vec3d d = w - c;
  return {kFocal * d[0] / d[2] + kCx, kFocal * d[1] / d[2] + kCy};
}

struct Outcome {
  cv::Vec3d error;  // fix minus truth, metres
  double predicted_sigma_m = 0;
};

// Survey frames every 2 m along z up to z = 0, map focal kFocal (1 + s); a query at `query`.
Outcome SurveyAndQuery(double s, const cv::Vec3d& query, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> u(0, 1);
  std::vector<cv::Vec3d> survey;
  for (int k = 0; k < 6; ++k) survey.emplace_back(0, 0, -2.0 * k);
  const double f_map = kFocal * (1 + s);
  std::vector<PointCorrespondence> pts;
  std::vector<cv::Vec3d> in_camera;  // camera axes = world axes
  while (pts.size() < 200) {
    const cv::Vec3d w(u(rng) * 16 - 8, u(rng) * 5 - 3, 8 + 32 * u(rng));
    // Triangulated through f_map: x_n (Z - c_z) = X - c_x, y_n (Z - c_z) = Y - c_y per frame.
    cv::Mat a(12, 3, CV_64F, cv::Scalar(0)), b(12, 1, CV_64F);
    for (int k = 0; k < 6; ++k) {
      const cv::Point2d p = Pixel(w, survey[k]);
      const double xn = (p.x - kCx) / f_map, yn = (p.y - kCy) / f_map;
      a.at<double>(2 * k, 0) = 1, a.at<double>(2 * k, 2) = -xn;
      b.at<double>(2 * k) = survey[k][0] - xn * survey[k][2];
      a.at<double>(2 * k + 1, 1) = 1, a.at<double>(2 * k + 1, 2) = -yn;
      b.at<double>(2 * k + 1) = survey[k][1] - yn * survey[k][2];
    }
    cv::Mat x;
    cv::solve(a, b, x, cv::DECOMP_SVD);
    const cv::Vec3d mapped(x.at<double>(0), x.at<double>(1), x.at<double>(2));
    const cv::Point2d q = Pixel(w, query);
    if (std::fabs(q.x - kCx) > 300 || std::fabs(q.y - kCy) > 220) continue;
    pts.push_back({mapped, cv::Matx33d::eye() * 1e-6,
                   cv::Point2d((q.x - kCx) / kFocal, (q.y - kCy) / kFocal)});
    in_camera.push_back(w - query);
  }
  AbsolutePoseOptions o;
  o.focal_px = kFocal;
  Result<AbsolutePose> pose = EstimateAbsolutePose(pts, o);
  EXPECT_TRUE(pose.ok()) << pose.status().ToString();
  Outcome out;
  if (pose.ok()) out.error = pose->center - query;
  out.predicted_sigma_m = std::sqrt(FocalBiasVariance(std::fabs(s), in_camera));
  return out;
}

TEST(MapUncertaintyTest, FocalErrorOfTheMapMovesTheFixBySZ) {
  for (double s : {0.01, -0.01, 0.005})
    for (const cv::Vec3d& query : {cv::Vec3d(0, 0, 1), cv::Vec3d(1.5, 0.3, 3)}) {
      const Outcome r = SurveyAndQuery(s, query, 7);
      const double along = std::fabs(r.error[2]), across = std::hypot(r.error[0], r.error[1]);
      std::printf(
          "s %+.3f, query (%.1f, %.1f, %.1f): error along %.3f m, across %.3f m; "
          "predicted sigma %.3f m\n",
          s, query[0], query[1], query[2], along, across, r.predicted_sigma_m);
      EXPECT_NEAR(along / r.predicted_sigma_m, 1.0, 0.2) << s;
      EXPECT_LT(across, 0.5 * along) << s;
    }
}

TEST(MapUncertaintyTest, NoFocalErrorNoTerm) {
  const std::vector<cv::Vec3d> three = {{1, 0, 10}, {0, 2, 20}, {-3, 0, 30}};
  EXPECT_EQ(FocalBiasVariance(0.0, three), 0.0);
  EXPECT_EQ(FocalBiasVariance(0.01, {}), 0.0);
  EXPECT_EQ(FocalBiasVariance(0.01, {{0, 0, 10}}), 0.0);  // on the axis: no pull on the distance
  // Z_w = (1/1000 + 4/8000 + 9/27000) / (1/10000 + 4/160000 + 9/810000) = 13.47 m.
  const double zw = (1e-3 + 4.0 / 8000 + 9.0 / 27000) / (1e-4 + 4.0 / 160000 + 9.0 / 810000);
  EXPECT_NEAR(FocalBiasVariance(0.01, three), std::pow(0.01 * zw, 2), 1e-12);
  const Outcome exact = SurveyAndQuery(0.0, cv::Vec3d(0, 0, 1), 3);
  EXPECT_LT(cv::norm(exact.error), 1e-6);
}

}  // namespace
}  // namespace sightfix
