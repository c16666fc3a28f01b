#include "client/eval/overbound.h"

#include <algorithm>
#include <cmath>
#include <functional>

#include "client/eval/interval_stats.h"
#include "server/engine/protection_levels.h"

namespace sightfix {

Result<OverboundFit> FitOverbound(const std::vector<double>& z, double confidence) {
  if (z.empty()) return Status::InvalidArgument("overbound: no samples");
  if (!(confidence > 0 && confidence < 1))
    return Status::InvalidArgument("overbound: confidence must lie in (0, 1)");
  std::vector<double> a;
  for (double v : z) {
    if (!std::isfinite(v)) return Status::InvalidArgument("overbound: a sample is not finite");
    a.push_back(std::fabs(v));
  }
  std::sort(a.begin(), a.end(), std::greater<double>());
  const int64_t n = static_cast<int64_t>(a.size());
  OverboundFit fit;
  fit.samples = static_cast<int>(n);
  ProportionOptions options;
  options.confidence = confidence;
  for (int64_t i = 1; 2 * i <= n; ++i) {  // a[i - 1]: i samples at or beyond it
    if (a[i - 1] <= 0) break;
    Result<double> upper = ClopperPearsonUpperBound(i, n, options);
    if (!upper.ok()) return upper.status();
    if (*upper >= 1) continue;
    const double k = a[i - 1] / TwoSidedNormalQuantile(*upper);
    if (k > fit.scale) fit.scale = k, fit.binding_z = a[i - 1];
  }
  return fit;
}

namespace {

struct AxisErrors {
  double along = 0, cross = 0;
  bool ok = false;  // both variances positive
};

// e (east/north, metres) over the sigmas of c along and across the heading h (radians).
AxisErrors Normalised(const cv::Vec2d& e, const cv::Matx22d& c, double h) {
  const cv::Vec2d along(std::sin(h), std::cos(h)), cross(std::cos(h), -std::sin(h));
  const double var_along = along.dot(c * along), var_cross = cross.dot(c * cross);
  AxisErrors out;
  if (!(var_along > 0 && var_cross > 0)) return out;
  out.along = e.dot(along) / std::sqrt(var_along), out.cross = e.dot(cross) / std::sqrt(var_cross);
  out.ok = true;
  return out;
}

bool WithinScreen(const AxisErrors& a) {
  return std::fabs(a.along) <= kFaultScreenZ && std::fabs(a.cross) <= kFaultScreenZ;
}

// The smallest K at which the fix's protection levels (as computed at its overbound scale, and
// linear in it) hold its error; 0 when a level is missing.
double ScaleToBound(const QueryResult& q) {
  const FixIntegrity& f = q.fix.integrity;
  const double s = f.overbound_scale > 0 ? f.overbound_scale : 1;
  const struct {
    double error, level;
  } axes[] = {{q.error_m, f.horizontal_pl_m},
              {std::fabs(q.cross_track_m), f.lateral_pl_m},
              {std::fabs(q.along_track_m), f.longitudinal_pl_m}};
  double k = 0;
  for (const auto& a : axes) {
    if (!(a.level > 0)) return 0;
    k = std::max(k, a.error / (a.level / s));
  }
  return k;
}

}  // namespace

NormalisedErrors NormaliseErrors(const std::vector<QueryResult>& results, double wrong_m) {
  NormalisedErrors out;
  for (const QueryResult& q : results) {
    if (!q.ran || !q.error.empty() || q.fix.quality != FixQuality::kRefined || q.error_m < 0)
      continue;
    ++out.fixes;
    if (q.error_m > wrong_m) {
      ++out.excluded;
      continue;
    }
    const double h = q.truth.attitude.heading_deg * M_PI / 180;
    // The error east/north from its split along and across the truth's heading (orthonormal).
    const cv::Vec2d e = q.along_track_m * cv::Vec2d(std::sin(h), std::cos(h)) +
                        q.cross_track_m * cv::Vec2d(std::cos(h), -std::sin(h));
    const AxisErrors all_in = Normalised(e, q.fix.covariance_en, h);
    if (!all_in.ok) continue;  // no covariance: nothing to normalise by
    if (!WithinScreen(all_in)) {
      bool one_group = false;
      for (const SeparatedSolution& g : q.fix.integrity.separations) {
        // The subset's solution is the fix's plus shift_en: its error e + shift_en.
        const AxisErrors without = Normalised(e + g.shift_en, g.covariance, h);
        one_group = one_group || (without.ok && WithinScreen(without));
      }
      const double k = one_group ? ScaleToBound(q) : 0;
      if (k > 0) {
        ++out.faults;
        if (k > out.fault_scale) out.fault_scale = k, out.fault_scale_image = q.truth.image;
        continue;
      }
    }
    out.z.push_back(all_in.along);
    out.z.push_back(all_in.cross);
  }
  return out;
}

}  // namespace sightfix
