// The evaluator's outputs for one replayed drive, written into a report folder:
//   summary.json   the metrics (route_eval.h) under the keys docs/design.md 7 and README list,
//   fixes.csv      one row per query, in time order, with its street segment and integrity flag,
//   segments.csv   one row per street segment (route_eval.h SegmentSummary),
//   route.geojson  RFC 7946: truth track, fixes, error segments, spoofing alarms,
//   report.html    one self-contained page with inline SVG plots and the safety caution
// and `sightfix compare`'s side-by-side of two summaries. Thread-compatible (no shared state).
#pragma once

#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "client/eval/route_eval.h"
#include "client/monitor/gnss_stream.h"
#include "indexer/base/status.h"

namespace sightfix {

struct RouteReport {
  std::string drive_dir;
  std::string source;  // "server HOST:PORT" or "map DIR"
  std::string prior;   // the replay's --prior text, e.g. "noisy:150"
  uint64_t seed = 0;
  int map_version = 0;
  std::string model_id;
  bool partial = false;  // interrupted: results hold the queries that ran
  std::vector<QueryResult> results;
  RouteSummary summary;
  std::vector<GnssFix> gnss;             // empty without a stream
  std::vector<SpoofedSpan> spoof_truth;  // empty without spoofing.csv
  std::optional<SpoofingRun> spoofing;   // set when the stream was monitored
  SpoofingMonitorOptions monitor;
};

nlohmann::json SummaryJson(const RouteReport& r);
std::string FixesCsv(const RouteReport& r);
std::string SegmentsCsv(const RouteReport& r);
nlohmann::json RouteGeoJson(const RouteReport& r);
std::string ReportHtml(const RouteReport& r);

// Writes the five files into out_dir (created if missing), each through a temporary file and a
// rename, so a reader never sees half a file.
Status WriteRouteReport(const RouteReport& r, const std::string& out_dir);

// A table of two summary.json objects: key, A, B, B - A; numbers only, nested objects
// flattened with '.', keys of either side. A pose bin's key carries its name (route_eval.h):
// "within_0_25m_2deg (pose fine)".
std::string CompareSummaries(const nlohmann::json& a, const nlohmann::json& b,
                             const std::string& name_a, const std::string& name_b);

}  // namespace sightfix
