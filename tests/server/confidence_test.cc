// radius95 against published tables, an independent polar integration and a simulation.
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

// Reference independent of the code under test: P(|e| <= r) for e ~ N(0, diag(s1^2, s2^2)) in
// polar coordinates. Along a direction theta the density is exp(-a rho^2 / 2) / (2 pi s1 s2)
// with a = cos^2(theta) / s1^2 + sin^2(theta) / s2^2, and the radial integral of
// rho exp(-a rho^2 / 2) from 0 to r is (1 - exp(-a r^2 / 2)) / a in closed form, so
//     P = 1 / (2 pi s1 s2) * integral over [0, 2 pi) of (1 - exp(-a r^2 / 2)) / a dtheta,
// taken by the trapezoidal rule, which converges geometrically for a smooth periodic integrand
// (Trefethen & Weideman, SIAM Review 56(3), 2014): 512 nodes are exact to rounding here.
double PolarCircleProbability(double s1, double s2, double r) {
  constexpr int kNodes = 512;
  double sum = 0;
  for (int i = 0; i < kNodes; ++i) {
    const double th = 2 * M_PI * i / kNodes, c = std::cos(th), s = std::sin(th);
    const double a = c * c / (s1 * s1) + s * s / (s2 * s2);
    sum += (1 - std::exp(-a * r * r / 2)) / a;
  }
  return sum * (2 * M_PI / kNodes) / (2 * M_PI * s1 * s2);
}

TEST(ConfidenceTest, PolarReferenceMatchesTheRayleighLaw) {
  // For s1 = s2 = s, |e| is Rayleigh: P(|e| <= r) = 1 - exp(-r^2 / (2 s^2)) (closed form).
  EXPECT_NEAR(PolarCircleProbability(2.0, 2.0, 3.0), 1 - std::exp(-9.0 / 8), 1e-12);
}

TEST(ConfidenceTest, ChiSquareBoundOverCoversAnElongatedEllipse) {
  // Axis sigmas 1 and 0.5 (ratio 0.5), radius sqrt(5.991 * largest eigenvalue), 5.991 the
  // chi-square 2 dof 0.95 point (NIST/SEMATECH 1.3.6.7.4). The polar reference gives 0.98298
  // (the same to 1e-10 with 64 nodes): the chi-square bound over-covers.
  const double reference = PolarCircleProbability(1.0, 0.5, std::sqrt(5.991));
  EXPECT_NEAR(reference, 0.98298, 1e-5);
  const cv::Matx22d c(1.0, 0, 0, 0.25);
  EXPECT_NEAR(CircleProbability(c, std::sqrt(5.991)), reference, 1e-6);
  EXPECT_LT(Radius95(c), std::sqrt(5.991));
  EXPECT_NEAR(PolarCircleProbability(1.0, 0.5, Radius95(c)), 0.95, 1e-5);
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
