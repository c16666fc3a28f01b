// Moving traffic of the demo town's realistic world: cars, vans, buses, cyclists and pedestrians
// travelling along the route while a drive records it. Each mover keeps to one line at a fixed
// offset from the route centreline and one speed, so its place follows from the drive's time
// alone: neighbouring frames agree, and any frame can be rendered on its own (any thread).
//
// Lines (metres to the right of the route's direction; right-hand traffic, so movers at a
// positive offset travel along the route and those at a negative offset against it):
//   motor traffic  the lane the drive's camera does not use on each side (offset 1.5 or 4.5,
//                  StreetSection's lanes): oncoming on one side, same-direction on the other;
//   cyclists       a cycle path along the kerb, 8.25 (parked cars end at 7.9, lamps at 8.52);
//   pedestrians    along the building line, 9.95 (trees stand at 9.4, scaffolding from 10.2).
// Every mover of a line moves at that line's speed, so movers of one line never overlap.
#pragma once

#include <cstdint>
#include <functional>
#include <nlohmann/json.hpp>
#include <opencv2/core.hpp>
#include <vector>

#include "demo_route/random.h"
#include "demo_route/town_layout.h"
#include "demo_route/world_nuisances.h"

namespace sightfix::demo {

enum class MoverKind { kCar, kVan, kBus, kCyclist, kPedestrian };

// "car", "van", "bus", "cyclist", "pedestrian".
const char* MoverKindName(MoverKind kind);

// One moving object: a box of length x width x height metres (length along its travel) whose
// centre is at route arc length s0_m + direction * speed_mps * t at drive time t (seconds), at
// offset_m to the right of the route's direction. Off the route (s outside [0, length]) it is
// not drawn.
struct Mover {
  int id = 0;
  MoverKind kind = MoverKind::kCar;
  double s0_m = 0;
  double speed_mps = 0;  // > 0
  int direction = 1;     // +1 along the route, -1 against it
  double offset_m = 0;
  double length_m = 0, width_m = 0, height_m = 0;
  uint64_t seed = 0;  // its paint
};

// The mover's footprint centre (ENU metres) and heading (radians counter-clockwise from east,
// its direction of travel) at drive time t_s; false when it is off the route at that time.
bool MoverPlacement(const Polyline& route, const Mover& m, double t_s, cv::Vec2d* centre,
                    double* yaw_rad);

// The camera vehicle's ground position (ENU metres) at a drive time (seconds).
using CameraTrack = std::function<cv::Vec2d(double t_s)>;

// The traffic of one drive: its lines' speeds and the movers.
struct TrafficPlan {
  double density_scale = 1;            // 1: a query drive; TrafficRanges::survey_density_scale
  double motor_lane_offset_m = 0;      // |offset| of the motor traffic's lanes
  double motor_speed_mps[2] = {0, 0};  // along, against the route
  double cycle_speed_mps = 0, walk_speed_mps = 0;
  int rejected = 0;  // movers left out because they would have met the camera vehicle
  std::vector<Mover> movers;
};

// Plans a drive's traffic over [0, duration_s] on a route whose camera keeps to
// camera_lane_offset_m (< 3: the inner lanes, so motor traffic takes the outer ones, and the
// other way round). Movers are spaced along each line by their line's gaps (scaled by
// 1 / density_scale) so that the line is populated throughout the drive; any mover whose box
// would come within 0.6 m of the camera vehicle (4.6 x 1.9 m about camera(t)) at any 0.1 s step
// is left out. Draws from rng only.
TrafficPlan PlanTraffic(const Polyline& route, double duration_s, double camera_lane_offset_m,
                        double density_scale, const TrafficRanges& ranges,
                        const CameraTrack& camera, Rng& rng);

// town.json's "traffic" object: the lines, their speeds and every mover.
nlohmann::json TrafficJson(const TrafficPlan& plan);

// One face of a cyclist or pedestrian box, width_m x height_m (faces as PaintVehicle numbers
// them: 0 and 1 the sides, 2 the front, 3 the back, 4 the top): a figure in clothes of the
// seed's colours on transparent texels (BGRA, kObjectTexelsPerM).
cv::Mat PaintFigure(MoverKind kind, double width_m, double height_m, uint64_t seed, int face);

}  // namespace sightfix::demo
