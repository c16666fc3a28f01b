// report.html: one self-contained page with the summary table, inline SVG plots and the safety
// caution.
#include <array>
#include <cmath>
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "client/eval/integrity.h"
#include "client/eval/protection_evidence.h"
#include "client/eval/report_plots.h"
#include "client/eval/route_report.h"
#include "client/eval/route_view.h"
#include "client/eval/svg_plot.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

constexpr char kSafety[] =
    "sightfix is a fallback aid, not a certified navigation source. Its positions must not be "
    "used as the sole means of navigation; defer to the vehicle's safety case and local "
    "regulations.";

std::string Row(const std::string& name, const std::string& value, const std::string& note = "") {
  return "<tr><th>" + EscapeXml(name) + "</th><td>" + EscapeXml(value) + "</td><td>" +
         EscapeXml(note) + "</td></tr>\n";
}

// "a / b / c", each number printed with `format`.
std::string Slashed(const std::vector<double>& values, const char* format) {
  std::string out;
  for (size_t i = 0; i < values.size(); ++i)
    out += (i ? " / " : "") + FormatNumber(format, values[i]);
  return out;
}

// A figure and its 95 % interval: "0.167 [0.030, 0.564]".
std::string WithCi(double value, const std::optional<Interval>& ci, const char* format = "%.3f") {
  return FormatNumber(format, value) + IntervalText(ci, 1, format);
}

std::string ErrorRows(const RouteSummary& s) {
  const ErrorStats& a = s.all;
  std::string t = Row("error median (m)", WithCi(a.median_m, a.median_m_ci95), "all fixes");
  t += Row("error p90 / p95 / max (m)",
           FormatNumber("%.3f", a.p90_m) + " / " + WithCi(a.p95_m, a.p95_m_ci95) + " / " +
               FormatNumber("%.3f", a.max_m),
           "all fixes");
  t += Row("median |along-track| / |cross-track| (m)",
           WithCi(a.median_abs_along_m, a.median_abs_along_m_ci95) + " / " +
               WithCi(a.median_abs_cross_m, a.median_abs_cross_m_ci95),
           "all fixes; along the true heading");
  t += Row("refined error median / p95 (m)",
           WithCi(s.median_error_m, s.median_error_m_ci95) + " / " +
               WithCi(s.p95_error_m, s.p95_error_m_ci95),
           "refined fixes");
  t += Row("wrong refined (> 5 m)",
           std::to_string(s.wrong_refined) + " of " + std::to_string(s.refined) + ", " +
               WithCi(s.wrong_refined_share, s.wrong_refined_share_ci95),
           "must be 0");
  t += Row("heading error median (deg)", FormatNumber("%.2f", a.median_heading_deg));
  const std::array<double, 3> shares = PoseBinShares(s);
  for (size_t k = 0; k < shares.size(); ++k)
    t += Row("pose " + PoseBinLabel(kPoseBins[k]), WithCi(shares[k], s.pose_bin_ci95[k]),
             "share of queries; Sattler et al. 2018");
  return t;
}

std::string SpoofingRows(const SpoofingScore& sc) {
  const std::string delay =
      sc.detection_delays_s.empty()
          ? ""
          : "median delay " + FormatNumber("%.1f s", Percentile(sc.detection_delays_s, 0.5));
  return Row("spoofed segments flagged",
             std::to_string(sc.segments_flagged) + " of " + std::to_string(sc.segments_true),
             delay) +
         Row("spoofing false alarms", std::to_string(sc.false_alarms));
}

// The failure funnel: per stage the queries, their share with its interval and a bar.
std::string FunnelTable(const FunnelCounts& f) {
  std::string t =
      "<table class=\"summary funnel\"><tr><th>stopped at</th><th>queries</th><th>share "
      "[95 % interval]</th><th></th></tr>\n";
  for (int k = 0; k < kFunnelStageCount; ++k) {
    const int bar_px = static_cast<int>(std::lround(200 * f.share[k]));
    t += "<tr><th>" + std::string(FunnelStageName(static_cast<FunnelStage>(k))) + "</th><td>" +
         std::to_string(f.count[k]) + "</td><td>" + FormatNumber("%.1f %%", 100 * f.share[k]) +
         EscapeXml(IntervalText(f.share_ci95[k], 100, "%.1f")) +
         "</td><td><div class=\"bar\" style=\"width:" + std::to_string(bar_px) +
         "px\"></div></td></tr>\n";
  }
  return t + "</table>\n";
}

