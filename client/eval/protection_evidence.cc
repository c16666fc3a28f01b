#include "client/eval/protection_evidence.h"

#include <algorithm>
#include <cmath>
#include <set>

#include "client/eval/interval_stats.h"
#include "client/eval/route_view.h"

namespace sightfix {
namespace {

bool WithinLevels(const QueryResult& q) {
  const FixIntegrity& i = q.fix.integrity;
  return q.error_m <= i.horizontal_pl_m && std::fabs(q.cross_track_m) <= i.lateral_pl_m &&
         std::fabs(q.along_track_m) <= i.longitudinal_pl_m;
}

bool Alerted(const FixIntegrity& i) {
  return i.state == IntegrityState::kFaultDetected || i.state == IntegrityState::kPlaceAmbiguity;
}

}  // namespace

bool IsProtected(const QueryResult& q) {
  return q.ran && q.error.empty() && q.fix.quality == FixQuality::kRefined && q.error_m >= 0 &&
         q.fix.integrity.state != IntegrityState::kUnavailable;
}

bool IsFlaggedUsable(const QueryResult& q) { return IsProtected(q) && q.fix.integrity.usable(); }

bool IsMisleadingAtLevels(const QueryResult& q) { return IsFlaggedUsable(q) && !WithinLevels(q); }

ProtectionEvidence CountProtection(const std::vector<QueryResult>& results, const StreetCut& cut) {
  ProtectionEvidence e;
  std::set<int> segments, failed;
  double run_start = -1;
  for (size_t i : cut.order) {
    const QueryResult& q = results[i];
    ++e.queries;
    if (!IsProtected(q)) continue;
    const FixIntegrity& f = q.fix.integrity;
    ++e.protected_fixes;
    for (size_t k = 0; k < kAlertLimitsM.size(); ++k)
      e.availability[k] += !Alerted(f) && f.horizontal_pl_m <= kAlertLimitsM[k];
    if (WithinLevels(q)) ++e.within_levels, e.false_alerts += Alerted(f);
    if (!f.usable()) continue;  // neither ends nor extends a run
    ++e.usable;
    segments.insert(cut.segment[i]);
    if (!IsMisleadingAtLevels(q)) {
      run_start = -1;
      continue;
    }
    ++e.misleading;
    e.hazardous += q.error_m > f.horizontal_alert_limit_m;
    failed.insert(cut.segment[i]);
    if (run_start < 0) ++e.episodes, run_start = q.truth.timestamp_s;
    e.longest_unflagged_s = std::max(e.longest_unflagged_s, q.truth.timestamp_s - run_start);
  }
  for (double& a : e.availability) a = e.queries > 0 ? a / e.queries : 0;
  e.segments = static_cast<int>(segments.size());
  e.misleading_segments = static_cast<int>(failed.size());
  if (Result<double> b = ClopperPearsonUpperBound(e.misleading_segments, e.segments); b.ok())
    e.segment_share_upper95 = *b;
  return e;
}

std::string ProtectionLines(const ProtectionEvidence& e) {
  std::string out = "protection levels: " + std::to_string(e.usable) + " of " +
                    std::to_string(e.protected_fixes) + " protected fixes flagged usable; " +
                    std::to_string(e.misleading) + " misleading (error > protection level), " +
                    std::to_string(e.hazardous) + " hazardous (also > alert limit), " +
                    std::to_string(e.episodes) + " episodes, longest unflagged " +
                    FormatNumber("%.1f", e.longest_unflagged_s) + " s";
  if (e.segment_share_upper95)
    out += ", at most " + FormatNumber("%.3f", *e.segment_share_upper95) + " of " +
           std::to_string(e.segments) + " segments (95 % CP)";
  out += "; false alerts " + std::to_string(e.false_alerts) + " of " +
         std::to_string(e.within_levels) +
         " fixes within their levels\navailability by alert limit:";
  for (size_t k = 0; k < kAlertLimitsM.size(); ++k)
    out += " " + FormatNumber("%g", kAlertLimitsM[k]) + " m " +
           FormatNumber("%.3f", e.availability[k]);
  return out;
}

}  // namespace sightfix
