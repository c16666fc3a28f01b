#include "demo_route/sun_light.h"

#include <algorithm>
#include <cmath>

namespace sightfix::demo {
namespace {

constexpr double kDegToRad = M_PI / 180;
constexpr double kDaySun = 0.55, kDaySky = 0.6;  // the hand-set day looks (demo_drives.cc)

}  // namespace

cv::Vec3d SunDirectionEnu(double azimuth_deg, double elevation_deg) {
  const double a = azimuth_deg * kDegToRad, e = elevation_deg * kDegToRad;
  return {std::sin(a) * std::cos(e), std::cos(a) * std::cos(e), std::sin(e)};
}

Result<SolarPosition> SunAt(const GeoPoint& site, double unix_s) {
  SolarPositionOptions o;
  o.latitude_deg = site.lat_deg;
  o.longitude_deg = site.lon_deg;
  o.elevation_m = site.height_m;
  return ComputeSolarPosition(unix_s, o);
}

double DirectSunLight(double elevation_deg) {
  if (elevation_deg <= 0) return 0;
  const double f = std::sin(elevation_deg * kDegToRad) / std::sin(20 * kDegToRad);
  return kDaySun * std::sqrt(std::min(1.0, f));
}

double SkyLight(double elevation_deg, double night_floor) {
  const double up = kDaySky * 0.75;  // the sky at the horizon
  if (elevation_deg <= 0)
    return night_floor + (up - night_floor) * std::clamp(1 + elevation_deg / 6, 0.0, 1.0);
  const double f = std::sin(elevation_deg * kDegToRad) / std::sin(15 * kDegToRad);
  return kDaySky * (0.75 + 0.25 * std::min(1.0, f));
}

void ApplySun(const SolarPosition& sun, bool overcast, double night_floor, Appearance* look) {
  look->sun_dir = SunDirectionEnu(sun.azimuth_deg, sun.elevation_deg);
  const double sky = SkyLight(sun.elevation_deg, night_floor);
  if (overcast) {
    look->sun = 0;
    look->ambient *= std::min(1.0, sky / kDaySky);
    return;
  }
  look->sun = DirectSunLight(sun.elevation_deg);
  look->ambient = sky;
}

}  // namespace sightfix::demo