std::string SummaryTable(const RouteReport& r) {
  const RouteSummary& s = r.summary;
  std::string t = "<table class=\"summary\"><tr><th>metric</th><th>value</th><th>note</th></tr>\n";
  t += Row("queries", std::to_string(s.queries), r.partial ? "partial: interrupted" : "");
  t += Row("availability", WithCi(s.availability, s.availability_ci95),
           std::to_string(s.refined) + " refined, " + std::to_string(s.coarse) + " coarse, " +
               std::to_string(s.none) + " none");
  t += Row("refined share", WithCi(s.refined_share, s.refined_share_ci95));
  t += Row("recall@1 / 5 / 10 (25 m)",
           WithCi(s.recall_at_1, s.recall_at_1_ci95) + " / " +
               WithCi(s.recall_at_5, s.recall_at_5_ci95) + " / " +
               WithCi(s.recall_at_10, s.recall_at_10_ci95),
           "Arandjelovic et al. 2016");
  t += ErrorRows(s);
  t += Row("radius95 coverage", WithCi(s.all.radius95_coverage, s.all.radius95_coverage_ci95),
           "about 0.95 when calibrated");
  t += Row("NEES mean", FormatNumber("%.2f", s.all.nees_mean), "about 2 when calibrated (2 dof)");
  t += Row("latency p50 / p95 / p99 (ms)",
           Slashed({s.latency_ms_p50, s.latency_ms_p95, s.latency_ms_p99}, "%.0f"));
  if (r.spoofing) t += SpoofingRows(r.spoofing->score);
  return t + "</table>\n<div class=\"caption\">" + EscapeXml(IntervalLegend(s)) + ".</div>\n";
}

// One bound's row of the integrity table.
std::string IntegrityRow(const std::string& name, const IntegrityCounts& c) {
  const std::string bound =
      c.segment_share_upper95 ? FormatNumber("%.3f", *c.segment_share_upper95) + " CP" : "-";
  return "<tr><th>" + EscapeXml(name) + "</th><td>" + std::to_string(c.usable_fixes) + "</td><td>" +
         std::to_string(c.misleading_fixes) + "</td><td>" +
         EscapeXml(WithCi(c.fix_share, c.fix_share_ci95)) + "</td><td>" +
         std::to_string(c.episodes) + " (longest " + std::to_string(c.longest_episode) +
         ")</td><td>" + std::to_string(c.misleading_segments) + " of " +
         std::to_string(c.segments) + "</td><td>" + bound + "</td></tr>\n";
}

std::string IntegrityTable(const RouteSummary& s) {
  return "<table class=\"summary integrity\"><tr><th>bound</th><th>usable fixes</th>"
         "<th>beyond it</th><th>share of fixes [95 %]</th><th>episodes</th><th>segments "
         "holding one</th><th>share of segments, 95 % upper bound</th></tr>\n" +
         IntegrityRow("misleading: error > radius95", s.misleading) +
         IntegrityRow("confidently wrong: error > 3 x radius95", s.confidently_wrong) +
         "</table>\n<div class=\"caption\">A usable fix states a radius95; it misleads when its "
         "error exceeds it (about 5 % of fixes when the radius is calibrated) and is confidently "
         "wrong beyond 3 x radius95 (a 2D Gaussian: 2e-12). An episode is a run of consecutive "
         "misleading fixes. The independent trials are street segments: the upper bound is the "
         "one-sided Clopper-Pearson 95 % bound of the share of segments that hold such a fix. "
         "Evidence for a safety case, not a certificate.</div>\n";
}

// Results by street segment: a row per segment, its availability cell coloured as the strip.
std::string SegmentTable(const RouteSummary& s) {
  std::string t =
      "<table class=\"summary segments\"><tr><th>segment</th><th>driven (m)</th><th>queries"
      "</th><th>availability</th><th>refined</th><th>median error (m)</th><th>misleading</th>"
      "</tr>\n";
  for (const SegmentSummary& g : s.segments)
    t += "<tr><th>" + std::to_string(g.index) + "</th><td>" + FormatNumber("%.0f", g.start_m) +
         "-" + FormatNumber("%.0f", g.end_m) + "</td><td>" + std::to_string(g.queries) +
         "</td><td style=\"background:" + AvailabilityColour(g.availability) + "33\">" +
         FormatNumber("%.3f", g.availability) + "</td><td>" +
         FormatNumber("%.3f", g.refined_share) + "</td><td>" +
         (g.fixes ? FormatNumber("%.3f", g.median_error_m) : "-") + "</td><td>" +
         std::to_string(g.misleading) + "</td></tr>\n";
  return t + "</table>\n";
}

