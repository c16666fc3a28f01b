#include "client/eval/report_plots.h"

#include <algorithm>
#include <cmath>

#include "client/eval/integrity.h"
#include "client/eval/protection_evidence.h"
#include "client/eval/route_view.h"
#include "client/eval/street_segments.h"
#include "client/eval/svg_plot.h"
#include "indexer/base/geo.h"

namespace sightfix {
namespace {

// Local east/north metres of every point, for the route map.
struct MapFrame {
  EnuFrame enu;
  explicit MapFrame(const GeoPoint& origin) : enu(origin) {}
  cv::Vec2d At(double lat, double lon) const {
    const cv::Vec3d v = enu.ToEnu({lat, lon, enu.origin().height_m});
    return {v[0], v[1]};
  }
};

}  // namespace

std::string RouteMapPlot(const RouteReport& r, const std::vector<const QueryResult*>& qs) {
  MapFrame frame(qs.front()->truth.position);
  std::vector<cv::Vec2d> truth, refs;
  for (const QueryResult* q : qs) {
    truth.push_back(frame.At(q->truth.position.lat_deg, q->truth.position.lon_deg));
    for (const ReferenceUse& u : q->fix.references) refs.push_back(frame.At(u.lat_deg, u.lon_deg));
  }
  double x0 = HUGE_VAL, x1 = -HUGE_VAL, y0 = HUGE_VAL, y1 = -HUGE_VAL;
  for (const cv::Vec2d& p : truth)
    x0 = std::min(x0, p[0]), x1 = std::max(x1, p[0]), y0 = std::min(y0, p[1]),
    y1 = std::max(y1, p[1]);
  // Equal scale on both axes, 40 m of margin.
  const double span = std::max({x1 - x0, y1 - y0, 50.0}) + 80, cx = (x0 + x1) / 2,
               cy = (y0 + y1) / 2;
  SvgPlot plot("route", "Route, coloured by error",
               {cx - span / 2, cx + span / 2, false, "east (m)"},
               {cy - span / 2, cy + span / 2, false, "north (m)"}, 620, 620);
  std::vector<std::pair<std::string, std::string>> legend;
  for (const ErrorClass& c : kErrorClasses) legend.emplace_back(c.colour, c.label);
  legend.emplace_back(kNoFixColour, "no fix");
  plot.Legend(legend);
  for (const cv::Vec2d& p : refs) plot.Dot(p[0], p[1], 1.6, "#b9c3cf");  // survey images retrieved
  std::vector<double> xs, ys;
  for (const cv::Vec2d& p : truth) xs.push_back(p[0]), ys.push_back(p[1]);
  plot.Line(xs, ys, "#33415c", 1.2);
  for (size_t i = 0; i < qs.size(); ++i) {
    const QueryResult& q = *qs[i];
    const std::string tip = q.truth.image + ": " + FixQualityName(q.fix.quality) +
                            (q.error_m >= 0 ? ", error " + FormatNumber("%.3f m", q.error_m) : "");
    if (q.fix.quality == FixQuality::kNone) {
      plot.Ring(truth[i][0], truth[i][1], 3.5, kNoFixColour);
      continue;
    }
    const cv::Vec2d f = frame.At(q.fix.lat_deg, q.fix.lon_deg);
    if (q.error_m > 1) plot.Line({truth[i][0], f[0]}, {truth[i][1], f[1]}, ColourOf(q), 1.0);
    plot.Dot(truth[i][0], truth[i][1], 3.5, ColourOf(q), tip);
    if (r.spoofing && SpoofedAt(r, q.truth.timestamp_s))
      plot.Ring(truth[i][0], truth[i][1], 6, "#b08ac4");
  }
  return plot.Render();
}

std::string ErrorCdfPlot(const RouteSummary& s, const std::vector<const QueryResult*>& qs) {
  std::vector<double> e;
  for (const QueryResult* q : qs)
    if (q->error_m >= 0) e.push_back(std::max(q->error_m, 1e-3));
  std::sort(e.begin(), e.end());
  const double hi = std::max(10.0, e.empty() ? 10.0 : e.back() * 1.5);
  SvgPlot plot("cdf", "Error CDF (share of all queries)", {1e-3, hi, true, "horizontal error (m)"},
               {0, 1, false, "share of queries"});
  const double marks[] = {0.25, 0.5, 1.0, 5.0};
  for (int i = 0; i < 4; ++i)
    plot.VerticalMark(marks[i], FormatNumber("%g m", marks[i]), "#7a7a7a", i % 2);
  std::vector<double> xs{1e-3}, ys{0};
  for (size_t i = 0; i < e.size(); ++i) {
    xs.push_back(e[i]), ys.push_back(double(i) / s.queries);
    xs.push_back(e[i]), ys.push_back(double(i + 1) / s.queries);
  }
  xs.push_back(hi), ys.push_back(ys.back());
  plot.Line(xs, ys, "#1f4e9c", 2);
  plot.HorizontalMark(s.availability, FormatNumber("availability %.3f", s.availability), "#1f4e9c");
  return plot.Render();
}

std::string ErrorAlongRoutePlot(const RouteReport& r, const std::vector<const QueryResult*>& qs) {
  // Distance driven as the street segments measure it (street_segments.h).
  const StreetCut cut = CutStreetSegments(r.results, std::max(r.summary.segment_length_m, 1.0));
  std::vector<double> along;
  for (const QueryResult* q : qs) along.push_back(cut.driven_m[q - r.results.data()]);
  double hi = 10;
  for (const QueryResult* q : qs) hi = std::max(hi, q->error_m * 1.5);
  SvgPlot plot("along", "Error along the route",
               {0, std::max(1.0, along.back()), false, "distance driven (m)"},
               {1e-3, hi, true, "error (m); no fix at the bottom"}, 900, 300);
  for (size_t i = 0; i < qs.size(); ++i)
    if (SpoofedAt(r, qs[i]->truth.timestamp_s))
      plot.Band(along[i] - 2.5, along[i] + 2.5, "#ecdff2");
  for (double m : {0.25, 1.0, 5.0}) plot.HorizontalMark(m, FormatNumber("%g m", m), "#9a9a9a");
  for (size_t i = 0; i < qs.size(); ++i) {
    const QueryResult& q = *qs[i];
    if (q.fix.quality == FixQuality::kNone)
      plot.Ring(along[i], 1e-3, 3, kNoFixColour);
    else
      plot.Dot(along[i], std::max(q.error_m, 1e-3), 3, ColourOf(q),
               q.truth.image + FormatNumber(": %.3f m", q.error_m));
  }
  // The strip: each street segment from its first to its last query (at least 2 m wide).
  for (const SegmentSummary& g : r.summary.segments)
    plot.Strip(g.start_m, std::max(g.end_m, g.start_m + 2), AvailabilityColour(g.availability),
               FormatNumber("segment %.0f: ", g.index) + std::to_string(g.fixes) + " of " +
                   std::to_string(g.queries) + " queries with a fix");
  std::vector<std::pair<std::string, std::string>> legend;
  for (const AvailabilityClass& c : kAvailabilityClasses) legend.emplace_back(c.colour, c.label);
  if (!r.spoof_truth.empty()) legend.emplace_back("#ecdff2", "GNSS spoofed (truth)");
  plot.Legend(legend);
  return plot.Render();
}

const char* AvailabilityColour(double availability) {
  for (const AvailabilityClass& c : kAvailabilityClasses)
    if (availability >= c.min_availability) return c.colour;
  return std::end(kAvailabilityClasses)[-1].colour;
}

std::string ErrorAgainstBoundPlot(const std::vector<const QueryResult*>& qs) {
  double lo = 0.01, hi = 10;
  for (const QueryResult* q : qs)
    if (IsUsableFix(*q)) {
      hi = std::max({hi, q->error_m * 1.5, q->fix.radius95_m * 1.5});
      lo = std::min(lo, q->fix.radius95_m / 1.5);
    }
  SvgPlot plot("error-bound", "Error against bound", {lo, hi, true, "stated radius95 (m)"},
               {1e-3, hi, true, "actual error (m)"}, 760, 420);
  plot.Line({lo, hi}, {lo, hi}, "#7a7a7a", 1, "5 4");
  plot.Line({lo, hi}, {3 * lo, 3 * hi}, "#b3202e", 1, "2 3");
  int counts[3] = {0, 0, 0};
  const char* colours[3] = {"#1f7a4d", "#e06c1f", "#b3202e"};
  for (const QueryResult* q : qs) {
    if (!IsUsableFix(*q)) continue;
    const int k = IsMisleading(*q, kConfidentlyWrongFactor) ? 2
                  : IsMisleading(*q, kMisleadingFactor)     ? 1
                                                            : 0;
    ++counts[k];
    plot.Dot(q->fix.radius95_m, std::max(q->error_m, 1e-3), 2.6, colours[k],
             q->truth.image + FormatNumber(": error %.3f m", q->error_m) +
                 FormatNumber(", radius95 %.3f m", q->fix.radius95_m));
  }
  plot.Legend({{colours[0], "within radius95 (" + std::to_string(counts[0]) + ")"},
               {colours[1], "misleading (" + std::to_string(counts[1]) + ")"},
               {colours[2], "> 3 x radius95 (" + std::to_string(counts[2]) + ")"}});
  return plot.Render();
}

namespace {

// The horizontal alert limit most protected fixes were judged at (2 m when none).
double CommonAlertLimit(const std::vector<const QueryResult*>& qs) {
  std::vector<double> limits;
  for (const QueryResult* q : qs)
    if (IsProtected(*q)) limits.push_back(q->fix.integrity.horizontal_alert_limit_m);
  if (limits.empty()) return 2;
  std::sort(limits.begin(), limits.end());
  return limits[limits.size() / 2];
}

}  // namespace

std::string ProtectionDiagramPlot(const std::vector<const QueryResult*>& qs) {
  const double limit = CommonAlertLimit(qs);
  double lo = std::min(0.05, limit / 4), hi = std::max(20.0, 4 * limit);
  for (const QueryResult* q : qs)
    if (IsProtected(*q)) {
      hi = std::max({hi, q->error_m * 1.5, q->fix.integrity.horizontal_pl_m * 1.5});
      lo = std::min(lo, q->fix.integrity.horizontal_pl_m / 1.5);
    }
  SvgPlot plot("protection", "Error against protection level",
               {lo, hi, true, "horizontal protection level (m)"},
               {1e-3, hi, true, "actual error (m)"}, 760, 420);
  plot.Band(limit, hi, "#eeeeee");  // protection level over the alert limit: unavailable
  plot.Line({lo, hi}, {lo, hi}, "#555555", 1, "5 4");
  plot.Line({lo, hi}, {limit, limit}, "#8b1a3a", 1, "2 3");
  plot.VerticalMark(limit, FormatNumber("alert limit %g m", limit), "#8b1a3a");
  const char* colours[5] = {"#2a6f97", "#d99a1e", "#8b1a3a", "#9a9a9a", "#5c5c5c"};
  int counts[5] = {0, 0, 0, 0, 0};
  for (const QueryResult* q : qs) {
    if (!IsProtected(*q)) continue;
    const FixIntegrity& f = q->fix.integrity;
    const bool flagged =
        f.state == IntegrityState::kFaultDetected || f.state == IntegrityState::kPlaceAmbiguity;
    const int k = !f.usable()                               ? (flagged ? 4 : 3)
                  : q->error_m > f.horizontal_alert_limit_m ? 2
                  : IsMisleadingAtLevels(*q)                ? 1
                                                            : 0;
    ++counts[k];
    const double x = f.horizontal_pl_m, y = std::max(q->error_m, 1e-3);
    const std::string title = q->truth.image + FormatNumber(": error %.3f m", q->error_m) +
                              FormatNumber(", protection level %.3f m, ", x) +
                              IntegrityStateName(f.state);
    if (k == 4)
      plot.Ring(x, y, 3.2, colours[k]);
    else
      plot.Dot(x, y, 2.6, colours[k], title);
  }
  plot.Legend(
      {{colours[0], "normal operation (" + std::to_string(counts[0]) + ")"},
       {colours[1], "misleading (" + std::to_string(counts[1]) + ")"},
       {colours[2], "hazardous (" + std::to_string(counts[2]) + ")"},
       {colours[3], "not usable: over the limit (" + std::to_string(counts[3]) + ")"},
       {colours[4], "not usable: fault or rival place (" + std::to_string(counts[4]) + ")"}});
  return plot.Render();
}

std::string AvailabilityByAlertLimitPlot(const RouteSummary& s) {
  SvgPlot plot(
      "availability-limit", "Availability against alert limit",
      {0, static_cast<double>(kAlertLimitsM.size()), false, "alert limit (bars: 1, 2, 5, 10 m)"},
      {0, 1.05, false, "share of queries usable"});
  for (size_t k = 0; k < kAlertLimitsM.size(); ++k)
    plot.Bar(k + 0.15, k + 0.85, s.protection.availability[k], "#2a6f97");
  return plot.Render();
}

std::string LatencyHistogramPlot(const RouteSummary& s, const std::vector<const QueryResult*>& qs) {
  const double hi = std::max(1.0, s.latency_ms_p99 * 1.2);
  const int bins = 30;
  std::vector<int> count(bins, 0);
  for (const QueryResult* q : qs)
    ++count[std::clamp(static_cast<int>(q->latency_ms / hi * bins), 0, bins - 1)];
  const int top = std::max(1, *std::max_element(count.begin(), count.end()));
  SvgPlot plot("latency", "Latency per query", {0, hi, false, "ms (last bin holds the rest)"},
               {0, top * 1.15, false, "queries"});
  for (int b = 0; b < bins; ++b)
    if (count[b]) plot.Bar(hi * b / bins, hi * (b + 1) / bins, count[b], "#4f7cac");
  plot.VerticalMark(s.latency_ms_p50, "p50", "#333");
  plot.VerticalMark(s.latency_ms_p95, "p95", "#b3202e", 1);
  return plot.Render();
}

std::string SpoofingPlot(const RouteReport& r) {
  const std::vector<MonitorStep>& steps = r.spoofing->steps;
  if (steps.empty()) return "<p>No refined fix met a GNSS fix: nothing to monitor.</p>";
  const double t0 = steps.front().time_s, t1 = std::max(t0 + 1, steps.back().time_s);
  double top = r.monitor.threshold * 2;
  for (const MonitorStep& s : steps) top = std::max({top, s.nis * 1.5, s.cusum * 1.2});
  SvgPlot plot("spoofing", "GNSS spoofing monitor", {0, t1 - t0, false, "time since first fix (s)"},
               {0.01, top, true, "NIS and CUSUM (NIS-s)"}, 900, 300);
  for (const SpoofedSpan& s : r.spoof_truth)
    plot.Band(s.span.start_s - t0, s.span.end_s - t0, "#ecdff2");
  plot.HorizontalMark(r.monitor.reference_nis, "reference 13.8 (chi-square 2 dof, 0.999)",
                      "#9a9a9a");
  plot.HorizontalMark(r.monitor.threshold, "alarm threshold", "#b3202e");
  std::vector<double> xs, nis, g;
  for (const MonitorStep& s : steps)
    xs.push_back(s.time_s - t0), nis.push_back(std::max(s.nis, 0.01)),
        g.push_back(std::max(s.cusum, 0.01));
  for (size_t i = 0; i < xs.size(); ++i) plot.Dot(xs[i], nis[i], 2.2, "#4f7cac");
  plot.Line(xs, g, "#b3202e", 1.8);
  for (const MonitorStep& s : steps)
    if (s.alarm_raised) plot.VerticalMark(s.time_s - t0, "alarm", "#b3202e");
  plot.Legend({{"#4f7cac", "NIS"}, {"#b3202e", "CUSUM"}, {"#ecdff2", "spoofed (truth)"}});
  return plot.Render();
}

}  // namespace sightfix
