// The sun's topocentric position for a place and a time: the Solar Position Algorithm (SPA) of
// Reda & Andreas, "Solar Position Algorithm for Solar Radiation Applications", NREL/TP-560-34302
// (2004, revised 2008). The Earth's heliocentric longitude, latitude and radius come
// from the paper's truncated VSOP87 periodic terms (its Table A4.2), nutation from its Table A4.3;
// then aberration, apparent sidereal time, parallax and refraction as in its section 3.
//
// Accuracy: the paper states +/-0.0003 deg in zenith and azimuth for years -2000 to 6000, given
// delta T (and UT1 - UTC). Measured (tests/demo_route/solar_position_test.cc): the paper's worked
// example to its printed 1e-5 deg; python3-ephem 4.1.4 (libastro's VSOP87), years 1066 to 2100,
// within 6.3e-5 deg in zenith and 1.5e-4 deg of sky in azimuth without refraction. Refraction is
// the paper's eq. 42 bulk formula (1.02' / tan(e0 + 10.3 / (e0 + 5.11)) of the geometric elevation
// e0, scaled by pressure and temperature); it and ephem's differ by up to 0.003 deg above the
// horizon, and near the horizon any such formula is rough (real refraction varies with weather).
//
// Frames and units: degrees; latitude geodetic, north positive; longitude east positive; zenith
// from the local vertical; azimuth clockwise from north in [0, 360) (east = 90). Times are UTC.
// Pure functions: thread-safe.
#pragma once

#include "indexer/base/status.h"

namespace sightfix::demo {

// A broken-down UTC time on the Gregorian calendar (the Julian calendar before 15 October 1582,
// as the paper's Julian day formula does).
struct UtcTime {
  int year = 2000;    // -2000 to 6000 (the algorithm's stated range)
  int month = 1;      // 1 to 12
  int day = 1;        // 1 to 31
  int hour = 0;       // 0 to 23
  int minute = 0;     // 0 to 59
  double second = 0;  // [0, 61): a leap second counts as 60.x
  // InvalidArgument naming the field when one lies outside its range.
  Status Validate() const;
};

struct SolarPositionOptions {
  double latitude_deg = 0;   // [-90, 90], north positive
  double longitude_deg = 0;  // [-180, 180], east positive
  double elevation_m = 0;    // above the ellipsoid, [-6500000, 1e8]; moves the parallax only
  // Local air pressure and temperature, for refraction only. The defaults are the standard
  // atmosphere at sea level; pressure_mbar = 0 turns refraction off (geometric position).
  double pressure_mbar = 1013.25;  // [0, 5000], as the paper allows
  double temperature_c = 15;       // [-272, 6000] (the formula divides by 273 + T)
  // TT - UT1 in seconds. 69 s is near its value for 2017 to 2026 (IERS; from memory); each
  // second of error moves the sun about 1.2e-5 deg along its path, so the default serves any
  // date within decades of today. |delta_t_s| <= 8000 (the paper's range).
  double delta_t_s = 69;
  // UT1 - UTC in seconds, |.| < 0.9 s by definition of UTC (IERS Bulletin A gives it). Left at
  // 0 it costs up to 0.9 s of the Earth's turn: 0.004 deg of hour angle.
  double delta_ut1_s = 0;
  // InvalidArgument naming the field when a value lies outside its range or is not finite.
  Status Validate() const;
};

// The sun seen from the observer. Besides the answer (zenith and azimuth), the geocentric
// quantities the paper tabulates for its worked example, for tests and for lighting models.
struct SolarPosition {
  double zenith_deg = 0;               // topocentric, refraction included; [0, 180]
  double azimuth_deg = 0;              // topocentric, clockwise from north; [0, 360)
  double elevation_deg = 0;            // 90 - zenith_deg
  double geometric_elevation_deg = 0;  // topocentric, without refraction
  double earth_sun_distance_au = 0;    // heliocentric radius vector R
  double right_ascension_deg = 0;      // geocentric apparent, [0, 360)
  double declination_deg = 0;          // geocentric apparent
  double hour_angle_deg = 0;           // observer's local (geocentric) hour angle, [0, 360)
  double julian_day = 0;               // of the UT1 instant (paper eq. 4)
};

// The sun's position at `unix_seconds` (seconds since 1970-01-01 00:00:00 UTC, without leap
// seconds, as POSIX time counts). Fails (InvalidArgument) when the options are invalid or the
// time lies outside years -2000 to 6000.
Result<SolarPosition> ComputeSolarPosition(double unix_seconds,
                                           const SolarPositionOptions& options);
// The same at a broken-down UTC time. Fails (InvalidArgument) for invalid options or time.
Result<SolarPosition> ComputeSolarPosition(const UtcTime& time,
                                           const SolarPositionOptions& options);

// The Julian day of a UTC time by the paper's eq. 4 (Meeus, Astronomical Algorithms, ch. 7).
// REQUIRES: time.Validate().ok()
double JulianDay(const UtcTime& time);

}  // namespace sightfix::demo
