// The Gaussian overbound fit (client/eval/overbound.h) on samples drawn from known
// distributions: a Gaussian of sigma s is overbounded at about s (no less: the bound must hold,
// a little more: the Clopper-Pearson band of 2 000 samples); a sample with a heavy tail needs
// the scale its tail sets, worked by hand below; the fit never shrinks the stated sigma. The
// fault screen (a fix one group pulled off) and the fit's floor from such fixes' protection
// levels, worked by hand.
#include "client/eval/overbound.h"

#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <random>

#include "client/eval/overbound_record.h"

namespace sightfix {
namespace {

std::vector<double> Gaussian(double sigma, int n, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> d(0, sigma);
  std::vector<double> z(n);
  for (double& v : z) v = d(rng);
  return z;
}

TEST(OverboundTest, GaussianSamplesAreBoundedNearTheirSigma) {
  for (uint64_t seed : {1, 2, 3}) {
    Result<OverboundFit> wide = FitOverbound(Gaussian(1.3, 2000, seed));
    ASSERT_TRUE(wide.ok());
    EXPECT_GE(wide->scale, 1.3 * 0.97) << seed;  // sampling noise on the order of a few %
    EXPECT_LE(wide->scale, 1.3 * 1.3) << seed;
    EXPECT_EQ(wide->samples, 2000);
  }
}

TEST(OverboundTest, NeverBelowOne) {
  Result<OverboundFit> narrow = FitOverbound(Gaussian(0.5, 2000, 4));
  ASSERT_TRUE(narrow.ok());
  EXPECT_EQ(narrow->scale, 1);
  EXPECT_EQ(narrow->binding_z, 0);
}

// 95 % N(0, 1) and 5 % N(0, 4^2): at x = 6 the tail is 0.05 x 2Q(1.5) = 0.0067 (2Q(1.5) = 0.1336,
// common practice), and 2Q(6 / K) >= 0.0067 needs 6 / K <= 2.71 (norm.isf(0.0067 / 2), from
// memory): K >= 2.2, where a Gaussian fit of the core would say about 1.
TEST(OverboundTest, HeavyTailSetsTheScale) {
  std::mt19937_64 rng(5);
  std::normal_distribution<double> core(0, 1), tail(0, 4);
  std::uniform_real_distribution<double> u(0, 1);
  std::vector<double> z(4000);
  for (double& v : z) v = u(rng) < 0.05 ? tail(rng) : core(rng);
  Result<OverboundFit> fit = FitOverbound(z);
  ASSERT_TRUE(fit.ok());
  EXPECT_GE(fit->scale, 2.0);
  EXPECT_GT(fit->binding_z, 3);  // set in the tail, not the core
}

TEST(OverboundTest, BadInputIsRefused) {
  EXPECT_EQ(FitOverbound({}).status().code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(FitOverbound({1.0, std::nan("")}).status().code(), StatusCode::kInvalidArgument);
  EXPECT_EQ(FitOverbound({1.0}, 1.0).status().code(), StatusCode::kInvalidArgument);
}

// NormaliseErrors worked by hand: a fix heading east (90 deg) with covariance diag(east 0.04,
// north 0.01) has sigma 0.2 m along (east) and 0.1 m across (north); an error of +0.1 m along
// and -0.3 m across gives z = 0.5 and -3. A fix 12 m off is a wrong place (excluded, counted);
// coarse fixes and failed calls are not read.
TEST(OverboundTest, NormalisedErrorsAcrossAndAlongTheTruthsHeading) {
  QueryResult good;
  good.ran = true;
  good.fix.quality = FixQuality::kRefined;
  good.fix.covariance_en = cv::Matx22d(0.04, 0, 0, 0.01);
  good.truth.attitude.heading_deg = 90;
  good.along_track_m = 0.1, good.cross_track_m = -0.3;
  good.error_m = std::hypot(0.1, 0.3);
  QueryResult wrong = good;
  wrong.error_m = 12;
  QueryResult coarse = good;
  coarse.fix.quality = FixQuality::kCoarse;
  QueryResult failed = good;
  failed.error = "deadline exceeded";
  const NormalisedErrors e = NormaliseErrors({good, wrong, coarse, failed});
  EXPECT_EQ(e.fixes, 2);
  EXPECT_EQ(e.excluded, 1);
  ASSERT_EQ(e.z.size(), 2u);
  EXPECT_NEAR(e.z[0], 0.5, 1e-12);
  EXPECT_NEAR(e.z[1], -3, 1e-12);
  // North-bound: along is north (sigma 0.1), across is east (sigma 0.2).
  good.truth.attitude.heading_deg = 0;
  const NormalisedErrors n = NormaliseErrors({good});
  ASSERT_EQ(n.z.size(), 2u);
  EXPECT_NEAR(n.z[0], 1, 1e-12);
  EXPECT_NEAR(n.z[1], -1.5, 1e-12);
  EXPECT_EQ(NormaliseErrors({wrong}, 15).excluded, 0);  // the threshold is the caller's
}

// A refined fix heading east with sigma 0.1 m on both axes, 0.05 m ahead of the truth and 0.5 m
// to its right (z along 0.5, across 5: beyond the screen's 3), protection levels as given at
// scale 1. East is along; right of east is south: the error east/north is (0.05, -0.5).
QueryResult PulledOff(double lateral_pl_m) {
  QueryResult q;
  q.ran = true;
  q.truth.image = "images/000068.jpg";
  q.fix.quality = FixQuality::kRefined;
  q.fix.covariance_en = cv::Matx22d(0.01, 0, 0, 0.01);
  q.truth.attitude.heading_deg = 90;
  q.along_track_m = 0.05, q.cross_track_m = 0.5;
  q.error_m = std::hypot(0.05, 0.5);
  FixIntegrity& f = q.fix.integrity;
  f.horizontal_pl_m = 2.0, f.lateral_pl_m = lateral_pl_m, f.longitudinal_pl_m = 1.5;
  return q;
}

// Without reference 2 the solution lies 0.45 m north of the fix: its error (0.05, -0.05) over
// that subset's sigma 0.2 m is z 0.25 on both axes, within the screen: the fix is that group's
// fault, not a sample. Its levels hold it from K = max(0.5025 / 2.0, 0.5 / 1.0, 0.05 / 1.5) =
// 0.5, so it asks for no scale above 1; with a lateral level of 0.25 m it asks for K = 2, the
// same when the levels were computed at scale 2 (0.5 m there).
TEST(OverboundTest, AFixOneGroupPulledOffIsLeftToTheGroupTerms) {
  QueryResult q = PulledOff(1.0);
  q.fix.integrity.separations.push_back(
      {"reference 2", {0, 0.45}, cv::Matx22d::eye(), cv::Matx22d(0.04, 0, 0, 0.04)});
  NormalisedErrors e = NormaliseErrors({q});
  EXPECT_EQ(e.fixes, 1);
  EXPECT_EQ(e.faults, 1);
  EXPECT_TRUE(e.z.empty());
  EXPECT_EQ(e.fault_scale, 1);
  EXPECT_EQ(e.fault_scale_image, "");
  q.fix.integrity.lateral_pl_m = 0.25;
  e = NormaliseErrors({q});
  EXPECT_NEAR(e.fault_scale, 2, 1e-12);
  EXPECT_EQ(e.fault_scale_image, "images/000068.jpg");
  q.fix.integrity.lateral_pl_m = 0.5, q.fix.integrity.overbound_scale = 2;
  EXPECT_NEAR(NormaliseErrors({q}).fault_scale, 2, 1e-12);
}

// A fix no single group explains stays a sample of the fault-free model: without the only group
// its error (0.05, -0.4) over sigma 0.1 is still z 4 across; with no groups, or no protection
// level to hold it, the same.
TEST(OverboundTest, AFixNoGroupExplainsStaysASample) {
  QueryResult q = PulledOff(1.0);
  q.fix.integrity.separations.push_back(
      {"quadrant upper-left", {0, 0.1}, cv::Matx22d::eye(), cv::Matx22d(0.01, 0, 0, 0.01)});
  QueryResult bare = PulledOff(1.0);
  QueryResult unprotected = PulledOff(0);
  unprotected.fix.integrity.separations.push_back(
      {"reference 2", {0, 0.45}, cv::Matx22d::eye(), cv::Matx22d(0.04, 0, 0, 0.04)});
  for (const QueryResult& r : {q, bare, unprotected}) {
    const NormalisedErrors e = NormaliseErrors({r});
    EXPECT_EQ(e.faults, 0);
    ASSERT_EQ(e.z.size(), 2u);
    EXPECT_NEAR(e.z[0], 0.5, 1e-12);
    EXPECT_NEAR(e.z[1], 5, 1e-12);
  }
}

// The drive's fit: 30 fixes with |z| 1 on both axes (K 1: 2Q(1) = 0.32 lies above every tail's
// bound once the upper half starts at |z| = 1) and the fix above. Screened as one group's fault,
// it leaves K to its levels: 2 (lateral level 0.25 m) and no binding |z|. Unscreened (no groups),
// its |z| = 5 is 1 sample in 62, whose 95 % Clopper-Pearson upper share 0.0742 (scipy
// beta.ppf(0.95, 2, 61)) puts 5 at 1.785 sigma (norm.isf(0.0742 / 2)): K = 5 / 1.785 = 2.80.
TEST(OverboundTest, TheDriveFitLeavesOutGroupFaultsButNotBelowTheirLevels) {
  const std::string dir = ::testing::TempDir() + "/overbound_fit_drive";
  std::filesystem::create_directories(dir);
  std::ofstream(dir + "/drive.csv") << "image,timestamp\n";
  std::vector<QueryResult> results;
  for (int k = 0; k < 30; ++k) {
    QueryResult good = PulledOff(1.0);
    good.along_track_m = 0.1 * (k % 2 ? 1 : -1), good.cross_track_m = 0.1;
    good.error_m = std::hypot(0.1, 0.1);
    results.push_back(good);
  }
  QueryResult fault = PulledOff(0.25);
  fault.fix.integrity.separations.push_back(
      {"reference 2", {0, 0.45}, cv::Matx22d::eye(), cv::Matx22d(0.04, 0, 0, 0.04)});
  results.push_back(fault);
  Result<DriveOverbound> fit = FitDriveOverbound(results, dir, DriveOverboundOptions{});
  ASSERT_TRUE(fit.ok()) << fit.status().ToString();
  EXPECT_NEAR(fit->fit.overbound_scale, 2, 1e-9);
  EXPECT_EQ(fit->fit.binding_z, 0);
  EXPECT_EQ(fit->fit.faults, 1);
  EXPECT_EQ(fit->fit.fixes, 30);
  results.back().fix.integrity.separations.clear();
  fit = FitDriveOverbound(results, dir, DriveOverboundOptions{});
  ASSERT_TRUE(fit.ok());
  EXPECT_EQ(fit->fit.faults, 0);
  EXPECT_EQ(fit->fit.fixes, 31);
  EXPECT_NEAR(fit->fit.binding_z, 5, 1e-12);
  EXPECT_GT(fit->fit.overbound_scale, 2.6);
  EXPECT_LT(fit->fit.overbound_scale, 3.0);
}

}  // namespace
}  // namespace sightfix
