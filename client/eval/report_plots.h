// The SVG plots of report.html (svg_plot.h), each a self-contained <svg class="plot"> element.
// `qs` are the queries that ran, in time order (route_view.h's InTimeOrder). Thread-compatible.
#pragma once

#include <string>
#include <vector>

#include "client/eval/route_report.h"

namespace sightfix {

// The route in local east/north metres at equal scale: true positions coloured by error class,
// error segments over 1 m, no-fix rings, spoofed spans, the survey images retrieved.
// REQUIRES: qs not empty.
std::string RouteMapPlot(const RouteReport& r, const std::vector<const QueryResult*>& qs);

// The cumulative share of all queries by horizontal error (log axis), availability marked.
std::string ErrorCdfPlot(const RouteSummary& s, const std::vector<const QueryResult*>& qs);

// The error of each query against the distance driven; spoofed spans shaded.
// REQUIRES: qs not empty.
std::string ErrorAlongRoutePlot(const RouteReport& r, const std::vector<const QueryResult*>& qs);

// Reported radius95 against the actual error, with the line error = radius95.
std::string CalibrationPlot(const std::vector<const QueryResult*>& qs);

// A histogram of call latencies, p50 and p95 marked.
std::string LatencyHistogramPlot(const RouteSummary& s, const std::vector<const QueryResult*>& qs);

// The spoofing monitor's NIS and CUSUM over time, alarms and true spans marked (a sentence when
// nothing was monitored). REQUIRES: r.spoofing is set.
std::string SpoofingPlot(const RouteReport& r);

}  // namespace sightfix
