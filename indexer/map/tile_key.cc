#include "indexer/map/tile_key.h"

#include <algorithm>
#include <cmath>
#include <tuple>

#include "indexer/base/geo.h"

namespace sightfix {
namespace {

constexpr double kDegToRad = M_PI / 180.0;

double WrapLonDeg(double d) {
  d = std::fmod(d + 180.0, 360.0);
  return (d < 0 ? d + 360.0 : d) - 180.0;
}

double TileYToLatDeg(double y, int zoom) {
  const double n = M_PI - 2.0 * M_PI * y / std::ldexp(1.0, zoom);
  return std::atan(std::sinh(n)) / kDegToRad;
}

// Distance in metres from the origin to the segment a-b of a plane.
double DistanceToSegment(double ax, double ay, double bx, double by) {
  const double dx = bx - ax, dy = by - ay, len2 = dx * dx + dy * dy;
  double t = len2 > 0 ? -(ax * dx + ay * dy) / len2 : 0.0;
  t = std::clamp(t, 0.0, 1.0);
  return std::hypot(ax + t * dx, ay + t * dy);
}

// Distance from the circle's centre to a tile, in the centre's tangent plane: 0 inside.
double DistanceToTile(const EnuFrame& frame, const TileKey& key, double lon_shift_deg) {
  const TileBounds b = BoundsOfTile(key);
  const double lons[4] = {b.west_deg, b.east_deg, b.east_deg, b.west_deg};
  const double lats[4] = {b.south_deg, b.south_deg, b.north_deg, b.north_deg};
  double ex[4], ny[4];
  for (int i = 0; i < 4; ++i) {
    const cv::Vec3d e = frame.ToEnu({lats[i], lons[i] + lon_shift_deg, frame.origin().height_m});
    ex[i] = e[0];
    ny[i] = e[1];
  }
  // Inside test against the (nearly rectangular) quadrilateral, then edge distance.
  bool inside = true;
  for (int i = 0; i < 4; ++i) {
    const int j = (i + 1) % 4;
    const double cross = (ex[j] - ex[i]) * (0 - ny[i]) - (ny[j] - ny[i]) * (0 - ex[i]);
    if (cross < 0) inside = false;
  }
  if (inside) return 0.0;
  double best = INFINITY;
  for (int i = 0; i < 4; ++i) {
    const int j = (i + 1) % 4;
    best = std::min(best, DistanceToSegment(ex[i], ny[i], ex[j], ny[j]));
  }
  return best;
}

}  // namespace

double WebMercatorCellSizeM(int zoom, int tile_size_px) {
  return 2.0 * M_PI * kWebMercatorRadiusM / tile_size_px / std::ldexp(1.0, zoom);
}

std::string TileKey::ToString() const {
  return std::to_string(zoom) + "/" + std::to_string(x) + "/" + std::to_string(y);
}

bool TileKey::operator<(const TileKey& o) const {
  return std::tie(zoom, x, y) < std::tie(o.zoom, o.x, o.y);
}

void WebMercatorFromLatLon(double lat_deg, double lon_deg, double* x_m, double* y_m) {
  const double lat = std::clamp(lat_deg, -kWebMercatorMaxLatDeg, kWebMercatorMaxLatDeg);
  *x_m = kWebMercatorRadiusM * lon_deg * kDegToRad;
  *y_m = kWebMercatorRadiusM * std::log(std::tan(M_PI / 4 + lat * kDegToRad / 2));
}

TileKey TileForPoint(double lat_deg, double lon_deg, int zoom) {
  const double n = std::ldexp(1.0, zoom);
  double lon = std::fmod(lon_deg + 180.0, 360.0);
  if (lon < 0) lon += 360.0;
  const double lat = std::clamp(lat_deg, -kWebMercatorMaxLatDeg, kWebMercatorMaxLatDeg) * kDegToRad;
  const double fx = lon / 360.0 * n;
  const double fy = (1.0 - std::log(std::tan(lat) + 1.0 / std::cos(lat)) / M_PI) / 2.0 * n;
  const double max_index = n - 1;
  TileKey key;
  key.zoom = zoom;
  key.x = static_cast<uint32_t>(std::clamp(std::floor(fx), 0.0, max_index));
  key.y = static_cast<uint32_t>(std::clamp(std::floor(fy), 0.0, max_index));
  return key;
}

TileBounds BoundsOfTile(const TileKey& key) {
  const double n = std::ldexp(1.0, key.zoom);
  return {key.x / n * 360.0 - 180.0, TileYToLatDeg(key.y + 1.0, key.zoom),
          (key.x + 1.0) / n * 360.0 - 180.0, TileYToLatDeg(key.y, key.zoom)};
}

std::vector<TileKey> TilesTouchingCircle(double lat_deg, double lon_deg, double radius_m,
                                         int zoom) {
  const EnuFrame frame({lat_deg, lon_deg, 0.0});
  // Curvature of the tangent plane: beyond ~20 km, widen the test so no tile is missed.
  const double margin_m = radius_m > 20000 ? radius_m * radius_m / kWebMercatorRadiusM : 0.0;
  const double reach_m = radius_m + margin_m;
  // Bounding box of candidate tiles from the four cardinal geodesic end points.
  const double north = std::min(GeodesicFrom(lat_deg, lon_deg, 0, reach_m).lat_deg, 85.0);
  const double south = std::max(GeodesicFrom(lat_deg, lon_deg, 180, reach_m).lat_deg, -85.0);
  const double dlon =
      std::abs(WrapLonDeg(GeodesicFrom(lat_deg, lon_deg, 90, reach_m).lon_deg - lon_deg));
  // Widen in longitude by the latitude of the box edge nearer the pole (parallels converge).
  const double pole_lat = std::max(std::abs(north), std::abs(south));
  const double dlon_edge =
      std::min(180.0, dlon * std::cos(lat_deg * kDegToRad) / std::cos(pole_lat * kDegToRad) + 1e-9);
  const TileKey nw = TileForPoint(north, lon_deg, zoom);
  const TileKey se = TileForPoint(south, lon_deg, zoom);
  const uint32_t n = static_cast<uint32_t>(std::ldexp(1.0, zoom));
  const double tile_deg = 360.0 / n;
  const int64_t cx = TileForPoint(lat_deg, lon_deg, zoom).x;
  const int64_t span = static_cast<int64_t>(std::ceil(dlon_edge / tile_deg)) + 1;
  int64_t lo = cx - span, hi = cx + span;
  if (hi - lo + 1 > static_cast<int64_t>(n)) {  // the box covers every column
    lo = cx - n / 2;
    hi = lo + n - 1;
  }
  std::vector<TileKey> out;
  for (int64_t raw_x = lo; raw_x <= hi; ++raw_x) {
    const int64_t wraps = raw_x >= 0 ? raw_x / n : -((-raw_x + n - 1) / n);
    const uint32_t x = static_cast<uint32_t>(raw_x - wraps * n);
    // Shift the tile's longitudes so they sit next to the centre, not across the antimeridian.
    const double lon_shift = 360.0 * static_cast<double>(wraps);
    for (uint32_t y = nw.y; y <= se.y; ++y) {
      const TileKey key{zoom, x, y};
      if (DistanceToTile(frame, key, lon_shift) <= reach_m) out.push_back(key);
    }
  }
  std::sort(out.begin(), out.end());
  out.erase(std::unique(out.begin(), out.end()), out.end());
  return out;
}

}  // namespace sightfix
