#include "client/eval/route_report.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>

#include "client/eval/svg_plot.h"
#include "indexer/base/geo.h"
#include "indexer/base/iso_time.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

constexpr char kSafety[] =
    "sightfix is a fallback aid, not a certified navigation source. Its positions must not be "
    "used as the sole means of navigation; defer to the vehicle's safety case and local "
    "regulations.";

// Error classes of the route colouring: the three pose bins' distances (Sattler et al. 2018),
// 1 m, and the 5 m bound of a wrong refined fix.
struct ErrorClass {
  double max_m;
  const char* colour;
  const char* label;
};
constexpr ErrorClass kClasses[] = {{0.25, "#1f7a4d", "<= 0.25 m"}, {0.5, "#62a83f", "<= 0.5 m"},
                                   {1.0, "#c9a227", "<= 1 m"},     {5.0, "#e06c1f", "<= 5 m"},
                                   {HUGE_VAL, "#b3202e", "> 5 m"}};
constexpr char kNoFixColour[] = "#9a9a9a";

const char* ColourOf(const QueryResult& q) {
  if (q.fix.quality == FixQuality::kNone || q.error_m < 0) return kNoFixColour;
  for (const ErrorClass& c : kClasses)
    if (q.error_m <= c.max_m) return c.colour;
  return kClasses[4].colour;
}

std::vector<const QueryResult*> InTimeOrder(const RouteReport& r) {
  std::vector<const QueryResult*> out;
  for (const QueryResult& q : r.results)
    if (q.ran) out.push_back(&q);
  std::sort(out.begin(), out.end(), [](const QueryResult* a, const QueryResult* b) {
    return a->truth.timestamp_s < b->truth.timestamp_s;
  });
  return out;
}

bool Spoofed(const RouteReport& r, double t) {
  for (const SpoofedSpan& s : r.spoof_truth)
    if (t >= s.span.start_s && t < s.span.end_s) return true;
  return false;
}

std::string Fmt(const char* format, double v) {
  char buf[64];
  std::snprintf(buf, sizeof(buf), format, v);
  return buf;
}

}  // namespace

