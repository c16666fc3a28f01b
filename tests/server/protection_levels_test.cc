// Protection levels by solution separation (protection_levels.h) and the pose solver's subset
// solutions (absolute_pose.h PoseSubset), checked against outside references:
//  - the quantiles against scipy 1.10 (Debian bookworm python3-scipy): norm.isf(p / 2) and
//    sqrt(chi2.isf(p, 2));
//  - fault-free levels against Monte Carlo draws of the Gaussian they assume;
//  - each linearised subset solution against OpenCV's own Levenberg-Marquardt
//    (cv::solvePnPRefineLM) re-run on the subset's correspondences;
//  - the separations' stated covariance against their spread over seeded trials (mean
//    Mahalanobis square about 3 for 3 dof, common practice);
//  - a bias planted in one reference's correspondences is detected, and only that one.
#include "server/engine/protection_levels.h"

#include <gtest/gtest.h>

#include <opencv2/calib3d.hpp>
#include <random>

#include "indexer/base/rotation.h"
#include "server/engine/absolute_pose.h"

namespace sightfix {
namespace {

TEST(ProtectionLevelsTest, QuantilesMatchScipy) {
  // scipy.stats.norm.isf(p / 2) and chi2.isf(p, 2) ** 0.5, scipy 1.10.
  EXPECT_NEAR(TwoSidedNormalQuantile(0.05), 1.9599639845400545, 1e-9);
  EXPECT_NEAR(TwoSidedNormalQuantile(1e-3), 3.2905267314918945, 1e-9);
  EXPECT_NEAR(TwoSidedNormalQuantile(1.25e-3), 3.2272184259631564, 1e-9);
  EXPECT_NEAR(TwoSidedNormalQuantile(1e-7), 5.326723886384496, 1e-9);
  EXPECT_NEAR(RayleighMultiplier(0.05), 2.4477468306808166, 1e-9);
  EXPECT_NEAR(RayleighMultiplier(1e-3), 3.7169221888498383, 1e-9);
  EXPECT_NEAR(RayleighMultiplier(1e-7), 5.67769242755511, 1e-9);
}

TEST(ProtectionLevelsTest, ParametersAreValidated) {
  std::string e;
  ProtectionParameters p;
  EXPECT_TRUE(p.Validate(&e));
  p.integrity_risk = 0;
  EXPECT_FALSE(p.Validate(&e));
  EXPECT_NE(e.find("integrity_risk"), std::string::npos);
  p = {};
  p.overbound_scale = 0.5;
  EXPECT_FALSE(p.Validate(&e));
  EXPECT_NE(e.find("overbound_scale"), std::string::npos);
}

// Without fault hypotheses the levels are the Gaussian's own quantiles: lateral and
// longitudinal exceeded at exactly the risk, horizontal at most at it.
TEST(ProtectionLevelsTest, FaultFreeLevelsHoldTheirRisk) {
  const cv::Matx22d cov(0.09, 0.03, 0.03, 0.04);
  const double heading = 30;
  ProtectionParameters p;
  p.integrity_risk = 0.01;
  const ProtectionLevels pl = ComputeProtectionLevels(cov, heading, {}, p);
  const double a = std::sqrt(cov(0, 0)), b = cov(0, 1) / a, c = std::sqrt(cov(1, 1) - b * b);
  std::mt19937_64 rng(11);
  std::normal_distribution<double> n01;
  const double h = heading * M_PI / 180;
  const cv::Vec2d along(std::sin(h), std::cos(h)), across(std::cos(h), -std::sin(h));
  const int n = 400000;
  int lat = 0, lon = 0, hor = 0;
  for (int i = 0; i < n; ++i) {
    const double z1 = n01(rng), z2 = n01(rng);
    const cv::Vec2d e(a * z1, b * z1 + c * z2);
    lat += std::fabs(e.dot(across)) > pl.lateral_m;
    lon += std::fabs(e.dot(along)) > pl.longitudinal_m;
    hor += cv::norm(e) > pl.horizontal_m;
  }
  // Binomial sd at 0.01 over 400 000 draws: 1.6e-4; 5 sd either side.
  EXPECT_NEAR(double(lat) / n, 0.01, 8e-4);
  EXPECT_NEAR(double(lon) / n, 0.01, 8e-4);
  EXPECT_LE(double(hor) / n, 0.01 + 8e-4);
  EXPECT_GT(double(hor) / n, 0.002);  // a bound, but not a wildly loose one
  EXPECT_FALSE(pl.fault_detected);
}

struct Scene {
  std::vector<PointCorrespondence> points;
  std::vector<int> groups;
  cv::Matx33d camera_from_world;
  cv::Vec3d center;
};

// 180 points 5-30 m ahead in a 640x480 view of a 500 px camera, three "references" (i % 3),
// noise_px of keypoint noise; group 0's map points displaced bias_m east (a reference whose
// survey pose was off: its points are, the query's view of them is not).
Scene MakeScene(uint64_t seed, double noise_px, double bias_m) {
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> u(0, 1);
  std::normal_distribution<double> n01;
  Scene s;
  s.center = {2 * u(rng), 3 * u(rng), 1.5};
  s.camera_from_world = EnuFromCamera({20 * u(rng), 2 * u(rng) - 1, 0.0}).t();
  const double f = 500;
  while (s.points.size() < 180) {
    const cv::Vec3d pc(u(rng) * 20 - 10, u(rng) * 12 - 8, 5 + 25 * u(rng));
    if (std::fabs(pc[0] / pc[2]) > 0.6 || std::fabs(pc[1] / pc[2]) > 0.45) continue;
    const int group = static_cast<int>(s.points.size() % 3);
    const cv::Point2d obs(pc[0] / pc[2] + noise_px * n01(rng) / f,
                          pc[1] / pc[2] + noise_px * n01(rng) / f);
    const cv::Vec3d world =
        s.camera_from_world.t() * pc + s.center + cv::Vec3d(group == 0 ? bias_m : 0.0, 0, 0);
    s.points.push_back({world, cv::Matx33d::zeros(), obs});
    s.groups.push_back(group);
  }
  return s;
}

AbsolutePoseOptions SceneOptions(const Scene& s) {
  AbsolutePoseOptions o;
  o.focal_px = 500;
  o.groups = s.groups;
  return o;
}

// OpenCV's LM on the all-in inliers less the subset's (none: sub null), from the all-in pose.
cv::Vec3d ResolvedCenter(const Scene& s, const AbsolutePose& pose, const PoseSubset* sub) {
  std::vector<cv::Point3d> obj;
  std::vector<cv::Point2d> img;
  for (size_t i = 0; i < s.points.size(); ++i) {
    if (!pose.inlier_mask[i]) continue;
    const cv::Point2d& q = s.points[i].normalized;
    const bool in_group =
        sub && (sub->kind == PoseSubset::Kind::kGroup ? s.groups[i] == sub->index
                                                      : (q.x >= 0) + 2 * (q.y >= 0) == sub->index);
    if (in_group) continue;
    const cv::Vec3d w = s.points[i].world - pose.center;  // conditioned about the centre
    obj.emplace_back(w[0], w[1], w[2]);
    img.push_back(q);
  }
  cv::Mat rvec, tvec = cv::Mat::zeros(3, 1, CV_64F);
  cv::Rodrigues(cv::Mat(pose.camera_from_world), rvec);
  cv::solvePnPRefineLM(
      obj, img, cv::Matx33d::eye(), cv::noArray(), rvec, tvec,
      cv::TermCriteria(cv::TermCriteria::COUNT + cv::TermCriteria::EPS, 100, 1e-12));
  cv::Matx33d r;
  cv::Rodrigues(rvec, r);
  return pose.center -
         r.t() * cv::Vec3d(tvec.at<double>(0), tvec.at<double>(1), tvec.at<double>(2));
}

TEST(PoseSubsetTest, SubsetSolutionsMatchOpenCvOnTheSubset) {
  for (uint64_t seed : {1, 2, 3}) {
    const Scene s = MakeScene(seed, 1.0, 0);
    Result<AbsolutePose> pose = EstimateAbsolutePose(s.points, SceneOptions(s));
    ASSERT_TRUE(pose.ok()) << pose.status().ToString();
    ASSERT_EQ(pose->subsets.size(), 7u);  // three references, four quadrants
    const cv::Vec3d all_in = ResolvedCenter(s, *pose, nullptr);
    for (const PoseSubset& sub : pose->subsets) {
      const cv::Vec3d expected = ResolvedCenter(s, *pose, &sub) - all_in;
      const double sigma = std::sqrt(cv::trace(sub.shift_covariance));
      EXPECT_LT(cv::norm(sub.center_shift - expected), std::max(0.002, 0.05 * sigma))
          << "seed " << seed << " subset " << int(sub.kind) << "/" << sub.index << ": shift "
          << sub.center_shift << " vs OpenCV " << expected;
    }
  }
}

// The query camera (640x480, 500 px, no distortion), for the refinement with intrinsics.
CameraModel Camera() {
  CameraModel c;
  c.width_px = 640, c.height_px = 480;
  c.fx = c.fy = 500, c.cx = 320, c.cy = 240;
  return c;
}

class SeparationSpread : public ::testing::TestWithParam<bool> {};

// Both refinements: the pose alone, and the pose with the query's focal length and k1.
TEST_P(SeparationSpread, CovarianceMatchesItsSpread) {
  double sum = 0;
  int n = 0;
  for (uint64_t seed = 100; seed < 300; ++seed) {
    const Scene s = MakeScene(seed, 1.0, 0);
    AbsolutePoseOptions o = SceneOptions(s);
    if (GetParam()) o.camera = Camera();
    Result<AbsolutePose> pose = EstimateAbsolutePose(s.points, o);
    ASSERT_TRUE(pose.ok());
    for (const PoseSubset& sub : pose->subsets) {
      sum +=
          (sub.center_shift.t() * sub.shift_covariance.inv(cv::DECOMP_SVD) * sub.center_shift)(0);
      ++n;
    }
  }
  // Mean of a chi-square with 3 dof: 3 (the variance factor's own spread adds a little).
  EXPECT_NEAR(sum / n, 3.0, 0.6) << n << " separations";
}
INSTANTIATE_TEST_SUITE_P(Refinements, SeparationSpread, ::testing::Bool());

std::vector<SeparatedSolution> Horizontal(const AbsolutePose& pose) {
  std::vector<SeparatedSolution> out;
  for (const PoseSubset& sub : pose.subsets) {
    SeparatedSolution g;
    g.name = (sub.kind == PoseSubset::Kind::kGroup ? "reference " : "quadrant ") +
             std::to_string(sub.index);
    g.shift_en = {sub.center_shift[0], sub.center_shift[1]};
    g.shift_covariance = sub.shift_covariance.get_minor<2, 2>(0, 0);
    g.covariance = sub.center_covariance.get_minor<2, 2>(0, 0);
    out.push_back(g);
  }
  return out;
}

TEST(PoseSubsetTest, BiasInOneReferenceIsDetected) {
  int detected_clean = 0, detected_biased = 0, blamed_right = 0;
  const int trials = 20;
  for (uint64_t seed = 500; seed < 500 + trials; ++seed) {
    for (double bias : {0.0, 0.15}) {
      const Scene s = MakeScene(seed, 0.5, bias);
      Result<AbsolutePose> pose = EstimateAbsolutePose(s.points, SceneOptions(s));
      ASSERT_TRUE(pose.ok());
      const cv::Matx22d cov = pose->center_covariance.get_minor<2, 2>(0, 0);
      const ProtectionLevels pl = ComputeProtectionLevels(cov, 0, Horizontal(*pose), {});
      if (bias == 0) {
        detected_clean += pl.fault_detected;
      } else {
        detected_biased += pl.fault_detected;
        blamed_right += pl.fault.rfind("reference 0:", 0) == 0;
      }
    }
  }
  // A third of the points 0.15 m off (those near the camera then fail the 3 px gate, the far
  // ones stay in) pull the fix by one to two centimetres, several times the separation's sigma
  // (a shift every inlier shared could not be seen: it would move the fix whole).
  EXPECT_EQ(detected_clean, 0);
  EXPECT_EQ(detected_biased, trials);
  EXPECT_EQ(blamed_right, trials);
}

TEST(PoseSubsetTest, GroupsAreValidatedAndCanBeSwitchedOff) {
  Scene s = MakeScene(9, 1.0, 0);
  AbsolutePoseOptions o = SceneOptions(s);
  o.groups.pop_back();
  EXPECT_EQ(EstimateAbsolutePose(s.points, o).status().code(), StatusCode::kInvalidArgument);
  o = SceneOptions(s);
  o.groups[0] = -2;
  EXPECT_EQ(EstimateAbsolutePose(s.points, o).status().code(), StatusCode::kInvalidArgument);
  o = SceneOptions(s);
  o.separate_solutions = false;
  Result<AbsolutePose> pose = EstimateAbsolutePose(s.points, o);
  ASSERT_TRUE(pose.ok());
  EXPECT_TRUE(pose->subsets.empty());
  // A group holding all but 5 inliers cannot be left out (min_subset_inliers 10): skipped, not
  // tested.
  o = SceneOptions(s);
  for (size_t i = 0; i < o.groups.size(); ++i) o.groups[i] = i < 175 ? 0 : 1;
  pose = EstimateAbsolutePose(s.points, o);
  ASSERT_TRUE(pose.ok());
  EXPECT_GE(pose->subsets_skipped, 1);
}

// A fault hypothesis is tested whenever the rest still gives a well-posed step, even with
// fewer inliers than an all-in pose needs (min_inliers 25): a fix of few inliers must not
// escape its fault terms because its groups are all too large to leave out. The rest's
// solution is weaker, and its sigma says so.
TEST(PoseSubsetTest, AGroupLeavingFewerThanMinInliersIsStillTested) {
  const Scene s = MakeScene(9, 1.0, 0);
  AbsolutePoseOptions o = SceneOptions(s);
  for (size_t i = 0; i < o.groups.size(); ++i) o.groups[i] = i < 165 ? 0 : 1;  // rest: 15
  const Result<AbsolutePose> pose = EstimateAbsolutePose(s.points, o);
  ASSERT_TRUE(pose.ok()) << pose.status().ToString();
  const PoseSubset* without_big = nullptr;
  const PoseSubset* without_small = nullptr;
  for (const PoseSubset& sub : pose->subsets)
    if (sub.kind == PoseSubset::Kind::kGroup) (sub.index == 0 ? without_big : without_small) = &sub;
  ASSERT_NE(without_big, nullptr) << "the group leaving 15 inliers was skipped";
  ASSERT_NE(without_small, nullptr);
  EXPECT_LT(pose->inliers - without_big->left_out, o.min_inliers);
  EXPECT_GT(cv::trace(without_big->center_covariance),
            4 * cv::trace(without_small->center_covariance));
  EXPECT_EQ(pose->subsets_skipped, 0);
}

}  // namespace
}  // namespace sightfix
