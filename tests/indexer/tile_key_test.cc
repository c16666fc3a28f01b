#include "indexer/map/tile_key.h"

#include <gtest/gtest.h>

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

// The XYZ worked example: lon 159.31, lat -42, zoom 4 -> tile x 15, y 10.
TEST(WebMercatorQuadTest, WorkedTileExample) {
  const TileKey k = TileForPoint(-42.0, 159.31, 4);
  EXPECT_EQ(k.x, 15u);
  EXPECT_EQ(k.y, 10u);
  EXPECT_EQ(k.ToString(), "4/15/10");
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
// the disc (GeographicLib direct problems along 720 azimuths and 60 radii).
std::set<TileKey> SampledCover(double lat, double lon, double radius_m, int zoom) {
  std::set<TileKey> out;
  for (int ir = 0; ir <= 60; ++ir) {
    for (int ia = 0; ia < 720; ++ia) {
      const GeodesicDirect d = GeodesicFrom(lat, lon, ia * 0.5, radius_m * ir / 60.0);
      out.insert(TileForPoint(d.lat_deg, d.lon_deg, zoom));
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