nlohmann::json SummaryJson(const RouteReport& r) {
  const RouteSummary& s = r.summary;
  nlohmann::json spoof = {{"segments_true", 0},
                          {"segments_flagged", 0},
                          {"detection_delay_s", nullptr},
                          {"false_alarms", 0}};
  if (r.spoofing) {
    const SpoofingScore& sc = r.spoofing->score;
    spoof["segments_true"] = sc.segments_true;
    spoof["segments_flagged"] = sc.segments_flagged;
    spoof["detection_delay_s"] =
        sc.detection_delays_s.empty() ? nlohmann::json(nullptr)
                                      : nlohmann::json(Percentile(sc.detection_delays_s, 0.5));
    spoof["detection_delays_s"] = sc.detection_delays_s;
    // Per true segment (those the replay covered, in start order): rate, flagged, delay.
    nlohmann::json segs = nlohmann::json::array();
    for (size_t k = 0; k < r.spoofing->scored.size() && k < sc.segment_delay_s.size(); ++k) {
      const SpoofedSpan& t = r.spoofing->scored[k];
      const double d = sc.segment_delay_s[k];
      segs.push_back({{"start", FormatIsoUtc(t.span.start_s)},
                      {"length_s", t.span.end_s - t.span.start_s},
                      {"rate_mps", t.rate_mps},
                      {"flagged", d >= 0},
                      {"delay_s", d >= 0 ? nlohmann::json(d) : nlohmann::json(nullptr)}});
    }
    spoof["segments"] = segs;
    spoof["false_alarms"] = sc.false_alarms;
    spoof["observations"] = r.spoofing->steps.size();
    spoof["truth_known"] = !r.spoof_truth.empty();
    spoof["rule"] = {{"statistic", "NIS of GNSS minus visual fix, both covariances"},
                     {"cusum_reference_nis", r.monitor.reference_nis},
                     {"cusum_max_excess", r.monitor.max_excess},
                     {"cusum_threshold", r.monitor.threshold},
                     {"max_step_s", r.monitor.max_step_s}};
  }
  nlohmann::json j = {{"queries", s.queries},
                      {"fixes", s.fixes},
                      {"availability", s.availability},
                      {"refined", s.refined},
                      {"coarse", s.coarse},
                      {"refined_share", s.refined_share},
                      {"failed_calls", s.failed_calls},
                      {"recall_at_1_25m", s.recall_at_1},
                      {"recall_at_5_25m", s.recall_at_5},
                      {"recall_at_10_25m", s.recall_at_10},
                      {"median_error_m", s.all.median_m},
                      {"p90_error_m", s.all.p90_m},
                      {"p95_error_m", s.all.p95_m},
                      {"max_error_m", s.all.max_m},
                      {"wrong_refined", s.wrong_refined},
                      {"median_heading_error_deg", s.all.median_heading_deg},
                      {"within_0_25m_2deg", s.within_0_25m_2deg},
                      {"within_0_5m_5deg", s.within_0_5m_5deg},
                      {"within_5m_10deg", s.within_5m_10deg},
                      {"radius95_coverage", s.all.radius95_coverage},
                      {"nees_mean", s.all.nees_mean},
                      {"refined_only",
                       {{"fixes", s.refined},
                        {"median_error_m", s.median_error_m},
                        {"p90_error_m", s.p90_error_m},
                        {"p95_error_m", s.p95_error_m},
                        {"max_error_m", s.max_error_m},
                        {"median_heading_error_deg", s.median_heading_error_deg},
                        {"radius95_coverage", s.radius95_coverage},
                        {"nees_mean", s.nees_mean}}},
                      {"latency_ms_p50", s.latency_ms_p50},
                      {"latency_ms_p95", s.latency_ms_p95},
                      {"latency_ms_p99", s.latency_ms_p99},
                      {"spoofing", spoof},
                      {"map_version", r.map_version},
                      {"model_id", r.model_id},
                      {"partial", r.partial},
                      {"drive", r.drive_dir},
                      {"source", r.source},
                      {"prior", r.prior},
                      {"seed", r.seed}};
  return j;
}

std::string FixesCsv(const RouteReport& r) {
  std::ostringstream out;
  out << "image,timestamp,true_lat,true_lon,true_heading_deg,quality,method,lat,lon,heading_deg,"
         "error_m,heading_error_deg,radius95_m,nees,references,verified_references,"
         "first_hit_rank,pnp_inliers,prior_lat,prior_lon,prior_radius_m,outside_prior,"
         "retried_without_prior,spoofed,latency_ms,reason\n";
  char buf[1024];
  for (const QueryResult* q : InTimeOrder(r)) {
    const Fix& f = q->fix;
    int verified = 0;
    for (const ReferenceUse& u : f.references) verified += u.verified;
    const bool has_fix = f.quality != FixQuality::kNone;
    std::string reason = q->error.empty() ? f.reason : q->error;
    std::replace(reason.begin(), reason.end(), ',', ';');
    std::replace(reason.begin(), reason.end(), '\n', ' ');
    std::snprintf(
        buf, sizeof(buf),
        "%s,%s,%.9f,%.9f,%.2f,%s,%s,%s,%s,%s,%s,%s,%s,%s,%zu,%d,%d,%d,%s,%s,%s,%d,%d,%d,%.1f,%s\n",
        q->truth.image.c_str(), FormatIsoUtc(q->truth.timestamp_s).c_str(),
        q->truth.position.lat_deg, q->truth.position.lon_deg, q->truth.attitude.heading_deg,
        q->error.empty() ? FixQualityName(f.quality) : "error", f.method.c_str(),
        has_fix ? Fmt("%.9f", f.lat_deg).c_str() : "", has_fix ? Fmt("%.9f", f.lon_deg).c_str() : "",
        has_fix ? Fmt("%.2f", f.heading_deg).c_str() : "",
        has_fix ? Fmt("%.4f", q->error_m).c_str() : "",
        has_fix ? Fmt("%.3f", q->heading_error_deg).c_str() : "",
        has_fix ? Fmt("%.4f", f.radius95_m).c_str() : "",
        q->nees >= 0 ? Fmt("%.3f", q->nees).c_str() : "", f.references.size(), verified,
        q->first_hit_rank, f.pnp_inliers, q->prior ? Fmt("%.9f", q->prior->lat_deg).c_str() : "",
        q->prior ? Fmt("%.9f", q->prior->lon_deg).c_str() : "",
        q->prior ? Fmt("%.2f", q->prior->radius_m).c_str() : "", f.outside_prior ? 1 : 0,
        q->retried_without_prior ? 1 : 0, Spoofed(r, q->truth.timestamp_s) ? 1 : 0, q->latency_ms,
        reason.c_str());
    out << buf;
  }
  return out.str();
}

