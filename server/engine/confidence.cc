#include "server/engine/confidence.h"

#include <algorithm>
#include <cmath>

namespace sightfix {
namespace {

void Eigenvalues(const cv::Matx22d& c, double* major, double* minor) {
  const double tr = c(0, 0) + c(1, 1);
  const double det = c(0, 0) * c(1, 1) - c(0, 1) * c(1, 0);
  const double disc = std::sqrt(std::max(0.0, tr * tr / 4 - det));
  *major = std::max(0.0, tr / 2 + disc);
  *minor = std::max(0.0, tr / 2 - disc);
}

}  // namespace

double CircleProbability(const cv::Matx22d& cov, double r) {
  double l1, l2;
  Eigenvalues(cov, &l1, &l2);
  if (r <= 0) return 0;
  if (l1 <= 0) return 1;
  const double s1 = std::sqrt(l1), s2 = std::sqrt(l2);
  // P = integral over x in [-r, r] of phi(x; s1) * P(|y| <= sqrt(r^2 - x^2); s2). With
  // x = r sin(theta) the square root becomes r cos(theta), smooth for Simpson's rule.
  constexpr int kSteps = 400;  // even; error far below 1e-6 for the ellipses met here
  const double h = M_PI / kSteps;
  double sum = 0;
  for (int i = 0; i <= kSteps; ++i) {
    const double th = -M_PI / 2 + i * h;
    const double x = r * std::sin(th), half = r * std::cos(th);
    const double py = s2 > 0 ? std::erf(half / (s2 * std::sqrt(2.0))) : 1.0;
    const double px = std::exp(-0.5 * x * x / l1) / (s1 * std::sqrt(2 * M_PI));
    const double w = (i == 0 || i == kSteps) ? 1 : (i % 2 ? 4 : 2);
    sum += w * px * py * r * std::cos(th);
  }
  return std::min(1.0, sum * h / 3);
}

double RadiusOfProbability(const cv::Matx22d& cov, double p) {
  double l1, l2;
  Eigenvalues(cov, &l1, &l2);
  if (l1 <= 0) return 0;
  double lo = 0, hi = std::sqrt(l1 + l2) * 10;  // P(hi) > 1 - 1e-20
  while (hi - lo > 1e-6 * hi) {
    const double mid = 0.5 * (lo + hi);
    (CircleProbability(cov, mid) < p ? lo : hi) = mid;
  }
  return hi;
}

}  // namespace sightfix
