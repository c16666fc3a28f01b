// Position, time and heading of a photo from its EXIF block (CIPA DC-008 / JEITA CP-3451,
// "Exif 2.32"), read and written with exiv2.
//
// Read: GPSLatitude/GPSLatitudeRef, GPSLongitude/GPSLongitudeRef (degrees, minutes, seconds as
// rationals), GPSAltitude/GPSAltitudeRef (metres above (0) or below (1) sea level), optional
// GPSImgDirection with GPSImgDirectionRef T (true north; M, magnetic, is refused: the
// declination is unknown here), optional GPSHPositioningError (tag 0x001F, metres). Time:
// DateTimeOriginal with SubSecTimeOriginal and OffsetTimeOriginal when the offset is present,
// else GPSDateStamp + GPSTimeStamp (UTC by definition); neither is an error.
// Thread safety: the functions may run concurrently on different files.
#pragma once

#include <optional>
#include <string>

#include "indexer/base/status.h"

namespace sightfix {

struct ExifGps {
  bool has_position = true;  // false only when read with require_position = false
  double lat_deg = 0, lon_deg = 0;
  double altitude_msl_m = 0;                // above mean sea level
  std::optional<double> img_direction_deg;  // true north, clockwise
  std::optional<double> h_error_m;          // GPSHPositioningError
  double time_s = 0;                        // Unix seconds, UTC
};

// kNotFound: cannot open; kInvalidArgument: no EXIF block, EXIF without GPS position (when
// require_position), a tag out of range, no usable time; each message names the file.
Result<ExifGps> ReadExifGps(const std::string& path, bool require_position = true);
// Adds or replaces those tags in the JPEG at path (time as DateTimeOriginal with milliseconds
// in SubSecTimeOriginal, offset +00:00, and the GPS date/time stamps). Without has_position,
// only the time (and the direction when set) is written.
Status WriteExifGps(const std::string& path, const ExifGps& gps);

}  // namespace sightfix
