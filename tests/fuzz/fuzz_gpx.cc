// libFuzzer target: a GPX 1.1 track, then positions along it at its first time, halfway and
// just past its end. Invariants: times increase; a sample is finite and in range.
#include <cmath>

#include "indexer/builder/gpx_track.h"
#include "tests/fuzz/fuzz_input.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  using namespace sightfix;
  auto track = ReadGpxTrack(fuzz::WriteInput("track.gpx", data, size));
  if (!track.ok() || track->empty()) return 0;
  for (size_t i = 1; i < track->size(); ++i)
    FUZZ_CHECK((*track)[i].time_s > (*track)[i - 1].time_s);
  const double t0 = track->front().time_s, t1 = track->back().time_s;
  for (double t : {t0, 0.5 * (t0 + t1), t1 + 1}) {
    auto s = TrackAt(*track, t, 60);
    if (!s.ok()) continue;
    FUZZ_CHECK(std::isfinite(s->lat_deg) && std::fabs(s->lat_deg) <= 90.000001);
    FUZZ_CHECK(std::isfinite(s->lon_deg) && std::fabs(s->lon_deg) <= 180.000001);
  }
  return 0;
}
