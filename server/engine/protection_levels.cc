#include "server/engine/protection_levels.h"

#include <algorithm>
#include <cmath>
#include <cstdio>

namespace sightfix {
namespace {

double AxisSigma(const cv::Matx22d& c, const cv::Vec2d& u) {
  return std::sqrt(std::max(0.0, (u.t() * c * u)(0)));
}

double LargestEigenvalue(const cv::Matx22d& c) {
  const double half_trace = 0.5 * (c(0, 0) + c(1, 1));
  const double det = c(0, 0) * c(1, 1) - c(0, 1) * c(1, 0);
  return half_trace + std::sqrt(std::max(0.0, half_trace * half_trace - det));
}

// The two horizontal axes of a fix with this heading, in east/north.
struct Axes {
  cv::Vec2d longitudinal, lateral;
  explicit Axes(double heading_deg) {
    const double h = heading_deg * M_PI / 180;
    longitudinal = {std::sin(h), std::cos(h)};
    lateral = {std::cos(h), -std::sin(h)};  // to the right of the heading
  }
};

std::string Describe(const SeparatedSolution& g, const char* axis, double shift, double limit) {
  char buf[160];
  std::snprintf(buf, sizeof buf, "%s: %s separation %.3f m beyond its %.3f m threshold",
                g.name.c_str(), axis, std::fabs(shift), limit);
  return buf;
}

}  // namespace

bool ProtectionParameters::Validate(std::string* error) const {
  auto fail = [&](const char* what) {
    if (error) *error = what;
    return false;
  };
  if (!(integrity_risk > 0 && integrity_risk < 0.5))
    return fail("integrity_risk must lie in (0, 0.5)");
  if (!(false_alert_rate > 0 && false_alert_rate < 0.5))
    return fail("false_alert_rate must lie in (0, 0.5)");
  if (!(overbound_scale >= 1 && std::isfinite(overbound_scale)))
    return fail("overbound_scale must be finite and >= 1");
  return true;
}

double TwoSidedNormalQuantile(double p) {
  // Newton on log erfc(k / sqrt 2) = log p: P(|z| > k) = erfc(k / sqrt 2).
  double k = std::sqrt(-2 * std::log(p / 2));
  for (int it = 0; it < 50; ++it) {
    const double tail = std::erfc(k / M_SQRT2);
    const double f = std::log(tail) - std::log(p);
    const double df = -std::sqrt(2 / M_PI) * std::exp(-0.5 * k * k) / tail;
    const double step = f / df;
    k = std::max(0.0, k - step);
    if (std::fabs(step) < 1e-13) break;
  }
  return k;
}

double RayleighMultiplier(double p) { return std::sqrt(-2 * std::log(p)); }

ProtectionLevels ComputeProtectionLevels(const cv::Matx22d& covariance_en, double heading_deg,
                                         const std::vector<SeparatedSolution>& groups,
                                         const ProtectionParameters& p) {
  const Axes axes(heading_deg);
  const double s = p.overbound_scale;
  const int n = static_cast<int>(groups.size());
  const double fault_free_risk = n > 0 ? p.integrity_risk / 2 : p.integrity_risk;
  ProtectionLevels out;
  out.hypotheses = n;
  out.horizontal_m =
      RayleighMultiplier(fault_free_risk) * s * std::sqrt(LargestEigenvalue(covariance_en));
  const double k_ff = TwoSidedNormalQuantile(fault_free_risk);
  out.lateral_m = k_ff * s * AxisSigma(covariance_en, axes.lateral);
  out.longitudinal_m = k_ff * s * AxisSigma(covariance_en, axes.longitudinal);
  if (n == 0) return out;
  const double group_risk = p.integrity_risk / (2 * n);
  const double k_md = TwoSidedNormalQuantile(group_risk), k_md_h = RayleighMultiplier(group_risk);
  const double k_fa = TwoSidedNormalQuantile(p.false_alert_rate / (2 * n));
  for (const SeparatedSolution& g : groups) {
    double threshold[2];
    const cv::Vec2d* axis[2] = {&axes.lateral, &axes.longitudinal};
    const char* axis_name[2] = {"lateral", "longitudinal"};
    double* level[2] = {&out.lateral_m, &out.longitudinal_m};
    for (int a = 0; a < 2; ++a) {
      threshold[a] = k_fa * s * AxisSigma(g.shift_covariance, *axis[a]);
      const double shift = g.shift_en.dot(*axis[a]);
      const double ratio = threshold[a] > 0 ? std::fabs(shift) / threshold[a] : 0;
      out.max_test_ratio = std::max(out.max_test_ratio, ratio);
      if (ratio > 1 && !out.fault_detected)
        out.fault_detected = true, out.fault = Describe(g, axis_name[a], shift, threshold[a]);
      *level[a] = std::max(*level[a], threshold[a] + k_md * s * AxisSigma(g.covariance, *axis[a]));
    }
    // A fault that passed both axis tests shifted the fix by at most their hypotenuse.
    out.horizontal_m =
        std::max(out.horizontal_m, std::hypot(threshold[0], threshold[1]) +
                                       k_md_h * s * std::sqrt(LargestEigenvalue(g.covariance)));
  }
  return out;
}

}  // namespace sightfix
