#include "client/eval/route_report.h"

#include <algorithm>
#include <array>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <map>
#include <optional>
#include <sstream>

#include "client/eval/integrity.h"
#include "client/eval/protection_evidence.h"
#include "client/eval/route_view.h"
#include "client/eval/street_segments.h"
#include "indexer/base/iso_time.h"

namespace sightfix {

namespace fs = std::filesystem;

namespace {

// Per true segment the replay covered, in start order: start, length, rate, flagged, delay.
nlohmann::json SpoofedSegmentsJson(const SpoofingRun& run) {
  nlohmann::json segs = nlohmann::json::array();
  const SpoofingScore& sc = run.score;
  for (size_t k = 0; k < run.scored.size() && k < sc.segment_delay_s.size(); ++k) {
    const SpoofedSpan& t = run.scored[k];
    const double d = sc.segment_delay_s[k];
    segs.push_back({{"start", FormatIsoUtc(t.span.start_s)},
                    {"length_s", t.span.end_s - t.span.start_s},
                    {"rate_mps", t.rate_mps},
                    {"flagged", d >= 0},
                    {"delay_s", d >= 0 ? nlohmann::json(d) : nlohmann::json(nullptr)}});
  }
  return segs;
}

// summary.json's "spoofing": zeros when the stream was not monitored.
nlohmann::json SpoofingJson(const RouteReport& r) {
  nlohmann::json spoof = {{"segments_true", 0},
                          {"segments_flagged", 0},
                          {"detection_delay_s", nullptr},
                          {"false_alarms", 0}};
  if (!r.spoofing) return spoof;
  const SpoofingScore& sc = r.spoofing->score;
  spoof["segments_true"] = sc.segments_true;
  spoof["segments_flagged"] = sc.segments_flagged;
  spoof["detection_delay_s"] = sc.detection_delays_s.empty()
                                   ? nlohmann::json(nullptr)
                                   : nlohmann::json(Percentile(sc.detection_delays_s, 0.5));
  spoof["detection_delays_s"] = sc.detection_delays_s;
  spoof["segments"] = SpoofedSegmentsJson(*r.spoofing);
  spoof["false_alarms"] = sc.false_alarms;
  spoof["observations"] = r.spoofing->steps.size();
  spoof["truth_known"] = !r.spoof_truth.empty();
  spoof["rule"] = {{"statistic", "NIS of GNSS minus visual fix, both covariances"},
                   {"cusum_reference_nis", r.monitor.reference_nis},
                   {"cusum_max_excess", r.monitor.max_excess},
                   {"cusum_threshold", r.monitor.threshold},
                   {"max_step_s", r.monitor.max_step_s}};
  return spoof;
}

// A 95 % interval under `key` as [low, high] (null when its figure has no data) and its method
// beside it under key + "_method": "seg", "W" or "CP" (route_eval.h IntervalTag), null with it.
void PutInterval(const std::string& key, const std::optional<Interval>& ci, nlohmann::json* j) {
  (*j)[key] = ci ? nlohmann::json::array({ci->low, ci->high}) : nlohmann::json(nullptr);
  (*j)[key + "_method"] = ci ? nlohmann::json(IntervalTag(*ci)) : nlohmann::json(nullptr);
}

nlohmann::json RefinedOnlyJson(const RouteSummary& s) {
  nlohmann::json j = {{"fixes", s.refined},
                      {"median_error_m", s.median_error_m},
                      {"p90_error_m", s.p90_error_m},
                      {"p95_error_m", s.p95_error_m},
                      {"max_error_m", s.max_error_m},
                      {"median_heading_error_deg", s.median_heading_error_deg},
                      {"radius95_coverage", s.radius95_coverage},
                      {"nees_mean", s.nees_mean},
                      {"median_abs_along_track_m", s.median_abs_along_track_m},
                      {"median_abs_cross_track_m", s.median_abs_cross_track_m}};
  PutInterval("median_abs_along_track_m_ci95", s.median_abs_along_track_m_ci95, &j);
  PutInterval("median_abs_cross_track_m_ci95", s.median_abs_cross_track_m_ci95, &j);
  PutInterval("median_error_m_ci95", s.median_error_m_ci95, &j);
  PutInterval("p95_error_m_ci95", s.p95_error_m_ci95, &j);
  PutInterval("radius95_coverage_ci95", s.radius95_coverage_ci95, &j);
  return j;
}

// Per funnel stage (FunnelStageName): queries, share of queries and its interval.
nlohmann::json FunnelJson(const FunnelCounts& f) {
  nlohmann::json j = nlohmann::json::object();
  for (int k = 0; k < kFunnelStageCount; ++k) {
    nlohmann::json stage = {{"queries", f.count[k]}, {"share", f.share[k]}};
    PutInterval("share_ci95", f.share_ci95[k], &stage);
    j[FunnelStageName(static_cast<FunnelStage>(k))] = stage;
  }
  return j;
}

// The 95 % intervals of the top-level figures, under each figure's key + "_ci95".
void AddIntervals(const RouteSummary& s, nlohmann::json* j) {
  PutInterval("refined_share_ci95", s.refined_share_ci95, j);
  PutInterval("availability_ci95", s.availability_ci95, j);
  PutInterval("recall_at_1_25m_ci95", s.recall_at_1_ci95, j);
  PutInterval("recall_at_5_25m_ci95", s.recall_at_5_ci95, j);
  PutInterval("recall_at_10_25m_ci95", s.recall_at_10_ci95, j);
  PutInterval("wrong_refined_share_ci95", s.wrong_refined_share_ci95, j);
  for (size_t k = 0; k < s.pose_bin_ci95.size(); ++k)
    PutInterval(std::string(kPoseBins[k].summary_key) + "_ci95", s.pose_bin_ci95[k], j);
  PutInterval("median_error_m_ci95", s.all.median_m_ci95, j);
  PutInterval("p95_error_m_ci95", s.all.p95_m_ci95, j);
  PutInterval("radius95_coverage_ci95", s.all.radius95_coverage_ci95, j);
  PutInterval("median_abs_along_track_m_ci95", s.all.median_abs_along_m_ci95, j);
  PutInterval("median_abs_cross_track_m_ci95", s.all.median_abs_cross_m_ci95, j);
}

// One bound's integrity counts (route_eval.h IntegrityCounts).
nlohmann::json IntegrityJson(const IntegrityCounts& c) {
  nlohmann::json j = {
      {"bound_factor", c.bound_factor},
      {"usable_fixes", c.usable_fixes},
      {"misleading_fixes", c.misleading_fixes},
      {"fix_share", c.fix_share},
      {"episodes", c.episodes},
      {"longest_episode", c.longest_episode},
      {"segments", c.segments},
      {"misleading_segments", c.misleading_segments},
      {"segment_share_upper95", c.segment_share_upper95 ? nlohmann::json(*c.segment_share_upper95)
                                                        : nlohmann::json(nullptr)}};
  PutInterval("fix_share_ci95", c.fix_share_ci95, &j);
  return j;
}

// "street_segments": the cut's length and count, and one object per segment in driving order.
nlohmann::json SegmentsJson(const RouteSummary& s) {
  nlohmann::json rows = nlohmann::json::array();
  for (const SegmentSummary& g : s.segments)
    rows.push_back(
        {{"index", g.index},
         {"start_m", g.start_m},
         {"end_m", g.end_m},
         {"queries", g.queries},
         {"fixes", g.fixes},
         {"refined", g.refined},
         {"availability", g.availability},
         {"refined_share", g.refined_share},
         {"median_error_m", g.fixes ? nlohmann::json(g.median_error_m) : nlohmann::json(nullptr)},
         {"misleading", g.misleading}});
  return {{"length_m", s.segment_length_m}, {"count", s.segments.size()}, {"segments", rows}};
}

}  // namespace

nlohmann::json ProtectionJson(const ProtectionEvidence& e, const std::string& drive_dir) {
  const std::optional<bool> held_out = OverboundHeldOut(e, drive_dir);
  nlohmann::json availability;
  for (size_t k = 0; k < kAlertLimitsM.size(); ++k)
    availability[FormatNumber("%g", kAlertLimitsM[k]) + "m"] = e.availability[k];
  return {
      {"protected_fixes", e.protected_fixes},
      {"usable", e.usable},
      {"misleading", e.misleading},
      {"hazardous", e.hazardous},
      {"episodes", e.episodes},
      {"longest_unflagged_s", e.longest_unflagged_s},
      {"segments", e.segments},
      {"misleading_segments", e.misleading_segments},
      {"segment_share_upper95", e.segment_share_upper95 ? nlohmann::json(*e.segment_share_upper95)
                                                        : nlohmann::json(nullptr)},
      {"false_alerts", e.false_alerts},
      {"within_levels", e.within_levels},
      {"availability_by_alert_limit", availability},
      {"alert_limit_checked_m", e.checked_at_m},
      {"overbound_scale", e.overbound_scale},
      {"overbound_drive",
       e.overbound_drive.empty() ? nlohmann::json(nullptr) : nlohmann::json(e.overbound_drive)},
      {"overbound_held_out", held_out ? nlohmann::json(*held_out) : nlohmann::json(nullptr)}};
}

nlohmann::json SummaryJson(const RouteReport& r) {
  const RouteSummary& s = r.summary;
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
                      {"wrong_refined_share", s.wrong_refined_share},
                      {"median_abs_along_track_m", s.all.median_abs_along_m},
                      {"median_abs_cross_track_m", s.all.median_abs_cross_m},
                      {"median_heading_error_deg", s.all.median_heading_deg},
                      {"radius95_coverage", s.all.radius95_coverage},
                      {"nees_mean", s.all.nees_mean},
                      {"refined_only", RefinedOnlyJson(s)},
                      {"funnel", FunnelJson(s.funnel)},
                      {"integrity",
                       {{"misleading", IntegrityJson(s.misleading)},
                        {"confidently_wrong", IntegrityJson(s.confidently_wrong)},
                        {"protection", ProtectionJson(s.protection, r.drive_dir)}}},
                      {"street_segments", SegmentsJson(s)},
                      {"latency_ms_p50", s.latency_ms_p50},
                      {"latency_ms_p95", s.latency_ms_p95},
                      {"latency_ms_p99", s.latency_ms_p99},
                      {"spoofing", SpoofingJson(r)},
                      {"map_version", r.map_version},
                      {"model_id", r.model_id},
                      {"partial", r.partial},
                      {"drive", r.drive_dir},
                      {"source", r.source},
                      {"prior", r.prior},
                      {"seed", r.seed}};
  const std::array<double, 3> shares = PoseBinShares(s);
  for (size_t k = 0; k < shares.size(); ++k) j[kPoseBins[k].summary_key] = shares[k];
  AddIntervals(s, &j);
  return j;
}

