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
    const cv::Vec2d along(std::sin(h), std::cos(h)), cross(std::cos(h), -std::sin(h));
    const cv::Matx22d& c = q.fix.covariance_en;
    const double var_along = along.dot(c * along), var_cross = cross.dot(c * cross);
    if (!(var_along > 0 && var_cross > 0)) continue;  // no covariance: nothing to normalise by
    out.z.push_back(q.along_track_m / std::sqrt(var_along));
    out.z.push_back(q.cross_track_m / std::sqrt(var_cross));
  }
  return out;
}

}  // namespace sightfix
