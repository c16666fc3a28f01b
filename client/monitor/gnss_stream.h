// A drive's GNSS stream and its spoofing ground truth, as the evaluator reads them.
//
// gnss.csv: header `timestamp,lat,lon,height,sigma_h_m,course_deg`, one row per receiver fix:
// ISO 8601 UTC time, WGS84 degrees, ellipsoidal metres, claimed 1-sigma per horizontal axis in
// metres (as a receiver's GST report gives it), course over ground in degrees from true north.
// Rows in time order.
// spoofing.csv (optional, ground truth for evaluation only): header
// `start,end,rate_mps,bearing_deg`, one row per spoofed span, ISO 8601 UTC times.
// Both readers fail on the first bad row with "<path>:<line>: <what>". Thread-safe.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "client/monitor/spoofing_monitor.h"
#include "indexer/base/status.h"

namespace sightfix {

struct GnssFix {
  double time_s = 0;  // Unix seconds
  double lat_deg = 0, lon_deg = 0, height_m = 0;
  double sigma_h_m = 0;
  double course_deg = 0;
};

struct SpoofedSpan {
  TimeSpan span;  // Unix seconds
  double rate_mps = 0, bearing_deg = 0;
};

Result<std::vector<GnssFix>> ReadGnssCsv(const std::string& path);
Result<std::vector<SpoofedSpan>> ReadSpoofingCsv(const std::string& path);

// The receiver's fix at time t, linearly interpolated between the two rows around it (position
// and sigma; course from the earlier row); nullopt when t lies outside the stream or the rows
// around it are more than max_gap_s apart.
std::optional<GnssFix> GnssAt(const std::vector<GnssFix>& stream, double t, double max_gap_s = 1.0);

}  // namespace sightfix