StreetCut ReportCut(const RouteReport& r) {
  return CutStreetSegments(r.results, r.summary.segment_length_m > 0
                                          ? r.summary.segment_length_m
                                          : SummaryOptions{}.segment_length_m);
}

std::string FixesCsv(const RouteReport& r) {
  std::ostringstream out;
  out << "image,timestamp,true_lat,true_lon,true_heading_deg,quality,method,lat,lon,heading_deg,"
         "error_m,heading_error_deg,radius95_m,nees,references,verified_references,"
         "first_hit_rank,pnp_inliers,prior_lat,prior_lon,prior_radius_m,outside_prior,"
         "retried_without_prior,spoofed,latency_ms,along_track_m,cross_track_m,segment,driven_m,"
         "misleading,hpl_m,lateral_pl_m,longitudinal_pl_m,integrity,stage,reason\n";
  char buf[1024];
  const StreetCut cut = ReportCut(r);
  for (size_t i : cut.order) {
    const QueryResult* q = &r.results[i];
    // misleading: 0 within radius95, 1 beyond it, 3 beyond 3 x radius95; empty: not usable.
    const char* misleading = !IsUsableFix(*q)                            ? ""
                             : IsMisleading(*q, kConfidentlyWrongFactor) ? "3"
                             : IsMisleading(*q, kMisleadingFactor)       ? "1"
                                                                         : "0";
    const Fix& f = q->fix;
    int verified = 0;
    for (const ReferenceUse& u : f.references) verified += u.verified;
    const bool has_fix = f.quality != FixQuality::kNone;
    const bool has_levels = f.integrity.state != IntegrityState::kUnavailable;
    std::string reason = q->error.empty() ? f.reason : q->error;
    std::replace(reason.begin(), reason.end(), ',', ';');
    std::replace(reason.begin(), reason.end(), '\n', ' ');
    std::snprintf(
        buf, sizeof(buf),
        "%s,%s,%.9f,%.9f,%.2f,%s,%s,%s,%s,%s,%s,%s,%s,%s,%zu,%d,%d,%d,%s,%s,%s,%d,%d,%d,%.1f,%s,"
        "%s,%d,%.1f,%s,%s,%s,%s,%s,%s,%s\n",
        q->truth.image.c_str(), FormatIsoUtc(q->truth.timestamp_s).c_str(),
        q->truth.position.lat_deg, q->truth.position.lon_deg, q->truth.attitude.heading_deg,
        q->error.empty() ? FixQualityName(f.quality) : "error", f.method.c_str(),
        has_fix ? FormatNumber("%.9f", f.lat_deg).c_str() : "",
        has_fix ? FormatNumber("%.9f", f.lon_deg).c_str() : "",
        has_fix ? FormatNumber("%.2f", f.heading_deg).c_str() : "",
        has_fix ? FormatNumber("%.4f", q->error_m).c_str() : "",
        has_fix ? FormatNumber("%.3f", q->heading_error_deg).c_str() : "",
        has_fix ? FormatNumber("%.4f", f.radius95_m).c_str() : "",
        q->nees >= 0 ? FormatNumber("%.3f", q->nees).c_str() : "", f.references.size(), verified,
        q->first_hit_rank, f.pnp_inliers,
        q->prior ? FormatNumber("%.9f", q->prior->lat_deg).c_str() : "",
        q->prior ? FormatNumber("%.9f", q->prior->lon_deg).c_str() : "",
        q->prior ? FormatNumber("%.2f", q->prior->radius_m).c_str() : "", f.outside_prior ? 1 : 0,
        q->retried_without_prior ? 1 : 0, SpoofedAt(r, q->truth.timestamp_s) ? 1 : 0, q->latency_ms,
        has_fix ? FormatNumber("%.4f", q->along_track_m).c_str() : "",
        has_fix ? FormatNumber("%.4f", q->cross_track_m).c_str() : "", cut.segment[i],
        cut.driven_m[i], misleading,
        has_levels ? FormatNumber("%.3f", f.integrity.horizontal_pl_m).c_str() : "",
        has_levels ? FormatNumber("%.3f", f.integrity.lateral_pl_m).c_str() : "",
        has_levels ? FormatNumber("%.3f", f.integrity.longitudinal_pl_m).c_str() : "",
        IntegrityStateName(f.integrity.state), FunnelStageName(StageOf(*q)), reason.c_str());
    out << buf;
  }
  return out.str();
}

