// ISO 8601 UTC timestamps, the one time format in sightfix files: "2026-05-04T09:00:01.250Z".
// Times in memory are seconds since the Unix epoch (UTC) as double; millisecond resolution on
// output. Thread-safe.
#pragma once

#include <string>

#include "indexer/base/status.h"

namespace sightfix {

// "YYYY-MM-DDTHH:MM:SS.mmmZ", rounded to the nearest millisecond.
std::string FormatIsoUtc(double unix_s);
// Accepts "YYYY-MM-DDTHH:MM:SS[.fraction](Z|+HH:MM|-HH:MM)"; an offset is applied to give UTC.
Result<double> ParseIsoUtc(const std::string& text);

}  // namespace sightfix
