// How buildings and street furniture are placed along a street (town_layout.cc), shared with the
// realistic world's additions (look_alikes.cc). Geometry as in town_layout.h: ENU metres, x
// east, y north; footprints counter-clockwise seen from above. Every call draws from the Rng it
// is given in a fixed order, so one seed places the same things.
#pragma once

#include <array>
#include <opencv2/core.hpp>

#include "demo_route/random.h"
#include "demo_route/town_layout.h"

namespace sightfix::demo {

// Separating-axis test for two convex quads; touching edges (within 5 cm) do not count.
bool FootprintsOverlap(const std::array<cv::Vec2d, 4>& a, const std::array<cv::Vec2d, 4>& b);

// Footprint of a building whose front runs from a to b (b on the viewer's right seen from the
// street), `depth` metres deep; counter-clockwise, front edge index returned in *front.
std::array<cv::Vec2d, 4> FrontFootprint(const cv::Vec2d& a, const cv::Vec2d& b, double depth,
                                        int* front);

// Whether footprint fp keeps clear of every street (its facade line kFacadeM from every
// centreline) and of every building of *town.
bool FootprintFits(const Town& town, const std::array<cv::Vec2d, 4>& fp);

// Adds a building on fp if FootprintFits, its floors, height and seed drawn from rng (4-7
// floors of 3.0-3.5 m and a 0.3-1.2 m roof); returns whether it was added.
bool TryAddBuilding(Town* town, const std::array<cv::Vec2d, 4>& fp, int front_edge, Rng& rng);

// Buildings along both sides of street `street` from from_m metres along it, 8-22 m wide, gaps
// now and then.
void PlaceBuildingsAlong(Town* town, int street, Rng& rng, double from_m = 0);

// A facade across the far end of a street (end point, direction of the street there).
void CloseStreetEnd(Town* town, const cv::Vec2d& end, const cv::Vec2d& dir, Rng& rng);

// Lamps, sign posts and (if trees) street trees along both sides of street `street`; no parked
// vehicles.
void PlaceStreetPolesAndTrees(Town* town, int street, bool trees, Rng& rng);

}  // namespace sightfix::demo
