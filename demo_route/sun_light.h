// The realistic world's daylight from the sun's true position: the Reda & Andreas SPA
// (solar_position.h) at the town's datum and a drive's time, turned into the renderer's light
// (Appearance: the direction towards the sun in ENU, direct and sky light following the sun's
// elevation). Pure functions, thread-safe.
#pragma once

#include <opencv2/core.hpp>

#include "demo_route/solar_position.h"
#include "demo_route/town_renderer.h"
#include "indexer/base/geo.h"
#include "indexer/base/status.h"

namespace sightfix::demo {

// The unit vector towards a sun at azimuth (clockwise from north) and elevation, degrees, in ENU
// (x east, y north, z up).
cv::Vec3d SunDirectionEnu(double azimuth_deg, double elevation_deg);

// The sun seen from `site` (latitude, longitude, height above the ellipsoid) at unix_s (UTC).
// Fails as ComputeSolarPosition does (a time outside the algorithm's years).
Result<SolarPosition> SunAt(const GeoPoint& site, double unix_s);

// Direct sunlight on a surface facing the sun, in Appearance::sun's units, for a clear sky: 0.55
// (the hand-set day looks' value) from 20 degrees up, falling as sqrt(sin e / sin 20 deg) below
// (0.25 at 4 degrees, the hand-set dusk's), 0 at and under the horizon. A shape chosen to meet
// the hand-set looks, not a radiometric model.
double DirectSunLight(double elevation_deg);
// Sky light on every surface: 0.6 (the day looks') times 0.75 + 0.25 min(1, sin e / sin 15 deg)
// above the horizon (0.52 at 4 degrees, the hand-set dusk's 0.5); through civil twilight (to 6
// degrees under) it falls linearly to night_floor, the light of a night sky over a town.
double SkyLight(double elevation_deg, double night_floor);

// Sets look's sun direction from `sun`, its direct light from DirectSunLight (0 when overcast:
// clouds leave no direct sun) and its sky light: SkyLight for a clear sky; an overcast look
// keeps its own ambient, scaled by SkyLight / 0.6 where that is below 1 (dim at dawn and dusk).
void ApplySun(const SolarPosition& sun, bool overcast, double night_floor, Appearance* look);

}  // namespace sightfix::demo