std::string SegmentsCsv(const RouteReport& r) {
  std::string out =
      "segment,start_m,end_m,queries,fixes,refined,availability,refined_share,median_error_m,"
      "misleading\n";
  for (const SegmentSummary& g : r.summary.segments)
    out += std::to_string(g.index) + "," + FormatNumber("%.1f", g.start_m) + "," +
           FormatNumber("%.1f", g.end_m) + "," + std::to_string(g.queries) + "," +
           std::to_string(g.fixes) + "," + std::to_string(g.refined) + "," +
           FormatNumber("%.4f", g.availability) + "," + FormatNumber("%.4f", g.refined_share) +
           "," + (g.fixes ? FormatNumber("%.4f", g.median_error_m) : "") + "," +
           std::to_string(g.misleading) + "\n";
  return out;
}

namespace {

nlohmann::json Feature(const char* type, nlohmann::json coordinates, nlohmann::json properties) {
  return {{"type", "Feature"},
          {"geometry", {{"type", type}, {"coordinates", std::move(coordinates)}}},
          {"properties", std::move(properties)}};
}

nlohmann::json TruePoint(const QueryResult& q) {
  return {q.truth.position.lon_deg, q.truth.position.lat_deg};
}

// A fix's point and its error segment from the truth. REQUIRES: the query has a fix.
void AddFixFeatures(const QueryResult& q, nlohmann::json* features) {
  const nlohmann::json fix_pt = {q.fix.lon_deg, q.fix.lat_deg};
  features->push_back(Feature("Point", fix_pt,
                              {{"kind", "fix"},
                               {"image", q.truth.image},
                               {"time", FormatIsoUtc(q.truth.timestamp_s)},
                               {"quality", FixQualityName(q.fix.quality)},
                               {"error_m", q.error_m},
                               {"radius95_m", q.fix.radius95_m},
                               {"colour", ColourOf(q)}}));
  features->push_back(
      Feature("LineString", {TruePoint(q), fix_pt},
              {{"kind", "error_segment"}, {"image", q.truth.image}, {"error_m", q.error_m}}));
}

// Each alarm where the vehicle truly was when it was raised (the query of that time).
void AddAlarmFeatures(const RouteReport& r, const std::vector<const QueryResult*>& qs,
                      nlohmann::json* features) {
  for (const MonitorStep& s : r.spoofing->steps) {
    if (!s.alarm_raised) continue;
    for (const QueryResult* q : qs)
      if (q->truth.timestamp_s == s.time_s)
        features->push_back(Feature("Point", TruePoint(*q),
                                    {{"kind", "spoofing_alarm"},
                                     {"time", FormatIsoUtc(s.time_s)},
                                     {"nis", s.nis},
                                     {"cusum", s.cusum},
                                     {"during_true_spoofing", SpoofedAt(r, s.time_s)}}));
  }
}

}  // namespace

