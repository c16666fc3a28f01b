// How the report's outputs (route_report.h) see a replayed drive: the queries that ran in time
// order, whether the GNSS was spoofed at a time, the error classes that colour the route, and
// one number formatted. Internal to the evaluator. Thread-compatible.
#pragma once

#include <cmath>
#include <string>
#include <vector>

#include "client/eval/route_report.h"

namespace sightfix {

// Error classes of the route colouring: the pose bins' distances (route_eval.h), 1 m, and the
// 5 m bound of a wrong refined fix; the last class holds everything beyond.
struct ErrorClass {
  double max_m;
  const char* colour;  // CSS
  const char* label;
};
inline constexpr ErrorClass kErrorClasses[] = {{0.25, "#1f7a4d", "<= 0.25 m"},
                                               {0.5, "#62a83f", "<= 0.5 m"},
                                               {1.0, "#c9a227", "<= 1 m"},
                                               {5.0, "#e06c1f", "<= 5 m"},
                                               {HUGE_VAL, "#b3202e", "> 5 m"}};
inline constexpr char kNoFixColour[] = "#9a9a9a";

// The colour of a query: its error's class, or kNoFixColour without a fix.
const char* ColourOf(const QueryResult& q);

// The queries of r that ran, by truth timestamp. Pointers into r.results.
std::vector<const QueryResult*> InTimeOrder(const RouteReport& r);

// Whether a true spoofed span of r holds Unix time t (start inclusive, end exclusive).
bool SpoofedAt(const RouteReport& r, double t);

// printf of one number with `format` (one conversion for a double), at most 63 characters.
std::string FormatNumber(const char* format, double v);

}  // namespace sightfix
