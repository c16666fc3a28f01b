#include "client/eval/protection_evidence.h"

#include <algorithm>
#include <cmath>
#include <filesystem>
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
    if (f.overbound_scale > e.overbound_scale ||
        (e.overbound_drive.empty() && !f.overbound_drive.empty()))
      e.overbound_scale = f.overbound_scale, e.overbound_drive = f.overbound_drive;
    for (size_t k = 0; k < kAlertLimitsM.size(); ++k)
      e.availability[k] += !Alerted(f) && f.horizontal_pl_m <= kAlertLimitsM[k];
    if (e.checked_at_m == 0 || f.horizontal_alert_limit_m < e.checked_at_m)
      e.checked_at_m = f.horizontal_alert_limit_m;
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
  bool above = false;
  for (size_t k = 0; k < kAlertLimitsM.size(); ++k) {
    const bool bound = e.checked_at_m > 0 && kAlertLimitsM[k] > e.checked_at_m;
    out += " " + FormatNumber("%g", kAlertLimitsM[k]) + " m " + (bound ? "<= " : "") +
           FormatNumber("%.3f", e.availability[k]);
    above = above || bound;
  }
  if (above)
    out += " (place checks ran at " + FormatNumber("%g", e.checked_at_m) +
           " m; replay --alert-limits for the wider)";
  return out;
}

std::string DriveFolderName(const std::string& dir) {
  std::filesystem::path p = std::filesystem::path(dir).lexically_normal();
  if (p.filename().empty()) p = p.parent_path();
  return p.filename().string();
}

std::optional<bool> OverboundHeldOut(const ProtectionEvidence& e, const std::string& drive_dir) {
  if (e.overbound_drive.empty()) return std::nullopt;
  return e.overbound_drive != DriveFolderName(drive_dir);
}

std::string OverboundLine(const ProtectionEvidence& e, const std::string& drive_dir) {
  const std::optional<bool> held_out = OverboundHeldOut(e, drive_dir);
  if (!held_out) return "no overbound fitted on this map: sigmas as stated (scale 1)";
  return "overbound " + FormatNumber("%.2f", e.overbound_scale) + " fitted on drive " +
         e.overbound_drive +
         (*held_out ? " (this drive is held out from the fit)"
                    : ": THIS drive, so its protection figures are not held-out evidence");
}

}  // namespace sightfix
