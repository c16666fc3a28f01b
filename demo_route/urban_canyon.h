// How deep a street canyon is at a point of the demo town: the facades straight across the
// street on either side of the direction of travel, their heights, and the canyon's aspect ratio
// H / W (height over width, the usual descriptor of a street canyon: Oke, "Street design and
// urban canopy layer climate", Energy and Buildings 11, 1988; from memory). Deep canyons are
// where a GNSS receiver sees reflected signals instead of direct ones (multipath and
// non-line-of-sight reception, common practice), so the realistic world's survey jumps there.
//
// H is the lower of the two facades (the sky is open above the lower side), W the distance
// between them along the line across the street through the point. A side with no facade within
// kMaxReachM makes the canyon open (aspect ratio 0): junctions, gaps between buildings, the
// route's ends. Pure geometry, thread-safe.
#pragma once

#include <opencv2/core.hpp>

#include "demo_route/town_layout.h"

namespace sightfix::demo {

struct Canyon {
  static constexpr double kMaxReachM = 40;  // farther facades do not mask the sky
  double left_m = 0, right_m = 0;           // distance to the facade on each side; 0: none
  double left_height_m = 0, right_height_m = 0;
  double aspect_ratio = 0;  // min(heights) / (left_m + right_m); 0 if a side is open
};

// The canyon at ground point p (ENU metres) across travel direction `travel` (any length > 0).
Canyon CanyonAt(const Town& town, const cv::Vec2d& p, const cv::Vec2d& travel);

}  // namespace sightfix::demo
