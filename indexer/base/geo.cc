#include "indexer/base/geo.h"

#include <GeographicLib/Geodesic.hpp>
#include <GeographicLib/LocalCartesian.hpp>
#include <cmath>

namespace sightfix {

bool IsValidGeoPoint(const GeoPoint& p) {
  return std::isfinite(p.lat_deg) && std::isfinite(p.lon_deg) && std::isfinite(p.height_m) &&
         p.lat_deg >= -90 && p.lat_deg <= 90 && p.lon_deg >= -180 && p.lon_deg <= 180;
}

GeodesicInverse GeodesicBetween(double lat1_deg, double lon1_deg, double lat2_deg,
                                double lon2_deg) {
  GeodesicInverse out;
  GeographicLib::Geodesic::WGS84().Inverse(lat1_deg, lon1_deg, lat2_deg, lon2_deg, out.distance_m,
                                           out.azimuth1_deg, out.azimuth2_deg);
  return out;
}

GeodesicDirect GeodesicFrom(double lat_deg, double lon_deg, double azimuth_deg, double distance_m) {
  GeodesicDirect out;
  GeographicLib::Geodesic::WGS84().Direct(lat_deg, lon_deg, azimuth_deg, distance_m, out.lat_deg,
                                          out.lon_deg, out.azimuth2_deg);
  return out;
}

struct EnuFrame::Impl {
  GeographicLib::LocalCartesian local;
};

EnuFrame::EnuFrame(const GeoPoint& origin)
    : origin_(origin),
      impl_(std::make_unique<Impl>(Impl{GeographicLib::LocalCartesian(
          origin.lat_deg, origin.lon_deg, origin.height_m, GeographicLib::Geocentric::WGS84())})) {}

EnuFrame::~EnuFrame() = default;

EnuFrame::EnuFrame(const EnuFrame& other)
    : origin_(other.origin_), impl_(std::make_unique<Impl>(*other.impl_)) {}

EnuFrame& EnuFrame::operator=(const EnuFrame& other) {
  if (this != &other) {
    origin_ = other.origin_;
    *impl_ = *other.impl_;
  }
  return *this;
}

cv::Vec3d EnuFrame::ToEnu(const GeoPoint& p) const {
  cv::Vec3d enu;
  impl_->local.Forward(p.lat_deg, p.lon_deg, p.height_m, enu[0], enu[1], enu[2]);
  return enu;
}

GeoPoint EnuFrame::ToGeo(const cv::Vec3d& enu) const {
  GeoPoint p;
  impl_->local.Reverse(enu[0], enu[1], enu[2], p.lat_deg, p.lon_deg, p.height_m);
  return p;
}

}  // namespace sightfix