nlohmann::json RouteGeoJson(const RouteReport& r) {
  const std::vector<const QueryResult*> qs = InTimeOrder(r);
  nlohmann::json features = nlohmann::json::array();
  nlohmann::json track = nlohmann::json::array();
  for (const QueryResult* q : qs) track.push_back({q->truth.position.lon_deg, q->truth.position.lat_deg});
  features.push_back({{"type", "Feature"},
                      {"geometry", {{"type", "LineString"}, {"coordinates", track}}},
                      {"properties", {{"kind", "truth_track"}}}});
  for (const QueryResult* q : qs) {
    if (q->fix.quality == FixQuality::kNone) continue;
    const nlohmann::json fix_pt = {q->fix.lon_deg, q->fix.lat_deg};
    features.push_back({{"type", "Feature"},
                        {"geometry", {{"type", "Point"}, {"coordinates", fix_pt}}},
                        {"properties",
                         {{"kind", "fix"},
                          {"image", q->truth.image},
                          {"time", FormatIsoUtc(q->truth.timestamp_s)},
                          {"quality", FixQualityName(q->fix.quality)},
                          {"error_m", q->error_m},
                          {"radius95_m", q->fix.radius95_m},
                          {"colour", ColourOf(*q)}}}});
    features.push_back(
        {{"type", "Feature"},
         {"geometry",
          {{"type", "LineString"},
           {"coordinates",
            {{q->truth.position.lon_deg, q->truth.position.lat_deg}, fix_pt}}}},
         {"properties", {{"kind", "error_segment"}, {"image", q->truth.image}, {"error_m", q->error_m}}}});
  }
  if (r.spoofing)
    for (const MonitorStep& s : r.spoofing->steps) {
      if (!s.alarm_raised) continue;
      // Where the vehicle truly was when the alarm was raised (the query of that time).
      for (const QueryResult* q : qs)
        if (q->truth.timestamp_s == s.time_s)
          features.push_back(
              {{"type", "Feature"},
               {"geometry",
                {{"type", "Point"},
                 {"coordinates", {q->truth.position.lon_deg, q->truth.position.lat_deg}}}},
               {"properties",
                {{"kind", "spoofing_alarm"},
                 {"time", FormatIsoUtc(s.time_s)},
                 {"nis", s.nis},
                 {"cusum", s.cusum},
                 {"during_true_spoofing", Spoofed(r, s.time_s)}}}});
    }
  return {{"type", "FeatureCollection"}, {"features", features}};
}

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

