#include "indexer/builder/exif_gps.h"

#include <cmath>
#include <cstdio>
#include <exiv2/exiv2.hpp>

#include "indexer/base/iso_time.h"

namespace sightfix {
namespace {

// "2026:05:04 09:00:01" (EXIF's form) plus subseconds and an offset, to ISO 8601.
std::string ExifToIso(const std::string& dt, const std::string& subsec, const std::string& offset) {
  if (dt.size() < 19) return "";
  std::string iso = dt.substr(0, 19);
  iso[4] = iso[7] = '-';
  iso[10] = 'T';
  if (!subsec.empty()) iso += "." + subsec;
  return iso + offset;
}

std::optional<double> Rational(const Exiv2::ExifData& exif, const char* key, long index = 0) {
  auto it = exif.findKey(Exiv2::ExifKey(key));
  if (it == exif.end() || it->count() <= index) return std::nullopt;
  const Exiv2::Rational r = it->toRational(index);
  if (r.second == 0) return std::nullopt;
  return static_cast<double>(r.first) / r.second;
}

std::string Text(const Exiv2::ExifData& exif, const char* key) {
  auto it = exif.findKey(Exiv2::ExifKey(key));
  if (it == exif.end()) return "";
  std::string s = it->toString();
  while (!s.empty() && (s.back() == '\0' || s.back() == ' ')) s.pop_back();
  return s;
}

// Degrees from the three rationals of a GPS coordinate and its N/S or E/W reference.
std::optional<double> Coordinate(const Exiv2::ExifData& exif, const char* key, const char* ref_key,
                                 char negative) {
  const auto d = Rational(exif, key, 0), m = Rational(exif, key, 1), s = Rational(exif, key, 2);
  const std::string ref = Text(exif, ref_key);
  if (!d || !m || !s || ref.empty()) return std::nullopt;
  const double v = *d + *m / 60 + *s / 3600;
  return ref[0] == negative ? -v : v;
}

Result<double> PhotoTime(const Exiv2::ExifData& exif) {
  const std::string offset = Text(exif, "Exif.Photo.OffsetTimeOriginal");
  const std::string dt = Text(exif, "Exif.Photo.DateTimeOriginal");
  if (!dt.empty() && !offset.empty())
    return ParseIsoUtc(ExifToIso(dt, Text(exif, "Exif.Photo.SubSecTimeOriginal"), offset));
  const std::string date = Text(exif, "Exif.GPSInfo.GPSDateStamp");
  const auto h = Rational(exif, "Exif.GPSInfo.GPSTimeStamp", 0);
  const auto m = Rational(exif, "Exif.GPSInfo.GPSTimeStamp", 1);
  const auto s = Rational(exif, "Exif.GPSInfo.GPSTimeStamp", 2);
  if (date.size() >= 10 && h && m && s) {
    Result<double> day = ParseIsoUtc(ExifToIso(date.substr(0, 10) + " 00:00:00", "", "Z"));
    if (!day.ok()) return day.status();
    return *day + *h * 3600 + *m * 60 + *s;
  }
  return Status::InvalidArgument(
      "no usable time: needs DateTimeOriginal with OffsetTimeOriginal, or GPSDateStamp with "
      "GPSTimeStamp");
}

Exiv2::URationalValue Dms(double deg) {
  deg = std::fabs(deg);
  const double d = std::floor(deg), m = std::floor((deg - d) * 60);
  const double s = ((deg - d) * 60 - m) * 60;
  Exiv2::URationalValue v;
  v.value_.push_back({static_cast<uint32_t>(d), 1});
  v.value_.push_back({static_cast<uint32_t>(m), 1});
  v.value_.push_back({static_cast<uint32_t>(std::llround(s * 1e6)), 1000000});
  return v;
}

Exiv2::URationalValue One(double v, uint32_t denominator) {
  Exiv2::URationalValue r;
  r.value_.push_back(
      {static_cast<uint32_t>(std::llround(std::fabs(v) * denominator)), denominator});
  return r;
}

}  // namespace

Result<ExifGps> ReadExifGps(const std::string& path, bool require_position) {
  try {
    auto image = Exiv2::ImageFactory::open(path);
    image->readMetadata();
    const Exiv2::ExifData& exif = image->exifData();
    if (exif.empty()) return Status::InvalidArgument(path + ": no EXIF block");
    ExifGps g;
    const auto lat =
        Coordinate(exif, "Exif.GPSInfo.GPSLatitude", "Exif.GPSInfo.GPSLatitudeRef", 'S');
    const auto lon =
        Coordinate(exif, "Exif.GPSInfo.GPSLongitude", "Exif.GPSInfo.GPSLongitudeRef", 'W');
    g.has_position = lat && lon;
    if (!g.has_position && require_position)
      return Status::InvalidArgument(path + ": EXIF block without a GPS position");
    if (g.has_position) {
      if (std::fabs(*lat) > 90 || std::fabs(*lon) > 180)
        return Status::InvalidArgument(path + ": GPS position out of range");
      g.lat_deg = *lat, g.lon_deg = *lon;
      const auto alt = Rational(exif, "Exif.GPSInfo.GPSAltitude");
      if (!alt) return Status::InvalidArgument(path + ": EXIF block without GPSAltitude");
      auto ref = exif.findKey(Exiv2::ExifKey("Exif.GPSInfo.GPSAltitudeRef"));
      g.altitude_msl_m = (ref != exif.end() && ref->toLong() == 1) ? -*alt : *alt;
    }
    if (const auto dir = Rational(exif, "Exif.GPSInfo.GPSImgDirection")) {
      const std::string dref = Text(exif, "Exif.GPSInfo.GPSImgDirectionRef");
      if (!dref.empty() && dref[0] == 'M')
        return Status::InvalidArgument(path +
                                       ": GPSImgDirection is magnetic (Ref M); true north "
                                       "is needed");
      if (*dir < 0 || *dir > 360)
        return Status::InvalidArgument(path + ": GPSImgDirection out of range");
      g.img_direction_deg = *dir;
    }
    g.h_error_m = Rational(exif, "Exif.GPSInfo.0x001f");
    Result<double> t = PhotoTime(exif);
    if (!t.ok()) return Status::InvalidArgument(path + ": " + t.status().message());
    g.time_s = *t;
    return g;
  } catch (const std::exception& e) {  // Exiv2::Error, or the library's own std:: errors
    return Status::NotFound(path + ": cannot read EXIF: " + e.what());
  }
}

Status WriteExifGps(const std::string& path, const ExifGps& g) {
  try {
    auto image = Exiv2::ImageFactory::open(path);
    image->readMetadata();
    Exiv2::ExifData& exif = image->exifData();
    exif["Exif.GPSInfo.GPSVersionID"] = "2 3 0 0";
    if (g.has_position) {
      exif["Exif.GPSInfo.GPSLatitudeRef"] = g.lat_deg < 0 ? "S" : "N";
      exif["Exif.GPSInfo.GPSLatitude"] = Dms(g.lat_deg);
      exif["Exif.GPSInfo.GPSLongitudeRef"] = g.lon_deg < 0 ? "W" : "E";
      exif["Exif.GPSInfo.GPSLongitude"] = Dms(g.lon_deg);
      exif["Exif.GPSInfo.GPSAltitudeRef"] = std::string(g.altitude_msl_m < 0 ? "1" : "0");
      exif["Exif.GPSInfo.GPSAltitude"] = One(g.altitude_msl_m, 1000);
    }
    if (g.img_direction_deg) {
      exif["Exif.GPSInfo.GPSImgDirectionRef"] = "T";
      exif["Exif.GPSInfo.GPSImgDirection"] = One(*g.img_direction_deg, 10000);
    }
    if (g.h_error_m) exif["Exif.GPSInfo.0x001f"] = One(*g.h_error_m, 1000);
    const std::string iso = FormatIsoUtc(g.time_s);  // YYYY-MM-DDTHH:MM:SS.mmmZ
    std::string dt = iso.substr(0, 19);
    dt[4] = dt[7] = ':';
    dt[10] = ' ';
    exif["Exif.Photo.DateTimeOriginal"] = dt;
    exif["Exif.Photo.SubSecTimeOriginal"] = iso.substr(20, 3);
    exif["Exif.Photo.OffsetTimeOriginal"] = "+00:00";
    exif["Exif.GPSInfo.GPSDateStamp"] = dt.substr(0, 10);
    const double day_s = std::fmod(g.time_s, 86400.0);
    Exiv2::URationalValue hms;
    hms.value_.push_back({static_cast<uint32_t>(day_s / 3600), 1});
    hms.value_.push_back({static_cast<uint32_t>(std::fmod(day_s, 3600) / 60), 1});
    hms.value_.push_back({static_cast<uint32_t>(std::llround(std::fmod(day_s, 60) * 1000)), 1000});
    exif["Exif.GPSInfo.GPSTimeStamp"] = hms;
    image->writeMetadata();
    return Status::Ok();
  } catch (const Exiv2::Error& e) {
    return Status::IoError(path + ": cannot write EXIF: " + e.what());
  }
}

}  // namespace sightfix
