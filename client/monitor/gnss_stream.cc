#include "client/monitor/gnss_stream.h"

#include <algorithm>
#include <cmath>
#include <fstream>

#include "indexer/base/csv.h"
#include "indexer/base/iso_time.h"

namespace sightfix {
namespace {

Status ParseNumbers(const std::vector<std::string>& f, size_t first,
                    std::initializer_list<double*> out) {
  size_t i = first;
  for (double* v : out)
    if (!ParseCsvNumber(f[i++], v))
      return Status::InvalidArgument("column " + std::to_string(i) + " is not a number");
  return Status::Ok();
}

}  // namespace

Result<std::vector<GnssFix>> ReadGnssCsv(const std::string& path) {
  auto parse = [](const std::vector<std::string>& f, GnssFix* r, const std::vector<GnssFix>& prev) {
    if (f.size() != 6)
      return Status::InvalidArgument("expected 6 columns, found " + std::to_string(f.size()));
    Result<double> t = ParseIsoUtc(f[0]);
    if (!t.ok()) return t.status();
    r->time_s = *t;
    Status s =
        ParseNumbers(f, 1, {&r->lat_deg, &r->lon_deg, &r->height_m, &r->sigma_h_m, &r->course_deg});
    if (!s.ok()) return s;
    if (std::abs(r->lat_deg) > 90 || std::abs(r->lon_deg) > 180)
      return Status::InvalidArgument("latitude or longitude out of range");
    if (!(r->sigma_h_m > 0)) return Status::InvalidArgument("sigma_h_m must be > 0");
    if (!prev.empty() && r->time_s <= prev.back().time_s)
      return Status::InvalidArgument("timestamps out of order");
    return Status::Ok();
  };
  return ReadCsvRows<GnssFix>(path, "timestamp,lat,lon,height,sigma_h_m,course_deg", parse);
}

Result<std::vector<SpoofedSpan>> ReadSpoofingCsv(const std::string& path) {
  auto parse = [](const std::vector<std::string>& f, SpoofedSpan* r,
                  const std::vector<SpoofedSpan>&) {
    if (f.size() != 4)
      return Status::InvalidArgument("expected 4 columns, found " + std::to_string(f.size()));
    Result<double> a = ParseIsoUtc(f[0]), b = ParseIsoUtc(f[1]);
    if (!a.ok()) return a.status();
    if (!b.ok()) return b.status();
    if (*b <= *a) return Status::InvalidArgument("end must come after start");
    r->span = {*a, *b};
    return ParseNumbers(f, 2, {&r->rate_mps, &r->bearing_deg});
  };
  Result<std::vector<SpoofedSpan>> spans =
      ReadCsvRows<SpoofedSpan>(path, "start,end,rate_mps,bearing_deg", parse);
  if (spans.ok())  // in start order, as the evaluator scores them
    std::sort(spans->begin(), spans->end(), [](const SpoofedSpan& a, const SpoofedSpan& b) {
      return a.span.start_s < b.span.start_s;
    });
  return spans;
}

std::optional<GnssFix> GnssAt(const std::vector<GnssFix>& stream, double t, double max_gap_s) {
  auto it = std::lower_bound(stream.begin(), stream.end(), t,
                             [](const GnssFix& g, double time) { return g.time_s < time; });
  if (it == stream.end()) return std::nullopt;
  if (it->time_s == t) return *it;
  if (it == stream.begin()) return std::nullopt;
  const GnssFix& a = *(it - 1);
  const GnssFix& b = *it;
  if (b.time_s - a.time_s > max_gap_s) return std::nullopt;
  const double u = (t - a.time_s) / (b.time_s - a.time_s);
  GnssFix out = a;
  out.time_s = t;
  out.lat_deg = a.lat_deg + u * (b.lat_deg - a.lat_deg);
  const double dlon = std::remainder(b.lon_deg - a.lon_deg, 360.0);  // across the antimeridian too
  out.lon_deg = std::remainder(a.lon_deg + u * dlon, 360.0);
  out.height_m = a.height_m + u * (b.height_m - a.height_m);
  out.sigma_h_m = a.sigma_h_m + u * (b.sigma_h_m - a.sigma_h_m);
  return out;
}

}  // namespace sightfix