std::string RouteMap(const RouteReport& r, const std::vector<const QueryResult*>& qs) {
  MapFrame frame(qs.front()->truth.position);
  std::vector<cv::Vec2d> truth, refs;
  for (const QueryResult* q : qs) {
    truth.push_back(frame.At(q->truth.position.lat_deg, q->truth.position.lon_deg));
    for (const ReferenceUse& u : q->fix.references) refs.push_back(frame.At(u.lat_deg, u.lon_deg));
  }
  double x0 = HUGE_VAL, x1 = -HUGE_VAL, y0 = HUGE_VAL, y1 = -HUGE_VAL;
  for (const cv::Vec2d& p : truth)
    x0 = std::min(x0, p[0]), x1 = std::max(x1, p[0]), y0 = std::min(y0, p[1]), y1 = std::max(y1, p[1]);
  // Equal scale on both axes, 40 m of margin.
  const double span = std::max({x1 - x0, y1 - y0, 50.0}) + 80, cx = (x0 + x1) / 2, cy = (y0 + y1) / 2;
  SvgPlot plot("route", "Route, coloured by error", {cx - span / 2, cx + span / 2, false, "east (m)"},
               {cy - span / 2, cy + span / 2, false, "north (m)"}, 620, 620);
  std::vector<std::pair<std::string, std::string>> legend;
  for (const ErrorClass& c : kClasses) legend.emplace_back(c.colour, c.label);
  legend.emplace_back(kNoFixColour, "no fix");
  plot.Legend(legend);
  for (const cv::Vec2d& p : refs) plot.Dot(p[0], p[1], 1.6, "#b9c3cf");  // survey images retrieved
  std::vector<double> xs, ys;
  for (const cv::Vec2d& p : truth) xs.push_back(p[0]), ys.push_back(p[1]);
  plot.Line(xs, ys, "#33415c", 1.2);
  for (size_t i = 0; i < qs.size(); ++i) {
    const QueryResult& q = *qs[i];
    const std::string tip = q.truth.image + ": " + FixQualityName(q.fix.quality) +
                            (q.error_m >= 0 ? ", error " + Fmt("%.3f m", q.error_m) : "");
    if (q.fix.quality == FixQuality::kNone) {
      plot.Ring(truth[i][0], truth[i][1], 3.5, kNoFixColour);
      continue;
    }
    const cv::Vec2d f = frame.At(q.fix.lat_deg, q.fix.lon_deg);
    if (q.error_m > 1) plot.Line({truth[i][0], f[0]}, {truth[i][1], f[1]}, ColourOf(q), 1.0);
    plot.Dot(truth[i][0], truth[i][1], 3.5, ColourOf(q), tip);
    if (r.spoofing && Spoofed(r, q.truth.timestamp_s)) plot.Ring(truth[i][0], truth[i][1], 6, "#b08ac4");
  }
  return plot.Render();
}

std::string ErrorCdf(const RouteSummary& s, const std::vector<const QueryResult*>& qs) {
  std::vector<double> e;
  for (const QueryResult* q : qs)
    if (q->error_m >= 0) e.push_back(std::max(q->error_m, 1e-3));
  std::sort(e.begin(), e.end());
  const double hi = std::max(10.0, e.empty() ? 10.0 : e.back() * 1.5);
  SvgPlot plot("cdf", "Error CDF (share of all queries)", {1e-3, hi, true, "horizontal error (m)"},
               {0, 1, false, "share of queries"});
  const double marks[] = {0.25, 0.5, 1.0, 5.0};
  for (int i = 0; i < 4; ++i) plot.VerticalMark(marks[i], Fmt("%g m", marks[i]), "#7a7a7a", i % 2);
  std::vector<double> xs{1e-3}, ys{0};
  for (size_t i = 0; i < e.size(); ++i) {
    xs.push_back(e[i]), ys.push_back(double(i) / s.queries);
    xs.push_back(e[i]), ys.push_back(double(i + 1) / s.queries);
  }
  xs.push_back(hi), ys.push_back(ys.back());
  plot.Line(xs, ys, "#1f4e9c", 2);
  plot.HorizontalMark(s.availability, Fmt("availability %.3f", s.availability), "#1f4e9c");
  return plot.Render();
}