nlohmann::json RouteGeoJson(const RouteReport& r) {
  const std::vector<const QueryResult*> qs = InTimeOrder(r);
  nlohmann::json track = nlohmann::json::array();
  for (const QueryResult* q : qs) track.push_back(TruePoint(*q));
  nlohmann::json features = nlohmann::json::array();
  features.push_back(Feature("LineString", track, {{"kind", "truth_track"}}));
  for (const QueryResult* q : qs)
    if (q->fix.quality != FixQuality::kNone) AddFixFeatures(*q, &features);
  if (r.spoofing) AddAlarmFeatures(r, qs, &features);
  return {{"type", "FeatureCollection"}, {"features", features}};
}

Status WriteRouteReport(const RouteReport& r, const std::string& out_dir) {
  std::error_code ec;
  fs::create_directories(out_dir, ec);
  if (ec) return Status::IoError("cannot create " + out_dir + ": " + ec.message());
  const std::pair<const char*, std::string> files[] = {
      {"summary.json", SummaryJson(r).dump(2) + "\n"},
      {"fixes.csv", FixesCsv(r)},
      {"segments.csv", SegmentsCsv(r)},
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
  if (v->is_number()) return FormatNumber("%.4f", v->get<double>());
  return v->get<std::string>();
}

// The key, and for a pose bin its name: "within_0_25m_2deg (pose fine)".
std::string MetricName(const std::string& key) {
  for (const PoseBin& bin : kPoseBins)
    if (key == bin.summary_key) return key + " (pose " + bin.name + ")";
  return key;
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
  std::snprintf(line, sizeof(line), "%-36s %16s %16s %12s\n", "metric",
                name_a.substr(0, 16).c_str(), name_b.substr(0, 16).c_str(), "B - A");
  out += line;
  for (const auto& [k, unused] : keys) {
    const nlohmann::json* va = fa.count(k) ? &fa[k] : nullptr;
    const nlohmann::json* vb = fb.count(k) ? &fb[k] : nullptr;
    std::string delta;
    if (va && vb && va->is_number() && vb->is_number() && !va->is_boolean())
      delta = FormatNumber("%+.4f", vb->get<double>() - va->get<double>());
    std::snprintf(line, sizeof(line), "%-36s %16s %16s %12s\n", MetricName(k).c_str(),
                  Cell(va).c_str(), Cell(vb).c_str(), delta.c_str());
    out += line;
  }
  return out;
}

}  // namespace sightfix
