// Integrity evidence of a replayed drive: fixes that state a bound and break it.
//
// A fix is *usable* when it states a bound: an answer with a position (refined or coarse) and a
// radius95_m > 0, as a vehicle stack would take it. It is *misleading* at factor f when its
// horizontal error exceeds f x radius95_m:
//  - f = 1, outside its own 95 % radius: expected for about 5 % of fixes when the radius is
//    calibrated, so the share says whether the radius is honest (with radius95 coverage);
//  - f = 3, "confidently wrong": for a circular 2D Gaussian, radius95 = 2.4477 sigma and
//    P(error > 3 x 2.4477 sigma) = exp(-(7.343)^2 / 2) = 2e-12 (common practice: the Rayleigh
//    tail), so a calibrated localizer should show none; each one is a fault to explain.
// The figures are meant as the evidence an error-against-protection-bound analysis asks for
// (the diagram of report.html, report_plots.h ErrorAgainstBoundPlot), not as an integrity
// certificate: sightfix is a fallback aid, not a certified navigation source.
//
// Why the bound counts street segments and not fixes or episodes: neighbouring fixes share
// their error (one wrong match persists while the same facade is in view), so fixes are not
// independent trials and a bound over them would be far too tight. Episodes (runs of
// consecutive misleading fixes) count failures without a matching number of trials. Street
// segments (street_segments.h) are the units the evaluator already takes as independent; a
// segment fails when it holds a misleading fix, and the one-sided Clopper-Pearson bound over
// them answers "at most what share of 50 m stretches of driving holds a misleading fix?".
// Pure functions; thread-compatible.
#pragma once

#include <string>
#include <vector>

#include "client/eval/route_eval.h"
#include "client/eval/street_segments.h"

namespace sightfix {

// The two bounds the outputs report, as factors of radius95_m.
inline constexpr double kMisleadingFactor = 1;
inline constexpr double kConfidentlyWrongFactor = 3;

// A query that ran without a failed call, with a fix that states a radius95_m > 0 (finite).
bool IsUsableFix(const QueryResult& q);
// A usable fix whose error_m exceeds bound_factor x radius95_m.
bool IsMisleading(const QueryResult& q, double bound_factor);

// The counts of IntegrityCounts (route_eval.h) over the results of one drive and its cut
// (CutStreetSegments of the same results). REQUIRES: cut was made from results.
IntegrityCounts CountIntegrity(const std::vector<QueryResult>& results, const StreetCut& cut,
                               double bound_factor);

// One line for text outputs, e.g. "misleading (error > radius95): 3 of 180 usable fixes, 0.017
// [0.000, 0.040] seg, 2 episodes (longest 2), in 2 of 19 segments, at most 0.301 of segments
// (95 % CP)"; "confidently wrong (error > 3 x radius95): ..." for factor 3.
std::string IntegrityLine(const IntegrityCounts& c);

}  // namespace sightfix
