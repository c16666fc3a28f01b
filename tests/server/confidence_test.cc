// radius95 against published tables and a simulation.
#include "server/engine/confidence.h"

#include <gtest/gtest.h>

#include <cmath>
#include <random>

namespace sightfix {
namespace {

TEST(ConfidenceTest, RoundGaussianMatchesChiSquareTable) {
  // NIST/SEMATECH e-Handbook 1.3.6.7.4: chi-square 2 dof upper 5 % point 5.991, 1 % point 9.210.
  // For a round Gaussian |e|^2 / sigma^2 is chi-square with 2 dof.
  const cv::Matx22d c(4.0, 0, 0, 4.0);
  EXPECT_NEAR(Radius95(c), std::sqrt(5.991 * 4.0), 2e-3);
  EXPECT_NEAR(RadiusOfProbability(c, 0.99), std::sqrt(9.210 * 4.0), 2e-3);
}

TEST(ConfidenceTest, LineDegenerateGaussianIsTheNormalQuantile) {
  // NIST/SEMATECH e-Handbook 1.3.6.7.1: the normal 97.5 % point is 1.960, so P(|x| <= 1.96 s)
  // = 0.95 when all the variance lies on one axis.
  const cv::Matx22d c(9.0, 0, 0, 0.0);
  EXPECT_NEAR(Radius95(c), 1.960 * 3.0, 2e-3);
}

TEST(ConfidenceTest, ChiSquareBoundOverCoversAnElongatedEllipse) {
  // DESIGN.md 5.4: sqrt(5.991 * largest eigenvalue) holds 98.3 % at an axis ratio of 0.5.
  const cv::Matx22d c(1.0, 0, 0, 0.25);
  EXPECT_NEAR(CircleProbability(c, std::sqrt(5.991)), 0.983, 1e-3);
  EXPECT_LT(Radius95(c), std::sqrt(5.991));
}

TEST(ConfidenceTest, AgreesWithSimulation) {
  // A rotated, elongated covariance; the share of 200 000 seeded draws inside radius95.
  const double a = 0.6, l1 = 2.0, l2 = 0.3;
  const cv::Matx22d r(std::cos(a), -std::sin(a), std::sin(a), std::cos(a));
  const cv::Matx22d c = r * cv::Matx22d(l1, 0, 0, l2) * r.t();
  const double radius = Radius95(c);
  std::mt19937_64 rng(42);
  std::normal_distribution<double> n01;
  int inside = 0;
  const int n = 200000;
  for (int i = 0; i < n; ++i) {
    const cv::Vec2d e = r * cv::Vec2d(std::sqrt(l1) * n01(rng), std::sqrt(l2) * n01(rng));
    inside += cv::norm(e) <= radius;
  }
  // Binomial standard error at n = 200 000 is 0.0005; 0.002 is four of them.
  EXPECT_NEAR(double(inside) / n, 0.95, 0.002);
}

}  // namespace
}  // namespace sightfix
