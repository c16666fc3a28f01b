// How sure a fix is: the horizontal covariance of a position and the radius of the circle that
// holds a given share of it.
//
// radius95: the radius r of the circle centred on the estimate with P(|e| <= r) = 0.95 for a
// zero-mean 2D Gaussian error e with covariance C. Computed numerically (bisection on r of a 1D
// integral over the major axis), because sqrt(5.991 * largest eigenvalue), the 95 % chi-square
// bound of 2 dof, over-covers an elongated ellipse (98.3 % at an axis ratio of 0.5) and the
// 1D bound 1.96 sigma under-covers a round one. Thread-safe (pure functions).
#pragma once

#include <opencv2/core/matx.hpp>

namespace sightfix {

// P(|e| <= r) for e ~ N(0, cov), cov 2x2 symmetric positive semi-definite, r >= 0.
double CircleProbability(const cv::Matx22d& cov, double r);
// Smallest r with CircleProbability(cov, r) >= p, to 1e-6 relative. REQUIRES: 0 < p < 1.
double RadiusOfProbability(const cv::Matx22d& cov, double p);
inline double Radius95(const cv::Matx22d& cov) { return RadiusOfProbability(cov, 0.95); }

}  // namespace sightfix
