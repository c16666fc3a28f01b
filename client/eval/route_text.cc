// The evaluator's summary as text (route_eval.h): pose bins, interval tags and the summary line.
#include <array>
#include <cstdio>
#include <optional>
#include <string>

#include "client/eval/integrity.h"
#include "client/eval/route_eval.h"
#include "client/eval/route_view.h"

namespace sightfix {

std::string PoseBinLabel(const PoseBin& bin) {
  char buf[64];
  std::snprintf(buf, sizeof(buf), "%s (%g m, %g deg)", bin.name, bin.max_error_m,
                bin.max_heading_error_deg);
  return buf;
}

std::array<double, 3> PoseBinShares(const RouteSummary& s) {
  return {s.within_0_25m_2deg, s.within_0_5m_5deg, s.within_5m_10deg};
}

std::string IntervalLegend(const RouteSummary& s) {
  const int segments = static_cast<int>(s.segments.size());
  std::string out = "[lo, hi]: 95 % intervals over " + std::to_string(segments) +
                    " street segments of " + FormatNumber("%g", s.segment_length_m) +
                    " m driven, read as independent (neighbouring frames are not); seg: block "
                    "bootstrap of the segments; W: Wilson score with one trial per segment (a "
                    "rate of 0 or 1, which the bootstrap cannot vary); CP: one-sided "
                    "Clopper-Pearson over segments; none for p90 or the max";
  if (segments < kFewSegments)
    out += "; fewer than " + std::to_string(kFewSegments) +
           " segments: rough intervals, likely too narrow";
  return out;
}

const char* IntervalTag(const Interval& ci) {
  switch (ci.method) {
    case IntervalMethod::kBlockBootstrap:
      return "seg";
    case IntervalMethod::kWilson:
      return "W";
    case IntervalMethod::kClopperPearson:
      return "CP";
    case IntervalMethod::kUnspecified:
      break;
  }
  return "";
}

std::string IntervalText(const std::optional<Interval>& ci, double scale, const char* format) {
  if (!ci) return " [-]";
  const std::string tag = IntervalTag(*ci);
  return " [" + FormatNumber(format, scale * ci->low) + ", " +
         FormatNumber(format, scale * ci->high) + "]" + (tag.empty() ? "" : " " + tag);
}

std::string FunnelLine(const FunnelCounts& f) {
  std::string out;
  for (int k = 0; k < kFunnelStageCount; ++k)
    out += std::string(k ? ", " : "") + FunnelStageName(static_cast<FunnelStage>(k)) + " " +
           std::to_string(f.count[k]) + " (" + FormatNumber("%.1f", 100 * f.share[k]) + " %" +
           IntervalText(f.share_ci95[k], 100, "%.1f") + ")";
  return out;
}

std::string SummaryLine(const RouteSummary& s) {
  const std::array<double, 3> bins = PoseBinShares(s);
  char buf[2048];
  std::snprintf(
      buf, sizeof(buf),
      "%d queries: refined %.1f %%%s (coarse %d, none %d), availability %.1f %%%s; error median "
      "%.3f m%s, p90 %.3f m, p95 %.3f m%s, max %.3f m; wrong refined %d; heading median %.2f "
      "deg; recall@1/5 %.3f/%.3f%s; pose %s %.3f, %s %.3f, %s %.3f; radius95 coverage %.3f%s, "
      "NEES %.2f; latency p50 %.0f ms, p95 %.0f ms; %s; %s; [lo, hi]: 95 %% intervals over %zu "
      "segments of %g m",
      s.queries, 100 * s.refined_share, IntervalText(s.refined_share_ci95, 100, "%.1f").c_str(),
      s.coarse, s.none, 100 * s.availability,
      IntervalText(s.availability_ci95, 100, "%.1f").c_str(), s.median_error_m,
      IntervalText(s.median_error_m_ci95, 1, "%.3f").c_str(), s.p90_error_m, s.p95_error_m,
      IntervalText(s.p95_error_m_ci95, 1, "%.3f").c_str(), s.max_error_m, s.wrong_refined,
      s.median_heading_error_deg, s.recall_at_1, s.recall_at_5,
      IntervalText(s.recall_at_5_ci95, 1, "%.3f").c_str(), PoseBinLabel(kPoseBins[0]).c_str(),
      bins[0], PoseBinLabel(kPoseBins[1]).c_str(), bins[1], PoseBinLabel(kPoseBins[2]).c_str(),
      bins[2], s.radius95_coverage, IntervalText(s.radius95_coverage_ci95, 1, "%.3f").c_str(),
      s.nees_mean, s.latency_ms_p50, s.latency_ms_p95, IntegrityLine(s.misleading).c_str(),
      IntegrityLine(s.confidently_wrong).c_str(), s.segments.size(), s.segment_length_m);
  return buf;
}

}  // namespace sightfix
