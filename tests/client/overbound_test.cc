// The Gaussian overbound fit (client/eval/overbound.h) on samples drawn from known
// distributions: a Gaussian of sigma s is overbounded at about s (no less: the bound must hold,
// a little more: the Clopper-Pearson band of 2 000 samples); a sample with a heavy tail needs
// the scale its tail sets, worked by hand below; the fit never shrinks the stated sigma.
#include "client/eval/overbound.h"

#include <gtest/gtest.h>

#include <cmath>
#include <random>

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

}  // namespace
}  // namespace sightfix
