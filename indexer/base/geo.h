// Geodesy on the WGS84 ellipsoid: geodesic distance and azimuth, and a local East-North-Up
// frame. Thin, tested wrappers over GeographicLib (Karney, "Algorithms for geodesics",
// J. Geodesy 2013), so the rest of sightfix never touches ellipsoid formulas itself.
//
// Units: latitude and longitude in degrees, heights in metres above the WGS84 ellipsoid
// (ellipsoidal, not above mean sea level), distances in metres, azimuths in degrees clockwise
// from true north. Thread safety: all functions and const methods are safe to call concurrently.
#pragma once

#include <memory>
#include <opencv2/core/matx.hpp>

namespace sightfix {

struct GeoPoint {
  double lat_deg = 0;
  double lon_deg = 0;
  double height_m = 0;  // ellipsoidal
};

// True when latitude is in [-90, 90], longitude in [-180, 180] and all three are finite.
bool IsValidGeoPoint(const GeoPoint& p);

struct GeodesicInverse {
  double distance_m = 0;
  double azimuth1_deg = 0;  // forward azimuth at the first point, (-180, 180]
  double azimuth2_deg = 0;  // forward azimuth at the second point, (-180, 180]
};

// The shortest geodesic between two points (heights ignored).
GeodesicInverse GeodesicBetween(double lat1_deg, double lon1_deg, double lat2_deg, double lon2_deg);

struct GeodesicDirect {
  double lat_deg = 0;
  double lon_deg = 0;       // in [-180, 180]
  double azimuth2_deg = 0;  // forward azimuth at the end point
};

// The point reached from (lat, lon) along azimuth_deg after distance_m metres.
GeodesicDirect GeodesicFrom(double lat_deg, double lon_deg, double azimuth_deg, double distance_m);

// A local East-North-Up Cartesian frame tangent to the ellipsoid at `origin` (exact transform
// through geocentric coordinates, GeographicLib::LocalCartesian). Metres; x east, y north, z up.
class EnuFrame {
 public:
  explicit EnuFrame(const GeoPoint& origin);
  ~EnuFrame();
  EnuFrame(const EnuFrame& other);
  EnuFrame& operator=(const EnuFrame& other);

  const GeoPoint& origin() const { return origin_; }
  cv::Vec3d ToEnu(const GeoPoint& p) const;
  GeoPoint ToGeo(const cv::Vec3d& enu) const;

 private:
  struct Impl;
  GeoPoint origin_;
  std::unique_ptr<Impl> impl_;  // pimpl keeps GeographicLib out of this header
};

}  // namespace sightfix