std::string ErrorAlongRoute(const RouteReport& r, const std::vector<const QueryResult*>& qs) {
  std::vector<double> along{0};
  for (size_t i = 1; i < qs.size(); ++i)
    along.push_back(along.back() + GeodesicBetween(qs[i - 1]->truth.position.lat_deg,
                                                   qs[i - 1]->truth.position.lon_deg,
                                                   qs[i]->truth.position.lat_deg,
                                                   qs[i]->truth.position.lon_deg)
                                       .distance_m);
  double hi = 10;
  for (const QueryResult* q : qs) hi = std::max(hi, q->error_m * 1.5);
  SvgPlot plot("along", "Error along the route", {0, std::max(1.0, along.back()), false, "distance driven (m)"},
               {1e-3, hi, true, "error (m); no fix at the bottom"}, 900, 300);
  for (size_t i = 0; i < qs.size(); ++i)
    if (Spoofed(r, qs[i]->truth.timestamp_s))
      plot.Band(along[i] - 2.5, along[i] + 2.5, "#ecdff2");
  for (double m : {0.25, 1.0, 5.0}) plot.HorizontalMark(m, Fmt("%g m", m), "#9a9a9a");
  for (size_t i = 0; i < qs.size(); ++i) {
    const QueryResult& q = *qs[i];
    if (q.fix.quality == FixQuality::kNone)
      plot.Ring(along[i], 1e-3, 3, kNoFixColour);
    else
      plot.Dot(along[i], std::max(q.error_m, 1e-3), 3, ColourOf(q),
               q.truth.image + Fmt(": %.3f m", q.error_m));
  }
  if (!r.spoof_truth.empty()) plot.Legend({{"#ecdff2", "GNSS spoofed (truth)"}});
  return plot.Render();
}

std::string Calibration(const std::vector<const QueryResult*>& qs) {
  double lo = 0.01, hi = 10;
  for (const QueryResult* q : qs)
    if (q->error_m >= 0) hi = std::max({hi, q->error_m * 1.5, q->fix.radius95_m * 1.5});
  SvgPlot plot("calibration", "Reported radius95 vs actual error", {lo, hi, true, "radius95 (m)"},
               {1e-3, hi, true, "actual error (m)"}, 560, 400);
  plot.Line({lo, hi}, {lo, hi}, "#7a7a7a", 1, "5 4");
  for (const QueryResult* q : qs)
    if (q->error_m >= 0)
      plot.Dot(q->fix.radius95_m, std::max(q->error_m, 1e-3), 2.6, ColourOf(*q), q->truth.image);
  plot.Legend({{"#7a7a7a", "error = radius95: 95 % of dots belong below"}});
  return plot.Render();
}

std::string LatencyHistogram(const RouteSummary& s, const std::vector<const QueryResult*>& qs) {
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
  for (const SpoofedSpan& s : r.spoof_truth) plot.Band(s.span.start_s - t0, s.span.end_s - t0, "#ecdff2");
  plot.HorizontalMark(r.monitor.reference_nis, "reference 13.8 (chi-square 2 dof, 0.999)", "#9a9a9a");
  plot.HorizontalMark(r.monitor.threshold, "alarm threshold", "#b3202e");
  std::vector<double> xs, nis, g;
  for (const MonitorStep& s : steps)
    xs.push_back(s.time_s - t0), nis.push_back(std::max(s.nis, 0.01)), g.push_back(std::max(s.cusum, 0.01));
  for (size_t i = 0; i < xs.size(); ++i) plot.Dot(xs[i], nis[i], 2.2, "#4f7cac");
  plot.Line(xs, g, "#b3202e", 1.8);
  for (const MonitorStep& s : steps)
    if (s.alarm_raised) plot.VerticalMark(s.time_s - t0, "alarm", "#b3202e");
  plot.Legend({{"#4f7cac", "NIS"}, {"#b3202e", "CUSUM"}, {"#ecdff2", "spoofed (truth)"}});
  return plot.Render();
}

std::string Row(const std::string& name, const std::string& value, const std::string& note = "") {
  return "<tr><th>" + EscapeXml(name) + "</th><td>" + EscapeXml(value) + "</td><td>" +
         EscapeXml(note) + "</td></tr>\n";
}

