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

// The error of each query against the distance driven; spoofed spans shaded; a strip along the
// top coloured by each street segment's availability (kAvailabilityClasses).
// REQUIRES: qs not empty and pointing into r.results.
std::string ErrorAlongRoutePlot(const RouteReport& r, const std::vector<const QueryResult*>& qs);

// Error against protection bound (the diagram satellite-navigation integrity work draws, named
// there after Stanford): each usable fix (integrity.h) a dot at x = its stated radius95, y = its
// actual error, log-log, with the lines error = radius95 and error = 3 x radius95; dots above
// the first are misleading (orange), above the second confidently wrong (red), below green.
std::string ErrorAgainstBoundPlot(const std::vector<const QueryResult*>& qs);

// The integrity diagram at the fixes' own protection levels (protection_evidence.h): each
// protected fix a dot at x = its horizontal protection level, y = its error, log-log, with the
// line error = level and the horizontal alert limit (the one most fixes were judged at) across
// both axes. Fixes flagged usable: within their level (normal operation, blue), beyond it
// (misleading, amber), beyond the alert limit too (hazardous, crimson); fixes flagged not usable
// (unavailable) in grey, hollow when a fault or a rival place was flagged.
std::string ProtectionDiagramPlot(const std::vector<const QueryResult*>& qs);

// Availability (ProtectionEvidence::availability) against the alert limit, one bar per limit.
std::string AvailabilityByAlertLimitPlot(const RouteSummary& s);

// The colours of a street segment's availability in the along-route strip, from the lowest
// class up: a segment takes the first class whose min_availability it reaches from above.
struct AvailabilityClass {
  double min_availability;
  const char* colour;  // CSS
  const char* label;
};
inline constexpr AvailabilityClass kAvailabilityClasses[] = {{1.0, "#1f7a4d", "strip: all fixed"},
                                                             {0.8, "#9cc15a", ">= 80 %"},
                                                             {0.5, "#e0a31f", ">= 50 %"},
                                                             {0.0, "#b3202e", "< 50 %"}};
const char* AvailabilityColour(double availability);

// A histogram of call latencies, p50 and p95 marked.
std::string LatencyHistogramPlot(const RouteSummary& s, const std::vector<const QueryResult*>& qs);

// The spoofing monitor's NIS and CUSUM over time, alarms and true spans marked (a sentence when
// nothing was monitored). REQUIRES: r.spoofing is set.
std::string SpoofingPlot(const RouteReport& r);

}  // namespace sightfix
