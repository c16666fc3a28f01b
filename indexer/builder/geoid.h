// Heights above mean sea level (EXIF GPSAltitude, GPX <ele>) to WGS84 ellipsoidal heights and
// back, with the EGM96 geoid: h = H + N, N the geoid undulation. N comes from PROJ with the
// 15-arc-minute EGM96 grid of Debian's proj-data (egm96_15.gtx), bilinearly interpolated.
// Thread safety: a Geoid may be used from any number of threads (each call builds nothing
// shared; PROJ objects are per call context, guarded inside).
#pragma once

#include <memory>
#include <string>

#include "indexer/base/status.h"

namespace sightfix {

class Geoid {
 public:
  // kNotFound when PROJ cannot find the grid (install proj-data), naming the grid file.
  static Result<std::unique_ptr<Geoid>> OpenEgm96();
  ~Geoid();

  // Undulation N in metres at WGS84 (lat, lon) degrees; NaN outside the grid.
  double Undulation(double lat_deg, double lon_deg) const;
  double EllipsoidalFromMsl(double lat_deg, double lon_deg, double msl_height_m) const {
    return msl_height_m + Undulation(lat_deg, lon_deg);
  }
  double MslFromEllipsoidal(double lat_deg, double lon_deg, double height_m) const {
    return height_m - Undulation(lat_deg, lon_deg);
  }

 private:
  struct Impl;
  explicit Geoid(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace sightfix
