// The realistic world's look-alike places and off-map street (town_layout.h's TownOptions turns
// them on). Built after the rest of the town, each from a seed of its own, so every building,
// pole, tree and vehicle elsewhere is the clean town's.
//
// Look-alikes, on straight stretches of the surveyed route (at least 6 m clear of its turns):
// - a pair of twin stretches (kTwin): the sequence of buildings along the first stretch, both
//   sides (widths, setbacks, heights, facades), repeated along a later stretch of the same
//   heading, up to 100 m; street furniture, parked vehicles and what lies beyond differ;
// - a terrace (kTerrace): 7.2 m houses of one design per side of the street, up to 130 m, about
//   one in four with a door of another colour;
// - a chain-shop parade (kChainShops): up to 100 m where every building keeps its own upper
//   floors but its ground floor is a row of one chain's identical shop fronts.
// A stretch is left out when the route has too few straight stretches (a short town).
//
// The excursion: a 150 m side street leaving the first straight stretch of the route at right
// angles to the right of travel (mid-stretch, clear of the first junction), lined with buildings
// and closed at its far end. The route's buildings across its mouth give way to it. The survey
// never drives it; a forward camera on the route sees into it only near its mouth.
#pragma once

#include <nlohmann/json.hpp>
#include <vector>

#include "demo_route/drive_plan.h"
#include "demo_route/town_layout.h"

namespace sightfix::demo {

// Adds the excursion street, its buildings (Building::off_map), lamps and trees, and fills
// town->excursion; does nothing when the route's first straight stretch is under 45 m.
void AddExcursionStreet(Town* town);

// Lays out the look-alike stretches and records them in town->look_alikes (route order of
// their placement: twins, terrace, chain shops).
void AddLookAlikes(Town* town);

// Distance (metres) from p to the surveyed route's centreline (town.route, 0 to its length).
double DistanceToRoute(const Town& town, const cv::Vec2d& p);

// Indices of the frames whose true position is off the map: at least
// town.excursion.off_map_min_m from the surveyed route's centreline (so at least that less the
// survey lane's 4.5 m from every survey camera).
std::vector<int> OffMapFrames(const Town& town, const std::vector<Frame>& frames);

// town.json's record of the look-alike stretches ("look_alikes") and of the excursion
// ("excursion", with the off-map frames of `offmap_drive`, named `drive_name`); null when absent.
nlohmann::json LookAlikesJson(const Town& town);
nlohmann::json ExcursionJson(const Town& town, const std::string& drive_name,
                             const std::vector<Frame>& offmap_drive);

}  // namespace sightfix::demo
