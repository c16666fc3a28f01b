// Structure from a survey on synthetic views generated with cv::projectPoints (the reference
// implementation of the pinhole model): a street with two facades, a camera every 2 m.
// Checks: exact triangulation without noise; with 0.5 px keypoint noise and exact poses, the
// points' covariances are consistent (NEES of 3 dof: mean about 3, and about 95 % under 7.815,
// the chi-square 3 dof 95 % point of the NIST/SEMATECH e-Handbook table 1.3.6.7.4); with
// survey poses perturbed by 2 cm / 0.05 deg (RTK-grade, common practice), bundle adjustment
// brings the camera centres closer to the truth than the priors were.
#include "indexer/builder/structure.h"

#include <gtest/gtest.h>

#include <opencv2/calib3d.hpp>
#include <random>

#include "indexer/base/rotation.h"

namespace sightfix {
namespace {

constexpr double kFocal = 500;
const cv::Matx33d kK(kFocal, 0, 320, 0, kFocal, 240, 0, 0, 1);

struct Scene {
  std::vector<cv::Vec3d> points;
  std::vector<cv::Mat> point_descriptors;  // 1 x 128, unit, non-negative
  std::vector<cv::Matx33d> enu_from_camera;
  std::vector<cv::Vec3d> centers;
  std::vector<LocalFeatures> features;
  std::vector<std::vector<int>> point_of_keypoint;  // per view
};

Scene MakeScene(double pixel_noise, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> u(0, 1);
  std::normal_distribution<double> n01;
  Scene s;
  for (int i = 0; i < 1500; ++i) {  // facades at x = -8 and x = +8, y in [0, 60], z in [0, 12]
    s.points.push_back({i % 2 ? 8.0 : -8.0, 60 * u(rng), 12 * u(rng)});
    cv::Mat d(1, 128, CV_32F);
    for (int k = 0; k < 128; ++k) d.at<float>(k) = static_cast<float>(u(rng) * u(rng));
    s.point_descriptors.push_back(d / cv::norm(d));
  }
  for (int v = 0; v < 15; ++v) {
    s.centers.push_back({1.5, 2.0 * v, 1.5});
    s.enu_from_camera.push_back(EnuFromCamera({0.0, 0.0, 0.0}));
    const cv::Matx33d r = s.enu_from_camera.back().t();
    cv::Vec3d rvec;
    cv::Rodrigues(r, rvec);
    const cv::Vec3d tvec = -(r * s.centers.back());
    std::vector<cv::Point2d> px;
    std::vector<cv::Point3d> obj(s.points.begin(), s.points.end());
    cv::projectPoints(obj, rvec, tvec, kK, cv::noArray(), px);
    LocalFeatures f;
    std::vector<int> pids;
    for (size_t i = 0; i < px.size(); ++i) {
      const cv::Vec3d pc = r * (s.points[i] - s.centers.back());
      if (pc[2] < 1 || px[i].x < 0 || px[i].x > 639 || px[i].y < 0 || px[i].y > 479) continue;
      const cv::Point2d p(px[i].x + pixel_noise * n01(rng), px[i].y + pixel_noise * n01(rng));
      f.keypoints.emplace_back(cv::Point2f(p), 3.0f);
      f.normalized.push_back({(p.x - 320) / kFocal, (p.y - 240) / kFocal});
      cv::Mat d = s.point_descriptors[i].clone();
      for (int k = 0; k < 128; ++k) d.at<float>(k) += static_cast<float>(0.01 * std::abs(n01(rng)));
      f.descriptors.push_back(cv::Mat(d / cv::norm(d)));
      pids.push_back(static_cast<int>(i));
    }
    s.features.push_back(std::move(f));
    s.point_of_keypoint.push_back(pids);
  }
  return s;
}

std::vector<SurveyView> Views(const Scene& s, double sigma_m, double sigma_deg, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> n01;
  std::vector<SurveyView> views;
  for (size_t v = 0; v < s.centers.size(); ++v) {
    SurveyView sv;
    const double a = sigma_deg * M_PI / 180;
    const cv::Vec3d w(a * n01(rng), a * n01(rng), a * n01(rng));
    cv::Matx33d dr;
    cv::Rodrigues(w, dr);
    sv.enu_from_camera = dr * s.enu_from_camera[v];
    sv.center_enu = s.centers[v] + sigma_m * cv::Vec3d(n01(rng), n01(rng), n01(rng));
    sv.sigma_h_m = sigma_m;
    sv.focal_px = kFocal;
    sv.features = &s.features[v];
    views.push_back(sv);
  }
  return views;
}

TEST(StructureTest, LinearTriangulationIsExactWithoutNoise) {
  const std::vector<cv::Vec3d> centers{{0, 0, 0}, {1, 0, 0}, {0, 2, 1}};
  const std::vector<cv::Matx33d> rot(3, EnuFromCamera({30.0, 5.0, 2.0}).t());
  const cv::Vec3d x(4, 12, 3);
  std::vector<cv::Point2d> obs;
  for (int i = 0; i < 3; ++i) {
    const cv::Vec3d p = rot[i] * (x - centers[i]);
    obs.push_back({p[0] / p[2], p[1] / p[2]});
  }
  EXPECT_LT(cv::norm(TriangulateLinear(rot, centers, obs) - x), 1e-9);
}

TEST(StructureTest, PointCovarianceIsConsistentWithExactPoses) {
  const Scene s = MakeScene(0.5, 1);
  StructureOptions o;
  o.pixel_sigma_px = 0.5;
  auto r = BuildStructure(Views(s, 0.0, 0.0, 2), o);  // sigma 0: poses exact and held fixed
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  ASSERT_GT(r->points.size(), 500u);
  double nees_sum = 0;
  int under = 0, wrong_track = 0;
  for (const StructurePoint& p : r->points) {
    const int truth = s.point_of_keypoint[p.observations[0].first][p.observations[0].second];
    for (auto [v, k] : p.observations) wrong_track += s.point_of_keypoint[v][k] != truth;
    const cv::Vec3d e = p.enu - s.points[truth];
    const double nees = (e.t() * p.covariance.inv() * e)(0);
    nees_sum += nees;
    under += nees <= 7.815;
  }
  const double n = static_cast<double>(r->points.size());
  std::printf("%zu points, %d tracks, mean NEES %.2f, %.1f %% under 7.815, %d wrong observations\n",
              r->points.size(), r->summary.tracks, nees_sum / n, 100 * under / n, wrong_track);
  EXPECT_EQ(wrong_track, 0);
  EXPECT_NEAR(nees_sum / n, 3.0, 1.0);
  EXPECT_NEAR(under / n, 0.95, 0.04);
}

TEST(StructureTest, BundleAdjustmentImprovesNoisySurveyPoses) {
  const Scene s = MakeScene(0.5, 3);
  const std::vector<SurveyView> views = Views(s, 0.02, 0.05, 4);
  StructureOptions o;
  o.pixel_sigma_px = 0.5;
  o.attitude_sigma_deg = 0.05;
  auto r = BuildStructure(views, o);
  ASSERT_TRUE(r.ok());
  // Only the relative geometry is observable from images: compare centres after removing the
  // mean offset, which the priors alone fix.
  cv::Vec3d mean_prior(0, 0, 0), mean_adjusted(0, 0, 0);
  const double nv = static_cast<double>(views.size());
  for (size_t v = 0; v < views.size(); ++v) {
    mean_prior += (views[v].center_enu - s.centers[v]) / nv;
    mean_adjusted += (r->center_enu[v] - s.centers[v]) / nv;
  }
  double prior_rms = 0, adjusted_rms = 0;
  for (size_t v = 0; v < views.size(); ++v) {
    prior_rms += std::pow(cv::norm(views[v].center_enu - s.centers[v] - mean_prior), 2) / nv;
    adjusted_rms += std::pow(cv::norm(r->center_enu[v] - s.centers[v] - mean_adjusted), 2) / nv;
  }
  prior_rms = std::sqrt(prior_rms), adjusted_rms = std::sqrt(adjusted_rms);
  std::printf(
      "relative centre error: priors %.4f m, adjusted %.4f m; reprojection rms %.2f -> "
      "%.2f px\n",
      prior_rms, adjusted_rms, r->summary.ba_initial_rms_px, r->summary.ba_final_rms_px);
  EXPECT_LT(adjusted_rms, 0.5 * prior_rms);
  EXPECT_LT(r->summary.ba_final_rms_px, r->summary.ba_initial_rms_px);
}

TEST(StructureTest, RejectsBadOptions) {
  StructureOptions o;
  o.min_triangulation_deg = 95;
  std::string error;
  EXPECT_FALSE(o.Validate(&error));
  EXPECT_NE(error.find("min_triangulation_deg"), std::string::npos);
  EXPECT_FALSE(BuildStructure({SurveyView{}}, StructureOptions{}).ok());  // no features
}

}  // namespace
}  // namespace sightfix
