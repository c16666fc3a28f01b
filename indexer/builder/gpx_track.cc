#include "indexer/builder/gpx_track.h"

#include <boost/property_tree/ptree.hpp>
#include <boost/property_tree/xml_parser.hpp>
#include <cmath>
#include <fstream>

#include "indexer/base/geo.h"
#include "indexer/base/iso_time.h"

namespace sightfix {
namespace {

namespace pt = boost::property_tree;

Status ReadPoint(const pt::ptree& node, TrackPoint* p) {
  const auto lat = node.get_optional<double>("<xmlattr>.lat");
  const auto lon = node.get_optional<double>("<xmlattr>.lon");
  const auto time = node.get_optional<std::string>("time");
  if (!lat || !lon) return Status::InvalidArgument("no lat or lon attribute");
  if (!time) return Status::InvalidArgument("no <time>");
  if (!std::isfinite(*lat) || !std::isfinite(*lon) || std::fabs(*lat) > 90 || std::fabs(*lon) > 180)
    return Status::InvalidArgument("lat or lon out of range");
  Result<double> t = ParseIsoUtc(*time);
  if (!t.ok()) return t.status();
  p->lat_deg = *lat, p->lon_deg = *lon, p->time_s = *t;
  const auto ele = node.get_optional<double>("ele");
  p->ele_m = ele ? *ele : NAN;
  return Status::Ok();
}

}  // namespace

Result<std::vector<TrackPoint>> ReadGpxTrack(const std::string& path) {
  std::ifstream in(path);
  if (!in) return Status::NotFound("cannot open GPX track " + path);
  pt::ptree doc;
  try {
    pt::read_xml(in, doc);
  } catch (const pt::xml_parser_error& e) {
    return Status::InvalidArgument(path + ":" + std::to_string(e.line()) + ": " + e.message());
  } catch (const std::exception& e) {
    return Status::InvalidArgument(path + ": unreadable GPX: " + e.what());
  }
  const auto gpx = doc.get_child_optional("gpx");
  if (!gpx) return Status::InvalidArgument(path + ": no <gpx> element");
  std::vector<TrackPoint> track;
  for (const auto& [name, trk] : *gpx) {
    if (name != "trk") continue;
    for (const auto& [seg_name, seg] : trk) {
      if (seg_name != "trkseg") continue;
      for (const auto& [pt_name, node] : seg) {
        if (pt_name != "trkpt") continue;
        TrackPoint p;
        const std::string where = path + ": track point " + std::to_string(track.size() + 1) + ": ";
        if (Status s = ReadPoint(node, &p); !s.ok())
          return Status::InvalidArgument(where + s.message());
        if (!track.empty() && p.time_s <= track.back().time_s)
          return Status::InvalidArgument(where + "time does not increase");
        track.push_back(p);
      }
    }
  }
  if (track.size() < 2) return Status::InvalidArgument(path + ": a track needs two points or more");
  return track;
}

Result<TrackSample> TrackAt(const std::vector<TrackPoint>& track, double t, double max_gap_s) {
  if (track.size() < 2 || t < track.front().time_s || t > track.back().time_s)
    return Status::InvalidArgument("time " + FormatIsoUtc(t) + " lies outside the track");
  size_t hi = 1;
  while (track[hi].time_s < t) ++hi;
  if (track[hi].time_s == t) {  // on a point: its position, the course of a segment beside it
    if (hi + 1 < track.size() && track[hi + 1].time_s - t <= max_gap_s) {
      Result<TrackSample> s = TrackAt(track, t + 0.5 * (track[hi + 1].time_s - t), max_gap_s);
      if (s.ok())
        s->lat_deg = track[hi].lat_deg, s->lon_deg = track[hi].lon_deg, s->ele_m = track[hi].ele_m;
      return s;
    }
    if (t - track[hi - 1].time_s > max_gap_s)
      return Status::InvalidArgument("time " + FormatIsoUtc(t) +
                                     " falls on a track point with gaps wider than " +
                                     std::to_string(max_gap_s) + " s on both sides");
  }
  const TrackPoint& a = track[hi - 1];
  const TrackPoint& b = track[hi];
  if (b.time_s - a.time_s > max_gap_s)
    return Status::InvalidArgument(
        "time " + FormatIsoUtc(t) + " falls in a gap of " + std::to_string(b.time_s - a.time_s) +
        " s between track points (limit " + std::to_string(max_gap_s) + " s)");
  const double u = (t - a.time_s) / (b.time_s - a.time_s);
  const GeodesicInverse g = GeodesicBetween(a.lat_deg, a.lon_deg, b.lat_deg, b.lon_deg);
  const GeodesicDirect p = GeodesicFrom(a.lat_deg, a.lon_deg, g.azimuth1_deg, u * g.distance_m);
  TrackSample s;
  s.lat_deg = p.lat_deg, s.lon_deg = p.lon_deg;
  s.ele_m = a.ele_m + u * (b.ele_m - a.ele_m);
  s.course_deg = std::fmod(p.azimuth2_deg + 360.0, 360.0);  // along the geodesic, at the point
  return s;
}

}  // namespace sightfix
