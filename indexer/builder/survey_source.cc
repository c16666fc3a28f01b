#include "indexer/builder/survey_source.h"

#include <algorithm>
#include <filesystem>

#include "indexer/builder/exif_gps.h"
#include "indexer/builder/geoid.h"
#include "indexer/builder/gpx_track.h"
#include "indexer/builder/rig.h"

namespace sightfix {
namespace {

namespace fs = std::filesystem;

// JPEG files under dir, as paths relative to it, sorted.
std::vector<std::string> JpegsUnder(const fs::path& dir) {
  std::vector<std::string> out;
  for (const auto& e : fs::recursive_directory_iterator(dir)) {
    if (!e.is_regular_file()) continue;
    std::string ext = e.path().extension().string();
    std::transform(ext.begin(), ext.end(), ext.begin(), ::tolower);
    if (ext == ".jpg" || ext == ".jpeg") out.push_back(fs::relative(e.path(), dir).string());
  }
  std::sort(out.begin(), out.end());
  return out;
}

Result<std::string> OneGpxIn(const fs::path& dir) {
  std::vector<std::string> found;
  for (const auto& e : fs::directory_iterator(dir))
    if (e.path().extension() == ".gpx") found.push_back(e.path().string());
  if (found.size() != 1)
    return Status::InvalidArgument(dir.string() + ": expected one .gpx file, found " +
                                   std::to_string(found.size()) + " (name it with --gpx)");
  return found[0];
}

SurveyFormat Detect(const fs::path& dir) {
  if (fs::exists(dir / "drive.csv")) return SurveyFormat::kDrive;
  if (fs::exists(dir / "rig.yml")) return SurveyFormat::kRig;
  for (const auto& e : fs::directory_iterator(dir))
    if (e.path().extension() == ".gpx") return SurveyFormat::kGpx;
  return SurveyFormat::kExif;
}

// One EXIF or GPX row; a Status naming the image when it cannot be made.
Status PhotoRow(const SurveySourceOptions& o, const Geoid& geoid,
                const std::vector<TrackPoint>* track, const std::string& image, DriveRow* row) {
  const fs::path path = fs::path(o.dir) / image;
  Result<ExifGps> exif = ReadExifGps(path.string(), /*require_position=*/track == nullptr);
  if (!exif.ok()) return exif.status();
  row->image = image;
  row->camera = o.camera;
  row->timestamp_s = exif->time_s;
  row->sigma_h_m = exif->h_error_m.value_or(o.default_sigma_h_m);
  double lat = exif->lat_deg, lon = exif->lon_deg, msl = exif->altitude_msl_m;
  std::optional<double> heading = exif->img_direction_deg;
  if (track) {
    Result<TrackSample> s = TrackAt(*track, exif->time_s, o.max_gap_s);
    if (!s.ok()) return Status::InvalidArgument(path.string() + ": " + s.status().message());
    lat = s->lat_deg, lon = s->lon_deg, msl = s->ele_m;
    if (!heading) heading = s->course_deg;
  }
  if (!heading) return Status::InvalidArgument(path.string() + ": no GPSImgDirection (heading)");
  if (!std::isfinite(msl)) return Status::InvalidArgument(path.string() + ": no altitude");
  const double h = geoid.EllipsoidalFromMsl(lat, lon, msl);
  if (!std::isfinite(h)) return Status::InvalidArgument(path.string() + ": outside the geoid grid");
  row->position = {lat, lon, h};
  row->attitude = {*heading, 0, 0};
  return Status::Ok();
}

}  // namespace

bool ParseSurveyFormat(const std::string& t, SurveyFormat* f) {
  const std::pair<const char*, SurveyFormat> names[] = {{"auto", SurveyFormat::kAuto},
                                                        {"drive", SurveyFormat::kDrive},
                                                        {"rig", SurveyFormat::kRig},
                                                        {"exif", SurveyFormat::kExif},
                                                        {"gpx", SurveyFormat::kGpx}};
  for (const auto& [name, value] : names)
    if (t == name) return *f = value, true;
  return false;
}

const char* SurveyFormatName(SurveyFormat f) {
  switch (f) {
    case SurveyFormat::kAuto:
      return "auto";
    case SurveyFormat::kDrive:
      return "drive";
    case SurveyFormat::kRig:
      return "rig";
    case SurveyFormat::kExif:
      return "exif";
    case SurveyFormat::kGpx:
      return "gpx";
  }
  return "?";
}

Result<SurveyRows> LoadSurveyRows(const SurveySourceOptions& o) {
  const fs::path dir(o.dir);
  if (!fs::is_directory(dir)) return Status::NotFound("no survey folder " + o.dir);
  SurveyRows out;
  out.format = o.format == SurveyFormat::kAuto ? Detect(dir) : o.format;
  std::vector<std::string>* problems = o.skip_bad ? &out.problems : nullptr;
  if (out.format == SurveyFormat::kDrive) {
    const std::string manifest = (dir / "drive.csv").string();
    std::vector<int> lines;
    Result<std::vector<DriveRow>> rows = ReadDriveManifest(manifest, problems, &lines);
    if (!rows.ok()) return rows.status();
    out.rows = std::move(rows).value();
    for (int line : lines) out.origin.push_back(manifest + ":" + std::to_string(line));
  } else if (out.format == SurveyFormat::kRig) {
    Result<Rig> rig = LoadRig((dir / "rig.yml").string());
    if (!rig.ok()) return rig.status();
    Result<std::vector<DriveRow>> rows = RigSurvey(*rig, o.max_gap_s, o.skip_bad, &out.problems);
    if (!rows.ok()) return rows.status();
    out.rows = std::move(rows).value();
  } else {
    Result<std::unique_ptr<Geoid>> geoid = Geoid::OpenEgm96();  // only photos need it
    if (!geoid.ok()) return geoid.status();
    std::vector<TrackPoint> track;
    if (out.format == SurveyFormat::kGpx) {
      Result<std::string> gpx = o.gpx.empty() ? OneGpxIn(dir) : Result<std::string>(o.gpx);
      if (!gpx.ok()) return gpx.status();
      Result<std::vector<TrackPoint>> t = ReadGpxTrack(*gpx);
      if (!t.ok()) return t.status();
      track = std::move(t).value();
    }
    for (const std::string& image : JpegsUnder(dir)) {
      DriveRow row;
      Status s =
          PhotoRow(o, **geoid, out.format == SurveyFormat::kGpx ? &track : nullptr, image, &row);
      if (!s.ok()) {
        if (!o.skip_bad) return s;
        out.problems.push_back(s.message());
        continue;
      }
      out.rows.push_back(row);
    }
    if (out.rows.empty() && out.problems.empty())
      return Status::NotFound(o.dir + ": no drive.csv, rig.yml or JPEG images");
    std::stable_sort(out.rows.begin(), out.rows.end(), [](const DriveRow& a, const DriveRow& b) {
      return a.timestamp_s < b.timestamp_s;
    });
  }
  for (size_t i = out.origin.size(); i < out.rows.size(); ++i)
    out.origin.push_back((dir / out.rows[i].image).string());
  const bool photos = out.format == SurveyFormat::kExif || out.format == SurveyFormat::kGpx;
  out.attitude_sigma_deg.assign(out.rows.size(), photos ? o.unknown_attitude_sigma_deg : 0.0);
  return out;
}

}  // namespace sightfix
