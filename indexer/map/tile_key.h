// WebMercatorQuad tiles (OGC Two Dimensional Tile Matrix Set, 17-083r2): the spherical Web
// Mercator projection (EPSG:3857) cut into 2^z x 2^z tiles at zoom z, x growing east from the
// antimeridian and y growing south from about 85.05 N (the XYZ convention).
//
// Tile side on the ground: 40 075 016.686 m / 2^z * cos(latitude); about 306 m * cos(lat)
// at the default zoom 17. Thread-safe (pure functions).
#pragma once

#include <cstdint>
#include <string>
#include <vector>

namespace sightfix {

// Spherical radius of EPSG:3857 (the WGS84 semi-major axis).
constexpr double kWebMercatorRadiusM = 6378137.0;
// OGC 17-083r2 Table 2 (WebMercatorQuad): cell size at zoom 0 for 256-pixel tiles.
double WebMercatorCellSizeM(int zoom, int tile_size_px = 256);
// Largest latitude the projection covers, atan(sinh(pi)) in degrees.
constexpr double kWebMercatorMaxLatDeg = 85.0511287798066;
constexpr int kDefaultTileZoom = 17;

struct TileKey {
  int zoom = kDefaultTileZoom;
  uint32_t x = 0;
  uint32_t y = 0;
  // "z/x/y"
  std::string ToString() const;
  bool operator==(const TileKey& o) const { return zoom == o.zoom && x == o.x && y == o.y; }
  bool operator<(const TileKey& o) const;
};

struct TileBounds {
  double west_deg, south_deg, east_deg, north_deg;
};

// EPSG:3857 metres of a WGS84 point; latitude clamped to the projection's range.
void WebMercatorFromLatLon(double lat_deg, double lon_deg, double* x_m, double* y_m);
// The tile holding a point. REQUIRES: 0 <= zoom <= 30. Longitude 180 belongs to x = 0.
TileKey TileForPoint(double lat_deg, double lon_deg, int zoom);
TileBounds BoundsOfTile(const TileKey& key);

// Every tile that a circle of radius_m metres around (lat, lon) touches (its interior or
// boundary meets the tile), sorted, without duplicates; wraps across the antimeridian.
// Distances are taken in a local tangent plane at the centre, exact to millimetres for radii
// up to about 20 km; above that a margin of r^2/R is added so no touched tile is ever missed.
// REQUIRES: radius_m >= 0, |lat_deg| < kWebMercatorMaxLatDeg.
std::vector<TileKey> TilesTouchingCircle(double lat_deg, double lon_deg, double radius_m, int zoom);

}  // namespace sightfix
