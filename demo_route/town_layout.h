// The procedural demo town: streets, buildings, parked vehicles, poles and trees, laid out
// deterministically from a seed. Pure geometry in a local ENU frame (metres, x east, y north,
// z up, the road surface at z = 0); painting and rendering live in town_painter.h and
// town_renderer.h.
//
// Layout: the survey route is a staircase of streets (east, north, east, ...) meeting at
// right-angle junctions, one leg of it an S-curve; every junction gets the cross-street arms
// the route does not use (stubs closed by a facade), and both route ends run on past the
// route. Each street is two lanes each way (3 m lanes), a 2 m parking strip, a kerb and a
// 2.5 m sidewalk: facades stand 10.5 m or more from the centreline.
#pragma once

#include <array>
#include <cstdint>
#include <opencv2/core.hpp>
#include <vector>

namespace sightfix::demo {

// Cross-section of every street, metres from the centreline.
struct StreetSection {
  static constexpr double kLaneWidthM = 3.0;    // two lanes each way
  static constexpr double kCarriagewayM = 6.0;  // edge of the outer lane
  static constexpr double kParkingM = 8.0;      // outer edge of the parking strip (kerb)
  static constexpr double kFacadeM = 10.5;      // nearest facade line
  static constexpr double kSurveyLaneM = 4.5;   // centre of the outer lane
  static constexpr double kQueryLaneM = 1.5;    // centre of the inner lane
};

// A polyline with cumulative arc length, sampled finely enough that chords follow curves.
class Polyline {
 public:
  Polyline() = default;
  explicit Polyline(std::vector<cv::Vec2d> points);
  const std::vector<cv::Vec2d>& points() const { return points_; }
  const std::vector<double>& arc() const { return arc_; }
  double length() const { return arc_.empty() ? 0.0 : arc_.back(); }
  // Point at arc length s (clamped to [0, length]); *tangent gets the unit direction.
  cv::Vec2d At(double s, cv::Vec2d* tangent = nullptr) const;

 private:
  std::vector<cv::Vec2d> points_;
  std::vector<double> arc_;
};

struct Street {
  Polyline centre;
  bool on_route = false;
};

// How a building's street front departs from the design its seed alone would paint: the
// realistic world's look-alikes (look_alikes.h). Defaults for every other building.
struct FacadeVariant {
  // Non-zero: the ground floor is a row of identical chain-shop fronts, each painted from this
  // seed, whatever the building's own seed would put there.
  uint64_t chain_shop_seed = 0;
  // The ground floor is a residential door with small windows (a terrace house).
  bool residential = false;
  // >= 0: the front door is painted in colour door_tint of a small palette instead of its
  // seed's colour (a terrace house that differs from its neighbours by its door alone).
  int door_tint = -1;
};

// A box standing on the ground: footprint corners counter-clockwise seen from above.
struct Building {
  std::array<cv::Vec2d, 4> footprint;
  int front_edge = 0;  // edge i runs footprint[i] -> footprint[i+1] and faces a street
  double height_m = 0;
  int floors = 0;
  uint64_t seed = 0;
  FacadeVariant facade;
  bool off_map = false;  // stands on the excursion street (the survey never drives there)
};

struct Vehicle {
  int id = 0;
  cv::Vec2d centre;
  double yaw_rad = 0;  // direction of its length axis, counter-clockwise from east
  double length_m = 0, width_m = 0, height_m = 0;
  uint64_t seed = 0;
};

struct Pole {
  enum Kind { kLamp, kSign } kind = kLamp;
  cv::Vec2d base;
  double height_m = 0;
  double facing_rad = 0;  // direction a sign panel or lamp arm points, ccw from east
  uint64_t seed = 0;
};

struct Tree {
  cv::Vec2d base;
  double trunk_height_m = 0;
  double canopy_radius_m = 0;
  uint64_t seed = 0;
};

struct TownOptions {
  uint64_t seed = 1;
  double route_length_m = 1000;  // length of the survey route (one direction)
  double turn_radius_m = 12;     // centreline radius of the junction turns
  double stub_length_m = 60;     // cross-street arms that the route does not take
  double curve_length_m = 150;   // the S-curve leg
  double curve_offset_m = 26;    // its lateral shift
  // The realistic world's additions (look_alikes.h), built after everything else from seeds
  // of their own, so the rest of the town is the clean town's: look-alike stretches (a
  // terrace, a chain-shop parade, a pair of twin stretches) and an off-map side street.
  bool look_alikes = false;
  bool excursion = false;
};

// A stretch of the route whose facades repeat (look_alikes.h): metres of route arc length.
struct LookAlikeStretch {
  enum Kind { kTerrace, kChainShops, kTwin } kind = kTerrace;
  double route_from_m = 0, route_to_m = 0;
  // kTwin: the stretch whose building sequence this one repeats (same length, same heading).
  double mirrors_from_m = -1, mirrors_to_m = -1;
  int buildings = 0;  // buildings whose fronts are part of it (both sides of the street)
};

// A side street the survey never drives (look_alikes.h), leaving the route at right angles.
struct Excursion {
  int street = -1;            // index into Town::streets (on_route false)
  double mouth_route_m = 0;   // route arc length where its centreline meets the route's
  Polyline path;              // the drive: route from 0, a right turn, then the side street
  double path_mouth_m = 0;    // path arc length where the turn begins
  double off_map_min_m = 55;  // a point this far from the surveyed route is off the map
};

struct Town {
  TownOptions options;
  Polyline route;  // centreline of the survey route, travelled start to end
  std::vector<Street> streets;
  std::vector<Building> buildings;
  std::vector<Vehicle> vehicles;
  std::vector<Pole> poles;
  std::vector<Tree> trees;
  std::vector<LookAlikeStretch> look_alikes;  // empty unless options.look_alikes
  bool has_excursion = false;                 // options.excursion
  Excursion excursion;
};

Town BuildTown(const TownOptions& options);

// Distance from p to the nearest street centreline (metres) and that street's index.
double DistanceToStreets(const Town& town, const cv::Vec2d& p, int* street = nullptr);

// The vehicles present in one drive: variant 0 is the survey; other variants remove some
// vehicles and move others along the kerb, as parked cars come and go between drives.
std::vector<Vehicle> VehiclesForVariant(const Town& town, int variant);

}  // namespace sightfix::demo
