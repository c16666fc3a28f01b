#include "indexer/map/tile_key.h"

#include <gtest/gtest.h>

#include <GeographicLib/Geodesic.hpp>
#include <algorithm>
#include <cmath>
#include <set>

#include "indexer/base/geo.h"

namespace sightfix {
namespace {

// OGC 17-083r2 (Two Dimensional Tile Matrix Set), WebMercatorQuad: cell size at zoom 0
// 156 543.033 928 041 m for 256-pixel tiles, top-left origin (-20 037 508.342 789 2,
// 20 037 508.342 789 2).
TEST(WebMercatorQuadTest, OgcTileMatrixSetConstants) {
  EXPECT_NEAR(WebMercatorCellSizeM(0), 156543.033928041, 1e-9);
  EXPECT_NEAR(WebMercatorCellSizeM(17), 156543.033928041 / 131072, 1e-12);
  double x = 0, y = 0;
  WebMercatorFromLatLon(kWebMercatorMaxLatDeg, -180.0, &x, &y);
  EXPECT_NEAR(x, -20037508.3427892, 1e-6);
  EXPECT_NEAR(y, 20037508.3427892, 1e-6);
}

// Reference tile of a point, written out here rather than taken from TileForPoint: the
// OpenStreetMap wiki's "Slippy map tilenames" formula for the WebMercatorQuad tiling of
// OGC 17-083r2 (x east from 180 W, y south from 85.05 N), with n = 2^zoom:
//   x = floor((lon + 180) / 360 * n),  y = floor((1 - asinh(tan(lat)) / pi) / 2 * n).
// Longitude is wrapped to [-180, 180) first, so 180 E is column 0.
TileKey SlippyMapTile(double lat_deg, double lon_deg, int zoom) {
  const double n = std::pow(2.0, zoom);
  const double lon = lon_deg - 360.0 * std::floor((lon_deg + 180.0) / 360.0);
  const double lat_rad = lat_deg * M_PI / 180.0;
  TileKey k;
  k.zoom = zoom;
  k.x = static_cast<uint32_t>(std::floor((lon + 180.0) / 360.0 * n));
  k.y = static_cast<uint32_t>(std::floor((1.0 - std::asinh(std::tan(lat_rad)) / M_PI) / 2.0 * n));
  return k;
}

// Worked by hand (Python's math module for the transcendental steps) with the slippy-map
// formula above (OpenStreetMap wiki "Slippy map tilenames"; OGC 17-083r2 WebMercatorQuad):
// lon 159.31, lat -42, zoom 4 (n = 16):
//   x = floor((159.31 + 180) / 360 * 16) = floor(15.0804) = 15
//   tan(-42 deg) = -0.900404, asinh(-0.900404) = -0.809167, / pi = -0.257566
//   y = floor((1 + 0.257566) / 2 * 16) = floor(0.628783 * 16) = floor(10.0605) = 10
TEST(WebMercatorQuadTest, WorkedTileExample) {
  const TileKey k = TileForPoint(-42.0, 159.31, 4);
  EXPECT_EQ(k.x, 15u);
  EXPECT_EQ(k.y, 10u);
  EXPECT_EQ(k.ToString(), "4/15/10");
  // A point on a column's west edge belongs to that column (floor): at zoom 4, lon 0 gives
  // x = floor(180 / 360 * 16) = floor(8.0) = 8 and lon 22.5 gives floor(202.5 / 360 * 16) =
  // floor(9.0) = 9, both quotients exact in binary.
  EXPECT_EQ(TileForPoint(-42.0, 0.0, 4).x, 8u);
  EXPECT_EQ(TileForPoint(-42.0, 22.5, 4).x, 9u);
}

// The library agrees with the slippy-map formula away from tile edges (where the two forms of
// y, log(tan + sec) and asinh(tan), could round differently).
TEST(WebMercatorQuadTest, MatchesTheSlippyMapFormula) {
  for (double lat : {-60.0, -1.0, 0.3, 44.0003, 70.0}) {
    for (double lon : {-179.99, -40.0001, 0.0001, 12.5001, 179.99}) {
      for (int zoom : {0, 4, 12, 17}) {
        EXPECT_EQ(TileForPoint(lat, lon, zoom), SlippyMapTile(lat, lon, zoom))
            << lat << " " << lon << " z" << zoom;
      }
    }
  }
}

TEST(WebMercatorQuadTest, PointLiesInItsTileBounds) {
  for (double lat : {-60.0, -1.0, 0.3, 44.0, 70.0}) {
    for (double lon : {-179.99, -40.0, 0.0, 12.5, 179.99}) {
      const TileBounds b = BoundsOfTile(TileForPoint(lat, lon, 17));
      EXPECT_LE(b.west_deg, lon);
      EXPECT_GT(b.east_deg, lon);
      EXPECT_LE(b.south_deg, lat);
      EXPECT_GT(b.north_deg, lat);
    }
  }
  EXPECT_EQ(TileForPoint(0, 180.0, 3).x, 0u);  // 180 E is the antimeridian, column 0
}

// Independent reference for the circle cover: every tile holding a point of a dense sample of
// the disc. The sample points are geodesic direct problems on the WGS84 ellipsoid along 720
// azimuths and 60 radii, solved by GeographicLib's Geodesic::Direct itself (Karney 2013), and
// each point's tile comes from the slippy-map formula above: no code under test is involved.
std::set<TileKey> SampledCover(double lat, double lon, double radius_m, int zoom) {
  const GeographicLib::Geodesic& wgs84 = GeographicLib::Geodesic::WGS84();
  std::set<TileKey> out;
  for (int ir = 0; ir <= 60; ++ir) {
    for (int ia = 0; ia < 720; ++ia) {
      double lat2 = 0, lon2 = 0;
      wgs84.Direct(lat, lon, ia * 0.5, radius_m * ir / 60.0, lat2, lon2);
      out.insert(SlippyMapTile(lat2, lon2, zoom));
    }
  }
  return out;
}

TEST(TilesTouchingCircleTest, NearATileCornerMatchesSampledReference) {
  // A point 30 m east and 30 m south of a tile's north-west corner (42.4 m from it).
  const TileKey home = TileForPoint(44.0, -40.0, 17);
  const TileBounds b = BoundsOfTile(home);
  const EnuFrame corner({b.north_deg, b.west_deg, 0});
  const GeoPoint c = corner.ToGeo({30, -30, 0});
  ASSERT_EQ(TileForPoint(c.lat_deg, c.lon_deg, 17), home);
  // Radius 25: only the home tile; 35: plus the west and north neighbours; 45: all four.
  const size_t expected_counts[] = {1, 3, 4};
  const double radii[] = {25, 35, 45};
  for (int i = 0; i < 3; ++i) {
    const std::vector<TileKey> got = TilesTouchingCircle(c.lat_deg, c.lon_deg, radii[i], 17);
    EXPECT_EQ(got.size(), expected_counts[i]) << "radius " << radii[i];
    const std::set<TileKey> ref = SampledCover(c.lat_deg, c.lon_deg, radii[i], 17);
    EXPECT_EQ(std::set<TileKey>(got.begin(), got.end()), ref) << "radius " << radii[i];
  }
}

TEST(TilesTouchingCircleTest, LargerCirclesMatchSampledReference) {
  for (double radius : {150.0, 700.0, 2500.0}) {
    const std::vector<TileKey> got = TilesTouchingCircle(44.0003, -39.9991, radius, 17);
    const std::set<TileKey> ref = SampledCover(44.0003, -39.9991, radius, 17);
    // The sample can only miss tiles the circle grazes; it must never hold one we lack.
    for (const TileKey& k : ref) EXPECT_TRUE(std::count(got.begin(), got.end(), k)) << k.ToString();
    EXPECT_LE(got.size(), ref.size() + ref.size() / 20 + 2);
  }
}

TEST(TilesTouchingCircleTest, WrapsAcrossTheAntimeridian) {
  // 20 m west of 180 E on the equator, radius 60 m: columns 2^17 - 1 and 0.
  const GeodesicDirect c = GeodesicFrom(0.0001, 180.0, -90.0, 20.0);
  const std::vector<TileKey> got = TilesTouchingCircle(c.lat_deg, c.lon_deg, 60.0, 17);
  std::set<uint32_t> columns;
  for (const TileKey& k : got) columns.insert(k.x);
  EXPECT_EQ(columns, (std::set<uint32_t>{0u, 131071u}));
  const std::set<TileKey> ref = SampledCover(c.lat_deg, c.lon_deg, 60.0, 17);
  EXPECT_EQ(std::set<TileKey>(got.begin(), got.end()), ref);
}

TEST(TilesTouchingCircleTest, ZeroRadiusIsTheTileOfThePoint) {
  const std::vector<TileKey> got = TilesTouchingCircle(44.0003, -39.9991, 0.0, 17);
  ASSERT_EQ(got.size(), 1u);
  EXPECT_EQ(got[0], TileForPoint(44.0003, -39.9991, 17));
}

}  // namespace
}  // namespace sightfix