std::string SummaryTable(const RouteReport& r) {
  const RouteSummary& s = r.summary;
  std::string t = "<table class=\"summary\"><tr><th>metric</th><th>value</th><th>note</th></tr>\n";
  t += Row("queries", std::to_string(s.queries), r.partial ? "partial: interrupted" : "");
  t += Row("availability", Fmt("%.3f", s.availability),
           std::to_string(s.refined) + " refined, " + std::to_string(s.coarse) + " coarse, " +
               std::to_string(s.none) + " none");
  t += Row("recall@1 / 5 / 10 (25 m)", Fmt("%.3f", s.recall_at_1) + " / " + Fmt("%.3f", s.recall_at_5) +
                                            " / " + Fmt("%.3f", s.recall_at_10),
           "Arandjelovic et al. 2016");
  t += Row("error median / p90 / p95 / max (m)",
           Fmt("%.3f", s.all.median_m) + " / " + Fmt("%.3f", s.all.p90_m) + " / " +
               Fmt("%.3f", s.all.p95_m) + " / " + Fmt("%.3f", s.all.max_m),
           "all fixes");
  t += Row("refined error median / p95 (m)",
           Fmt("%.3f", s.median_error_m) + " / " + Fmt("%.3f", s.p95_error_m), "refined fixes");
  t += Row("wrong refined (> 5 m)", std::to_string(s.wrong_refined), "must be 0");
  t += Row("heading error median (deg)", Fmt("%.2f", s.all.median_heading_deg));
  t += Row("(0.25 m, 2 deg) / (0.5 m, 5 deg) / (5 m, 10 deg)",
           Fmt("%.3f", s.within_0_25m_2deg) + " / " + Fmt("%.3f", s.within_0_5m_5deg) + " / " +
               Fmt("%.3f", s.within_5m_10deg),
           "share of queries; Sattler et al. 2018");
  t += Row("radius95 coverage", Fmt("%.3f", s.all.radius95_coverage), "about 0.95 when calibrated");
  t += Row("NEES mean", Fmt("%.2f", s.all.nees_mean), "about 2 when calibrated (2 dof)");
  t += Row("latency p50 / p95 / p99 (ms)",
           Fmt("%.0f", s.latency_ms_p50) + " / " + Fmt("%.0f", s.latency_ms_p95) + " / " +
               Fmt("%.0f", s.latency_ms_p99));
  if (r.spoofing) {
    const SpoofingScore& sc = r.spoofing->score;
    t += Row("spoofed segments flagged", std::to_string(sc.segments_flagged) + " of " +
                                             std::to_string(sc.segments_true),
             sc.detection_delays_s.empty()
                 ? ""
                 : "median delay " + Fmt("%.1f s", Percentile(sc.detection_delays_s, 0.5)));
    t += Row("spoofing false alarms", std::to_string(sc.false_alarms));
  }
  return t + "</table>\n";
}

