// Structure from a survey on synthetic views generated with cv::projectPoints (the reference
// implementation of the pinhole model): a street with two facades, a camera every 2 m.
// Checks: exact triangulation without noise; with 0.5 px keypoint noise and exact poses, the
// points' covariances are consistent (NEES of 3 dof: mean about 3, and about 95 % under 7.815,
// the chi-square 3 dof 95 % point of the NIST/SEMATECH e-Handbook table 1.3.6.7.4); with
// survey poses perturbed by 2 cm / 0.05 deg (RTK-grade, common practice), bundle adjustment
// brings the camera centres closer to the truth than the priors were; with survey poses
// perturbed by 0.5 m (GNSS/INS grade), the adjusted map keeps the survey's frame and metric
// scale and its points land near the truth.
#include "indexer/builder/structure.h"

#include <gtest/gtest.h>

#include <algorithm>
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

// Figures of an adjustment against the priors it was given and the scene's truth.
struct PriorFit {
  cv::Vec3d mean_offset_from_priors_m;  // mean over views of (adjusted - prior) centre
  double max_axis_offset_sigmas = 0;    // largest |adjusted - prior| on one axis, in sigma
  double scale = 0;                     // spread of the adjusted centres / spread of the true ones
  double median_point_error_m = 0, p95_point_error_m = 0;
};

PriorFit FitToPriors(const Scene& s, const std::vector<SurveyView>& views,
                     const StructureResult& r) {
  PriorFit f;
  const size_t nv = views.size();
  cv::Vec3d mean_adjusted(0, 0, 0), mean_true(0, 0, 0);
  f.mean_offset_from_priors_m = cv::Vec3d(0, 0, 0);
  for (size_t v = 0; v < nv; ++v) {
    const cv::Vec3d d = r.center_enu[v] - views[v].center_enu;
    f.mean_offset_from_priors_m += d / static_cast<double>(nv);
    f.max_axis_offset_sigmas =
        std::max(f.max_axis_offset_sigmas, cv::norm(d, cv::NORM_INF) / views[v].sigma_h_m);
    mean_adjusted += r.center_enu[v] / static_cast<double>(nv);
    mean_true += s.centers[v] / static_cast<double>(nv);
  }
  double spread_adjusted = 0, spread_true = 0;
  for (size_t v = 0; v < nv; ++v) {
    spread_adjusted += std::pow(cv::norm(r.center_enu[v] - mean_adjusted), 2);
    spread_true += std::pow(cv::norm(s.centers[v] - mean_true), 2);
  }
  f.scale = std::sqrt(spread_adjusted / spread_true);
  std::vector<double> errors;
  for (const StructurePoint& p : r.points)
    errors.push_back(cv::norm(
        p.enu - s.points[s.point_of_keypoint[p.observations[0].first][p.observations[0].second]]));
  std::sort(errors.begin(), errors.end());
  if (!errors.empty()) {
    f.median_point_error_m = errors[errors.size() / 2];
    f.p95_point_error_m = errors[errors.size() * 95 / 100];
  }
  return f;
}

// Survey centres with independent 0.5 m noise per axis (GNSS/INS grade, common practice: a
// float or SBAS fix). The images fix only the relative geometry: a common shift or scaling of
// all centres and points leaves every reprojection as it was (the gauge freedom of bundle
// adjustment, Triggs et al., "Bundle Adjustment - A Modern Synthesis", 2000, section 9;
// rotation is held by the attitude priors). Only the survey priors fix the frame and the
// metric scale, so the adjusted map must stay in them.
TEST(StructureTest, NoisySurveyPriorsHoldTheFrameAndTheScale) {
  constexpr double kSigmaM = 0.5;
  const Scene s = MakeScene(0.5, 5);
  const std::vector<SurveyView> views = Views(s, kSigmaM, 0.05, 6);
  StructureOptions o;
  o.pixel_sigma_px = 0.5;
  o.attitude_sigma_deg = 0.05;
  // The gates sized for RTK poses (epipolar_px and max_reproj_px at 2 px) judge matches and
  // observations against these noisy priors and keep points metres off (measured: median
  // 1.19 m, 95th percentile 5.6 m on scene seed 9), so they are opened here: the adjustment
  // alone is under test.
  o.epipolar_px = 1000;
  o.max_reproj_px = 1000;
  auto r = BuildStructure(views, o);
  ASSERT_TRUE(r.ok()) << r.status().ToString();
  const PriorFit f = FitToPriors(s, views, *r);
  const cv::Vec3d m = f.mean_offset_from_priors_m;
  std::printf(
      "%zu points; mean offset from priors (%.4f %.4f %.4f) m, largest axis offset %.2f sigma, "
      "scale %.4f, point error median %.3f m, 95th percentile %.3f m\n",
      r->points.size(), m[0], m[1], m[2], f.max_axis_offset_sigmas, f.scale, f.median_point_error_m,
      f.p95_point_error_m);
  ASSERT_GT(r->points.size(), 500u);  // measured 1077 (scene seed 5), 1093 (seed 9)
  // With the priors' weight at zero the gauge drifts: measured on seed 5 a mean offset of
  // 0.30 m, 4.87 sigma on one axis, scale 1.123, point error median 3.35 m.
  // Frame: at the optimum the prior residuals sum to zero over the views (moving everything
  // changes no reprojection), so the mean offset is the solver's tolerance, well under the
  // 0.13 m standard error of the priors' mean (0.5 m / sqrt(15)). Measured 0.0031 m (seed 5),
  // 0.0011 m (seed 9); bound 0.02 m.
  EXPECT_LT(cv::norm(m), 0.02);
  // Each centre stays where its prior allows: 45 axes of N(0, sigma^2) pass 3.5 sigma all
  // together with probability about 98 % (two-sided normal tail 4.7e-4 per axis, NIST/SEMATECH
  // e-Handbook table 1.3.6.7.1). Measured 2.14 (seed 5), 2.45 (seed 9).
  EXPECT_LT(f.max_axis_offset_sigmas, 3.5);
  // Scale: the priors fix it to sigma / sqrt(sum |c - mean|^2) = 0.5 / sqrt(1120 m^2) = 1.5 %
  // (15 centres 2 m apart); 3 standard errors = 4.5 %. Measured 1.0091 (seed 5), 0.9975 (seed 9).
  EXPECT_NEAR(f.scale, 1.0, 0.045);
  // Points inherit the frame's error: 0.5 * sqrt(3 / 15) = 0.22 m of shift and 1.5 % of scale
  // at about 10 m range (0.15 m), plus their own 0.5 px noise. Measured median 0.217 m, 95th
  // percentile 0.491 m (seed 5); 0.296 m, 0.460 m (seed 9); bounds 0.75 m and 1.5 m (3 sigma).
  EXPECT_LT(f.median_point_error_m, 0.75);
  EXPECT_LT(f.p95_point_error_m, 1.5);
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
