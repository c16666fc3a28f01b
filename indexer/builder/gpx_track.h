// A GPX 1.1 track (https://www.topografix.com/GPX/1/1/): every <trkpt lat lon> with its <time>
// (xsd:dateTime, fractional seconds allowed) and optional <ele> (metres; GPX gives elevation
// above mean sea level), in document order across <trk> and <trkseg>. Times must increase.
// Thread safety: pure functions.
#pragma once

#include <string>
#include <vector>

#include "indexer/base/status.h"

namespace sightfix {

struct TrackPoint {
  double time_s = 0;  // Unix seconds, UTC
  double lat_deg = 0, lon_deg = 0;
  double ele_m = 0;  // above mean sea level; NaN when the point has none
};

// kNotFound when the file cannot be opened; kInvalidArgument naming the file and the point
// (1-based) for XML errors, a point without lat, lon or time, values out of range, or times
// that do not increase.
Result<std::vector<TrackPoint>> ReadGpxTrack(const std::string& path);

struct TrackSample {
  double lat_deg = 0, lon_deg = 0, ele_m = 0;
  double course_deg = 0;  // geodesic azimuth from the point before to the point after
};

// The track at time t: linear interpolation between the two points around it (the geodesic
// between them, by the fraction of time elapsed). kInvalidArgument when t lies outside the track or
// the two points are more than max_gap_s apart (the message gives the gap).
Result<TrackSample> TrackAt(const std::vector<TrackPoint>& track, double t, double max_gap_s);

}  // namespace sightfix