constexpr char kStyle[] = R"(
body { font-family: sans-serif; margin: 24px; color: #1d1d1b; background: #fff; max-width: 1000px; }
h1 { font-size: 22px; margin-bottom: 4px; }
h2 { font-size: 17px; margin: 18px 0 4px; }
.meta { color: #555; font-size: 13px; }
.caution { border: 2px solid #b3202e; background: #fbeeee; padding: 10px 14px; margin: 14px 0; }
.partial { border: 2px solid #c9a227; background: #fbf6e6; padding: 8px 14px; }
table.summary { border-collapse: collapse; font-size: 13px; margin: 10px 0 20px; }
table.summary th, table.summary td { border: 1px solid #ccc; padding: 4px 8px; text-align: left; }
.funnel .bar { height: 10px; background: #3b6ea5; }
svg.plot { display: block; margin: 10px 0 22px; font-family: sans-serif; }
.caption { font-size: 12px; color: #555; margin-top: -16px; margin-bottom: 18px; }
)";

}  // namespace

std::string ReportHtml(const RouteReport& r) {
  const std::vector<const QueryResult*> qs = InTimeOrder(r);
  std::string h =
      "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
      "<title>sightfix replay report</title><style>" +
      std::string(kStyle) + "</style></head><body data-check=\"pending\">\n";
  h += "<h1>sightfix replay: " + EscapeXml(fs::path(r.drive_dir).filename().string()) + "</h1>\n";
  h += "<div class=\"meta\">drive " + EscapeXml(r.drive_dir) + " &middot; " + EscapeXml(r.source) +
       " &middot; map version " + std::to_string(r.map_version) + " &middot; prior " +
       EscapeXml(r.prior) + " &middot; seed " + std::to_string(r.seed) + "</div>\n";
  h += "<div class=\"caution\"><b>Caution.</b> " + std::string(kSafety) + "</div>\n";
  if (r.partial)
    h += "<div class=\"partial\">Partial replay: interrupted before every query ran.</div>\n";
  h += SummaryTable(r);
  h += "<h2>Where queries stopped</h2>\n" + FunnelTable(r.summary.funnel);
  h += "<div class=\"caption\">retrieval: no candidate within 25 m of the truth among those "
       "returned (a query off the mapped streets lands here too); verification: a candidate "
       "within 25 m, none verified; pose: verified, not refined; failed_call: no answer.</div>\n";
  if (qs.empty()) return h + "<p>No query ran.</p></body></html>\n";
  h += RouteMapPlot(r, qs);
  h += "<div class=\"caption\">Dots: true positions of the queries, coloured by the error of "
       "their fix (grey rings: no fix; thin lines: the error, drawn when over 1 m; purple rings: "
       "the GNSS was spoofed then). Pale dots: survey images the retrieval returned.</div>\n";
  h += ErrorCdfPlot(r.summary, qs);
  h += ErrorAlongRoutePlot(r, qs);
  h += "<h2>By street segment (" + FormatNumber("%g", r.summary.segment_length_m) +
       " m driven)</h2>\n" + SegmentTable(r.summary);
  h += "<h2>Integrity</h2>\n" + IntegrityTable(r.summary);
  h += ErrorAgainstBoundPlot(qs);
  h += "<div class=\"caption\">Error against protection bound: each usable fix at its stated "
       "radius95 (x) and its actual error (y). Grey dashes: error = radius95, 95 % of dots "
       "belong below; red dots: error = 3 x radius95. Orange dots mislead, red ones are "
       "confidently wrong.</div>\n";
  h += "<p>" + EscapeXml(ProtectionLines(r.summary.protection)) + "<br>" +
       EscapeXml(OverboundLine(r.summary.protection, r.drive_dir)) + "</p>\n";
  h += ProtectionDiagramPlot(qs);
  h += "<div class=\"caption\">Error against protection level: each refined fix at its "
       "horizontal protection level (x) and its actual error (y). Dashes: error = protection "
       "level; a usable fix above them is misleading, above the alert limit's line hazardous. "
       "Shaded: protection levels over the alert limit (not usable). A fallback aid's figures, "
       "not a certified integrity monitor's.</div>\n";
  h += AvailabilityByAlertLimitPlot(r.summary);
  h += LatencyHistogramPlot(r.summary, qs);
  if (r.spoofing) h += SpoofingPlot(r);
  // The page checks itself: headless tests read data-check from the DOM.
  h += "<script>\n"
       "window.addEventListener('error', function () { document.body.dataset.check = 'error'; });\n"
       "document.body.dataset.check = 'ok ' + document.querySelectorAll('svg.plot').length + ' "
       "plots';\n"
       "</script>\n</body></html>\n";
  return h;
}

}  // namespace sightfix
