#include "indexer/base/iso_time.h"

#include <cmath>
#include <cstdio>
#include <ctime>

namespace sightfix {

std::string FormatIsoUtc(double unix_s) {
  const long long total_ms = std::llround(unix_s * 1000.0);
  long long secs = total_ms / 1000;
  int ms = static_cast<int>(total_ms % 1000);
  if (ms < 0) {
    ms += 1000;
    secs -= 1;
  }
  const std::time_t t = static_cast<std::time_t>(secs);
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[64];
  std::snprintf(buf, sizeof(buf), "%04d-%02d-%02dT%02d:%02d:%02d.%03dZ", tm.tm_year + 1900,
                tm.tm_mon + 1, tm.tm_mday, tm.tm_hour, tm.tm_min, tm.tm_sec, ms);
  return buf;
}

Result<double> ParseIsoUtc(const std::string& text) {
  std::tm tm{};
  int consumed = 0;
  if (std::sscanf(text.c_str(), "%4d-%2d-%2dT%2d:%2d:%2d%n", &tm.tm_year, &tm.tm_mon, &tm.tm_mday,
                  &tm.tm_hour, &tm.tm_min, &tm.tm_sec, &consumed) != 6 ||
      consumed != 19) {
    return Status::InvalidArgument("not an ISO 8601 UTC time: '" + text + "'");
  }
  if (tm.tm_mon < 1 || tm.tm_mon > 12 || tm.tm_mday < 1 || tm.tm_mday > 31 || tm.tm_hour > 23 ||
      tm.tm_min > 59 || tm.tm_sec > 60) {
    return Status::InvalidArgument("time field out of range in '" + text + "'");
  }
  tm.tm_year -= 1900;
  tm.tm_mon -= 1;
  double t = static_cast<double>(timegm(&tm));
  size_t i = 19;
  if (i < text.size() && text[i] == '.') {
    double scale = 0.1;
    for (++i; i < text.size() && text[i] >= '0' && text[i] <= '9'; ++i, scale /= 10)
      t += (text[i] - '0') * scale;
  }
  const std::string zone = text.substr(i);
  if (zone == "Z") return t;
  int oh = 0, om = 0;
  if (zone.size() == 6 && (zone[0] == '+' || zone[0] == '-') &&
      std::sscanf(zone.c_str() + 1, "%2d:%2d", &oh, &om) == 2 && oh <= 23 && om <= 59) {
    const double offset = (oh * 3600.0 + om * 60.0) * (zone[0] == '+' ? 1 : -1);
    return t - offset;
  }
  return Status::InvalidArgument("ISO 8601 time needs 'Z' or an offset +HH:MM: '" + text + "'");
}

}  // namespace sightfix