constexpr char kStyle[] = R"(
body { font-family: sans-serif; margin: 24px; color: #1d1d1b; background: #fff; max-width: 1000px; }
h1 { font-size: 22px; margin-bottom: 4px; }
.meta { color: #555; font-size: 13px; }
.caution { border: 2px solid #b3202e; background: #fbeeee; padding: 10px 14px; margin: 14px 0; }
.partial { border: 2px solid #c9a227; background: #fbf6e6; padding: 8px 14px; }
table.summary { border-collapse: collapse; font-size: 13px; margin: 10px 0 20px; }
table.summary th, table.summary td { border: 1px solid #ccc; padding: 4px 8px; text-align: left; }
svg.plot { display: block; margin: 10px 0 22px; font-family: sans-serif; }
.caption { font-size: 12px; color: #555; margin-top: -16px; margin-bottom: 18px; }
)";

}  // namespace

std::string ReportHtml(const RouteReport& r) {
  const std::vector<const QueryResult*> qs = InTimeOrder(r);
  std::string h = "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
                  "<title>sightfix replay report</title><style>" +
                  std::string(kStyle) + "</style></head><body data-check=\"pending\">\n";
  h += "<h1>sightfix replay: " + EscapeXml(fs::path(r.drive_dir).filename().string()) + "</h1>\n";
  h += "<div class=\"meta\">drive " + EscapeXml(r.drive_dir) + " &middot; " + EscapeXml(r.source) +
       " &middot; map version " + std::to_string(r.map_version) + " &middot; prior " +
       EscapeXml(r.prior) + " &middot; seed " + std::to_string(r.seed) + "</div>\n";
  h += "<div class=\"caution\"><b>Caution.</b> " + std::string(kSafety) + "</div>\n";
  if (r.partial) h += "<div class=\"partial\">Partial replay: interrupted before every query ran.</div>\n";
  h += SummaryTable(r);
  if (qs.empty()) return h + "<p>No query ran.</p></body></html>\n";
  h += RouteMap(r, qs);
  h += "<div class=\"caption\">Dots: true positions of the queries, coloured by the error of "
       "their fix (grey rings: no fix; thin lines: the error, drawn when over 1 m; purple rings: "
       "the GNSS was spoofed then). Pale dots: survey images the retrieval returned.</div>\n";
  h += ErrorCdf(r.summary, qs);
  h += ErrorAlongRoute(r, qs);
  h += Calibration(qs);
  h += LatencyHistogram(r.summary, qs);
  if (r.spoofing) h += SpoofingPlot(r);
  // The page checks itself: headless tests read data-check from the DOM.
  h += "<script>\n"
       "window.addEventListener('error', function () { document.body.dataset.check = 'error'; });\n"
       "document.body.dataset.check = 'ok ' + document.querySelectorAll('svg.plot').length + ' plots';\n"
       "</script>\n</body></html>\n";
  return h;
}

Status WriteRouteReport(const RouteReport& r, const std::string& out_dir) {
  std::error_code ec;
  fs::create_directories(out_dir, ec);
  if (ec) return Status::IoError("cannot create " + out_dir + ": " + ec.message());
  const std::pair<const char*, std::string> files[] = {
      {"summary.json", SummaryJson(r).dump(2) + "\n"},
      {"fixes.csv", FixesCsv(r)},
      {"route.geojson", RouteGeoJson(r).dump() + "\n"},
      {"report.html", ReportHtml(r)}};
  for (const auto& [name, text] : files) {
    const fs::path path = fs::path(out_dir) / name, tmp = path.string() + ".tmp";
    {
      std::ofstream out(tmp, std::ios::binary | std::ios::trunc);
      out << text;
      if (!out.flush()) return Status::IoError("cannot write " + tmp.string());
    }
    fs::rename(tmp, path, ec);
    if (ec) return Status::IoError("cannot rename " + tmp.string() + ": " + ec.message());
  }
  return Status::Ok();
}

namespace {

void Flatten(const nlohmann::json& j, const std::string& prefix,
             std::map<std::string, nlohmann::json>* out) {
  for (auto it = j.begin(); it != j.end(); ++it) {
    const std::string key = prefix.empty() ? it.key() : prefix + "." + it.key();
    if (it->is_object())
      Flatten(*it, key, out);
    else if (!it->is_array())
      (*out)[key] = *it;
  }
}

std::string Cell(const nlohmann::json* v) {
  if (!v || v->is_null()) return "-";
  if (v->is_boolean()) return v->get<bool>() ? "true" : "false";
  if (v->is_number_integer() || v->is_number_unsigned()) return std::to_string(v->get<long long>());
  if (v->is_number()) return Fmt("%.4f", v->get<double>());
  return v->get<std::string>();
}

}  // namespace

std::string CompareSummaries(const nlohmann::json& a, const nlohmann::json& b,
                             const std::string& name_a, const std::string& name_b) {
  std::map<std::string, nlohmann::json> fa, fb;
  Flatten(a, "", &fa);
  Flatten(b, "", &fb);
  std::map<std::string, int> keys;
  for (const auto& [k, v] : fa) keys[k];
  for (const auto& [k, v] : fb) keys[k];
  char line[512];
  std::string out;
  std::snprintf(line, sizeof(line), "%-36s %16s %16s %12s\n", "metric", name_a.substr(0, 16).c_str(),
                name_b.substr(0, 16).c_str(), "B - A");
  out += line;
  for (const auto& [k, unused] : keys) {
    const nlohmann::json* va = fa.count(k) ? &fa[k] : nullptr;
    const nlohmann::json* vb = fb.count(k) ? &fb[k] : nullptr;
    std::string delta;
    if (va && vb && va->is_number() && vb->is_number() && !va->is_boolean())
      delta = Fmt("%+.4f", vb->get<double>() - va->get<double>());
    std::snprintf(line, sizeof(line), "%-36s %16s %16s %12s\n", k.c_str(), Cell(va).c_str(),
                  Cell(vb).c_str(), delta.c_str());
    out += line;
  }
  return out;
}

}  // namespace sightfix
