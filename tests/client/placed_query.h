// Test helper: a replayed query placed on a straight north-bound street, for the tests of street
// segments, integrity counts and the report (header-only).
#pragma once

#include "client/eval/route_eval.h"
#include "indexer/base/geo.h"

namespace sightfix {

// A query that ran at time t_s with its truth north_m metres north of (44 N, 40 W), heading
// north; with a fix `error_m` metres east of the truth and radius95 `radius95_m` unless
// quality is kNone. Scored (ScoreQuery): error_m comes out as given.
inline QueryResult PlacedQuery(double north_m, double t_s, FixQuality quality, double error_m = 0,
                               double radius95_m = 0) {
  QueryResult q;
  q.ran = true;
  q.truth.timestamp_s = t_s;
  const GeodesicDirect truth = GeodesicFrom(44.0, -40.0, 0, north_m);
  q.truth.position = {truth.lat_deg, truth.lon_deg, 0};
  q.truth.attitude.heading_deg = 0;
  q.fix.quality = quality;
  if (quality != FixQuality::kNone) {
    const GeodesicDirect fix = GeodesicFrom(truth.lat_deg, truth.lon_deg, 90, error_m);
    q.fix.lat_deg = fix.lat_deg, q.fix.lon_deg = fix.lon_deg;
    q.fix.heading_deg = 0;
    q.fix.radius95_m = radius95_m;
  }
  ScoreQuery(&q);
  return q;
}

}  // namespace sightfix
