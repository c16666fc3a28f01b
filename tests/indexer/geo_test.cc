#include "indexer/base/geo.h"

#include <gtest/gtest.h>

namespace sightfix {
namespace {

double Dms(int d, int m, double s) {
  return (std::abs(d) + m / 60.0 + s / 3600.0) * (d < 0 ? -1 : 1);
}

// Geoscience Australia, Geodetic Calculations worked example "Flinders Peak to Buninyong"
// (GRS80, which agrees with WGS84 to well under a millimetre over this line):
// distance 54 972.271 m, azimuth 306 52 05.37, reverse azimuth 127 10 25.07.
TEST(GeodesicTest, FlindersPeakToBuninyong) {
  const double lat1 = Dms(-37, 57, 3.72030), lon1 = Dms(144, 25, 29.52440);
  const double lat2 = Dms(-37, 39, 10.15610), lon2 = Dms(143, 55, 35.38390);
  const GeodesicInverse g = GeodesicBetween(lat1, lon1, lat2, lon2);
  EXPECT_NEAR(g.distance_m, 54972.271, 0.001);
  EXPECT_NEAR(g.azimuth1_deg + 360.0, Dms(306, 52, 5.37), 0.01 / 3600);
  EXPECT_NEAR(g.azimuth2_deg + 180.0, Dms(127, 10, 25.07), 0.01 / 3600);
}

// Karney, "Algorithms for geodesics", J. Geodesy 87 (2013), Table 2: the direct problem
// phi1 = 40 deg, alpha1 = 30 deg, s12 = 10 000 km on WGS84.
TEST(GeodesicTest, KarneyTable2Direct) {
  const GeodesicDirect d = GeodesicFrom(40.0, 0.0, 30.0, 10e6);
  EXPECT_NEAR(d.lat_deg, 41.79331020506, 1e-11);
  EXPECT_NEAR(d.lon_deg, 137.84490004377, 1e-11);
  EXPECT_NEAR(d.azimuth2_deg, 149.09016931807, 1e-11);
  // And back: the inverse problem recovers the distance and the starting azimuth.
  const GeodesicInverse g = GeodesicBetween(40.0, 0.0, d.lat_deg, d.lon_deg);
  EXPECT_NEAR(g.distance_m, 10e6, 1e-6);
  EXPECT_NEAR(g.azimuth1_deg, 30.0, 1e-9);
}

TEST(EnuFrameTest, RoundTripAndAxes) {
  const EnuFrame frame({44.0, -40.0, 40.0});
  const cv::Vec3d p(123.4, -56.7, 8.9);
  const GeoPoint g = frame.ToGeo(p);
  const cv::Vec3d back = frame.ToEnu(g);
  EXPECT_LT(cv::norm(back - p), 1e-8);  // nanometres
  // 100 m east and north agree with the geodesic distance and azimuth (common practice: the
  // tangent plane and the ellipsoid differ by d^3/R^2, micrometres here).
  const GeoPoint east = frame.ToGeo({100, 0, 0});
  const GeodesicInverse ge = GeodesicBetween(44.0, -40.0, east.lat_deg, east.lon_deg);
  EXPECT_NEAR(ge.distance_m, 100.0, 1e-3);
  EXPECT_NEAR(ge.azimuth1_deg, 90.0, 1e-3);
  const GeoPoint north = frame.ToGeo({0, 100, 0});
  EXPECT_NEAR(GeodesicBetween(44.0, -40.0, north.lat_deg, north.lon_deg).azimuth1_deg, 0.0, 1e-6);
  EXPECT_GT(frame.ToGeo({0, 0, 10}).height_m, 49.99);
}

TEST(GeoPointTest, Validity) {
  EXPECT_TRUE(IsValidGeoPoint({90, 180, 0}));
  EXPECT_FALSE(IsValidGeoPoint({90.1, 0, 0}));
  EXPECT_FALSE(IsValidGeoPoint({0, -180.5, 0}));
  EXPECT_FALSE(IsValidGeoPoint({std::nan(""), 0, 0}));
}

}  // namespace
}  // namespace sightfix
