#include "demo_route/demo_outputs.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <memory>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "demo_route/look_alikes.h"
#include "demo_route/vehicle_lights.h"
#include "indexer/base/iso_time.h"
#include "indexer/builder/exif_gps.h"
#include "indexer/builder/geoid.h"
#include "indexer/map/drive_manifest.h"

namespace sightfix::demo {
namespace fs = std::filesystem;
namespace {

// One row per frame: its image, time, pose, the calibration file `camera` and sigma_h_m.
std::vector<DriveRow> ManifestRows(const std::vector<Frame>& frames,
                                   const std::vector<double>& sigma_h_m, const EnuFrame& enu,
                                   double start, const std::string& camera) {
  std::vector<DriveRow> rows;
  for (size_t k = 0; k < frames.size(); ++k) {
    const Frame& f = frames[k];
    DriveRow r;
    r.image = DriveImageName(k);
    r.timestamp_s = start + f.time_s;
    r.position = enu.ToGeo(f.position);
    r.attitude = f.attitude;
    r.camera = camera;
    r.sigma_h_m = sigma_h_m.empty() ? 0.0 : sigma_h_m[k];
    rows.push_back(r);
  }
  return rows;
}

Status WriteGnssCsv(const PlannedDrive& d, const EnuFrame& enu, double start, const fs::path& dir) {
  std::ofstream g(dir / "gnss.csv");
  g << "timestamp,lat,lon,height,sigma_h_m,course_deg\n";
  char buf[256];
  for (const GnssSample& x : d.gnss) {
    const GeoPoint p = enu.ToGeo(x.position);
    std::snprintf(buf, sizeof(buf), "%s,%.9f,%.9f,%.3f,%.2f,%.2f\n",
                  FormatIsoUtc(start + x.time_s).c_str(), p.lat_deg, p.lon_deg, p.height_m,
                  x.claimed_sigma_h_m, x.course_deg);
    g << buf;
  }
  return g ? Status::Ok() : Status::IoError("cannot write " + (dir / "gnss.csv").string());
}

// Ground truth of the attacks, for the evaluator (gnss_stream.h has the format).
Status WriteSpoofingCsv(const PlannedDrive& d, double start, const fs::path& dir) {
  std::ofstream sp(dir / "spoofing.csv");
  sp << "start,end,rate_mps,bearing_deg\n";
  char buf[256];
  for (const SpoofSegment& x : d.spoofing) {
    std::snprintf(buf, sizeof(buf), "%s,%s,%.3f,%.2f\n", FormatIsoUtc(start + x.start_s).c_str(),
                  FormatIsoUtc(start + x.start_s + x.length_s).c_str(), x.rate_mps, x.bearing_deg);
    sp << buf;
  }
  return sp ? Status::Ok() : Status::IoError("cannot write " + (dir / "spoofing.csv").string());
}

// Copies the survey's images into dir and tags each with its time and, for photos, its pose.
Status TagSurveyImages(const PlannedDrive& d, const EnuFrame& enu, const Geoid& geoid,
                       const fs::path& out, const fs::path& dir, bool photos) {
  const double start = kSurveyStartUnix + d.condition.start_offset_s;
  for (size_t k = 0; k < d.reported.size(); ++k) {
    const std::string name = DriveImageName(k);
    fs::copy_file(out / d.condition.name / name, dir / name);
    const Frame& f = d.reported[k];
    const GeoPoint p = enu.ToGeo(f.position);
    ExifGps g;
    g.time_s = start + f.time_s;
    g.has_position = photos;
    if (photos) {
      g.lat_deg = p.lat_deg, g.lon_deg = p.lon_deg;
      g.altitude_msl_m = geoid.MslFromEllipsoidal(p.lat_deg, p.lon_deg, p.height_m);
      g.img_direction_deg = std::fmod(f.attitude.heading_deg + 360.0, 360.0);
      g.h_error_m = d.reported_sigma_h_m[k];  // the survey's INS accuracy, as in drive.csv
    }
    if (Status s = WriteExifGps((dir / name).string(), g); !s.ok()) return s;
  }
  return Status::Ok();
}

// dir/track.gpx: the survey's path at 10 Hz as its INS reports it (clean world: the true path),
// heights above sea level.
Status WriteGpxTrack(const PlannedDrive& d, const Town& town, const EnuFrame& enu,
                     const Geoid& geoid, const fs::path& dir) {
  const double start = kSurveyStartUnix + d.condition.start_offset_s;
  std::ofstream gpx(dir / "track.gpx");
  gpx << "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<gpx version=\"1.1\" "
         "creator=\"sightfix-demo-route\" xmlns=\"http://www.topografix.com/GPX/1/1\">\n"
         "<trk><name>survey</name><trkseg>\n";
  const double duration = DriveDuration(d.passes, d.plan);
  std::vector<double> times;
  for (int i = 0; i * 0.1 <= duration + 0.1; ++i) times.push_back(std::min(i * 0.1, duration));
  // The realistic world's track carries the survey's error, like its drive.csv.
  const std::vector<SurveyError> errors =
      d.survey_error_model ? SurveyErrorsAt(town, d, times) : std::vector<SurveyError>();
  char buf[256];
  for (size_t i = 0; i < times.size(); ++i) {
    const double t = times[i];
    cv::Vec3d position = PoseAtTime(d.path, d.passes, d.plan, t).position;
    if (!errors.empty()) position += errors[i].position_m;
    const GeoPoint p = enu.ToGeo(position);
    std::snprintf(buf, sizeof(buf),
                  "<trkpt lat=\"%.9f\" lon=\"%.9f\"><ele>%.3f</ele><time>%s</time></trkpt>\n",
                  p.lat_deg, p.lon_deg, geoid.MslFromEllipsoidal(p.lat_deg, p.lon_deg, p.height_m),
                  FormatIsoUtc(start + t).c_str());
    gpx << buf;
  }
  gpx << "</trkseg></trk></gpx>\n";
  return gpx ? Status::Ok() : Status::IoError("cannot write " + (dir / "track.gpx").string());
}

nlohmann::json CameraJson(const CameraModel& c) {
  return {{"image_width", c.width_px},
          {"image_height", c.height_px},
          {"fx", c.fx},
          {"fy", c.fy},
          {"cx", c.cx},
          {"cy", c.cy},
          {"distortion_k1_k2_p1_p2_k3", c.distortion}};
}

nlohmann::json LayoutJson(const Town& town) {
  return {{"turn_radius_m", town.options.turn_radius_m},
          {"stub_length_m", town.options.stub_length_m},
          {"curve_length_m", town.options.curve_length_m},
          {"curve_offset_m", town.options.curve_offset_m},
          {"streets", town.streets.size()},
          {"buildings", town.buildings.size()},
          {"vehicles", town.vehicles.size()},
          {"poles", town.poles.size()},
          {"trees", town.trees.size()},
          {"lane_width_m", StreetSection::kLaneWidthM},
          {"facade_offset_min_m", StreetSection::kFacadeM},
          {"survey_lane_offset_m", StreetSection::kSurveyLaneM}};
}

nlohmann::json AppearanceJson(const Condition& c) {
  return {{"vehicle_variant", c.variant},
          {"exposure", c.exposure},
          {"contrast", c.contrast},
          {"tone_gamma", c.tone_gamma},
          {"tint_bgr", {c.tint[0], c.tint[1], c.tint[2]}},
          {"noise_sigma", c.noise_sigma},
          {"blur_sigma_px", c.blur_sigma},
          {"jpeg_quality", c.jpeg_quality},
          {"sun", c.look.sun},
          {"ambient", c.look.ambient}};
}

// The GNSS model and the spoofed segments of a query drive, into its drive object dj.
void AddGnssJson(const PlannedDrive& d, nlohmann::json* dj) {
  const GnssOptions gnss;
  (*dj)["gnss"] = {{"file", "gnss.csv"},
                   {"rate_hz", gnss.rate_hz},
                   {"model", "first-order Gauss-Markov per axis"},
                   {"sigma_h_m_per_axis", gnss.sigma_h_m},
                   {"sigma_v_m", gnss.sigma_v_m},
                   {"tau_s", gnss.tau_s},
                   {"claimed_sigma_h_m", gnss.claimed_sigma_h_m}};
  const double start = kSurveyStartUnix + d.condition.start_offset_s;
  for (const SpoofSegment& s : d.spoofing)
    (*dj)["spoofed_segments"].push_back(
        {{"start", FormatIsoUtc(start + s.start_s)},
         {"start_s", s.start_s},
         {"length_s", s.length_s},
         {"rate_mps", s.rate_mps},
         {"bearing_deg", s.bearing_deg},
         {"model", "offset grows linearly at rate_mps along bearing_deg, then snaps back"}});
}

// The calibration error of one drive (written minus true) and the camera as written.
nlohmann::json CalibrationErrorJson(const PlannedDrive& d) {
  const CalibrationError& e = d.calibration_error;
  return {{"focal_scale", e.focal_scale},
          {"principal_point_offset_px", {e.principal_point_px[0], e.principal_point_px[1]}},
          {"k1_error", e.k1},
          {"k2_error", e.k2},
          {"time_offset_s", e.time_offset_s},
          {"camera_written", CameraJson(d.camera_written)},
          {"files", {{"written", "camera.yml"}, {"truth", kCameraTruthFile}}},
          {"note",
           "camera.yml is the camera above with these errors; images are exposed time_offset_s "
           "after drive.csv's time, at the true pose of that instant"}};
}

// The realistic survey's error: the draw, its multipath jumps and the frames they touched.
nlohmann::json SurveyErrorJson(const PlannedDrive& d) {
  const SurveyErrorDraw& s = d.survey_draw;
  nlohmann::json j = {
      {"model", "first-order Gauss-Markov per ENU axis and per attitude angle, 20 Hz grid"},
      {"sigma_horizontal_m_per_axis", s.sigma_horizontal_m},
      {"sigma_vertical_m", s.sigma_vertical_m},
      {"tau_s", s.tau_s},
      {"heading_sigma_deg", s.heading_sigma_deg},
      {"pitch_roll_sigma_deg", s.pitch_roll_sigma_deg},
      {"attitude_tau_s", s.attitude_tau_s},
      {"seed", s.seed},
      {"multipath_min_aspect_ratio", d.canyon_min_aspect_ratio},
      {"truth_file", kSurveyTruthFile},
      {"multipath_jumps", nlohmann::json::array()}};
  for (const MultipathJump& m : d.jumps)
    j["multipath_jumps"].push_back({{"start_s", m.start_s},
                                    {"hold_s", m.hold_s},
                                    {"offset_east_north_m", {m.offset_m[0], m.offset_m[1]}}});
  int frames = 0;
  for (const SurveyError& e : d.survey_errors) frames += e.multipath;
  j["multipath_frames"] = frames;
  return j;
}

// The realistic world's light of drive d: the sun at its time and what the look made of it.
nlohmann::json DriveLightJson(const PlannedDrive& d) {
  const Appearance& a = d.condition.look;
  nlohmann::json j = {{"sun_time", FormatIsoUtc(d.sun_unix_s)},
                      {"sun_unix_s", d.sun_unix_s},
                      {"sun_azimuth_deg", d.sun.azimuth_deg},
                      {"sun_elevation_deg", d.sun.elevation_deg},
                      {"sun_dir_enu", {a.sun_dir[0], a.sun_dir[1], a.sun_dir[2]}},
                      {"direct", a.sun},
                      {"ambient", a.ambient},
                      {"cast_shadows", a.cast_shadows && a.sun > 0 && a.sun_dir[2] > 0.01},
                      {"shadow_texel_m", a.shadow_texel_m},
                      {"shadow_range_m", a.shadow_range_m}};
  if (a.window_glow > 0 || a.lamp_intensity > 0 || a.headlight_intensity > 0)
    j["night"] = {{"window_glow", a.window_glow},
                  {"lamp_intensity", a.lamp_intensity},
                  {"lamp_colour_bgr", {a.lamp_colour[0], a.lamp_colour[1], a.lamp_colour[2]}},
                  {"headlight_intensity", a.headlight_intensity}};
  return j;
}

// The realistic world's light settings, town-wide.
nlohmann::json TownLightJson(const LightRanges& l) {
  return {{"start", FormatIsoUtc(kSurveyStartUnix)},
          {"start_unix_s", kSurveyStartUnix},
          {"sun_model",
           "Reda & Andreas SPA (solar_position.h) at the origin, each drive at its start time; "
           "refraction at the standard atmosphere"},
          {"shadow_texel_m", l.shadow_texel_m},
          {"shadow_range_m", l.shadow_range_m},
          {"dusk_offset_s", l.dusk_offset_s},
          {"night_offset_s", l.night_offset_s},
          {"night_sky_light", l.night_sky_light},
          {"lit_window_share", l.lit_window_share},
          {"lit_window_seed", "HashSeed(facade seed, 0x6c6974) per building"},
          {"lamp_intensity", l.lamp_intensity},
          {"headlight_intensity", l.headlight_intensity},
          {"movers_cast_shadows", false},
          {"vehicle_lamps", VehicleLampsJson(VehicleLampModel{})}};
}

std::vector<double> FrameTimesOf(const std::vector<Frame>& frames) {
  std::vector<double> times;
  for (const Frame& f : frames) times.push_back(f.time_s);
  return times;
}

nlohmann::json DriveJson(const PlannedDrive& d) {
  nlohmann::json dj;
  dj["images"] = d.truth.size();
  dj["camera"] = CameraJson(d.camera);
  if (d.calibration_error_model) dj["calibration_error"] = CalibrationErrorJson(d);
  if (d.survey_error_model) dj["survey_error"] = SurveyErrorJson(d);
  if (d.camera_nuisance_model)
    dj["camera_nuisances"] = CameraNuisanceJson(d.camera_draw, FrameTimesOf(d.exposure));
  dj["camera_height_m"] = d.plan.camera_height_m;
  dj["speed_mps"] = d.plan.speed_mps;
  dj["spacing_m"] = d.plan.spacing_m;
  dj["spacing_jitter_m"] = d.plan.spacing_jitter_m;
  dj["attitude_jitter_sigma_deg"] = {d.plan.heading_jitter_deg, d.plan.pitch_jitter_deg,
                                     d.plan.roll_jitter_deg};
  dj["start"] = FormatIsoUtc(kSurveyStartUnix + d.condition.start_offset_s);
  for (const Pass& p : d.passes)
    dj["passes"].push_back({{"s_from_m", p.s_from_m},
                            {"s_to_m", p.s_to_m},
                            {"lane_offset_right_m", p.lane_offset_m},
                            {"wander_m", p.wander_m}});
  dj["appearance"] = AppearanceJson(d.condition);
  if (d.sun_model) dj["light"] = DriveLightJson(d);
  if (!d.gnss.empty()) AddGnssJson(d, &dj);
  return dj;
}

// The realistic world's changes (query drives) and traffic of drive d, into dj.
void AddWorldJson(const Town& town, const PlannedDrive& d, nlohmann::json* dj) {
  if (d.world.has_traffic) (*dj)["traffic"] = TrafficJson(d.world.traffic);
  if (!d.world.facades.empty() || d.world.season.changed() || !d.world.works.empty() ||
      !d.world.vehicles_gone.empty() || !d.world.vehicles_added.empty())
    (*dj)["changes"] = ChangesJson(town, d.world);
}

}  // namespace

std::string DriveImageName(size_t k) {
  char name[32];
  std::snprintf(name, sizeof(name), "images/%06zu.jpg", k);
  return name;
}

Status WriteDriveFiles(const PlannedDrive& d, const EnuFrame& enu, const fs::path& dir) {
  Status s = SaveCameraModel(d.camera_written, (dir / "camera.yml").string());
  if (s.ok() && d.calibration_error_model)
    s = SaveCameraModel(d.camera, (dir / kCameraTruthFile).string());
  if (!s.ok()) return s;
  const double start = kSurveyStartUnix + d.condition.start_offset_s;
  s = WriteDriveManifest((dir / "drive.csv").string(),
                         ManifestRows(d.reported, d.reported_sigma_h_m, enu, start, "camera.yml"));
  if (s.ok() && d.survey_error_model)
    s = WriteDriveManifest(
        (dir / kSurveyTruthFile).string(),
        ManifestRows(d.exposure, {}, enu, start,
                     d.calibration_error_model ? kCameraTruthFile : "camera.yml"));
  if (!s.ok() || d.gnss.empty()) return s;
  s = WriteGnssCsv(d, enu, start, dir);
  if (!s.ok()) return s;
  return WriteSpoofingCsv(d, start, dir);
}

Status WriteOcclusionCsv(const std::vector<double>& moving_shares, const fs::path& dir) {
  std::ofstream f(dir / kOcclusionFile);
  f << "image,moving_share\n";
  char buf[64];
  for (size_t k = 0; k < moving_shares.size(); ++k) {
    std::snprintf(buf, sizeof(buf), "%s,%.6f\n", DriveImageName(k).c_str(), moving_shares[k]);
    f << buf;
  }
  return f ? Status::Ok() : Status::IoError("cannot write " + (dir / kOcclusionFile).string());
}

Status ExportPhotoSurvey(const PlannedDrive& d, const Town& town, const EnuFrame& enu,
                         const fs::path& out, bool photos) {
  Result<std::unique_ptr<Geoid>> geoid = Geoid::OpenEgm96();
  if (!geoid.ok()) return geoid.status();
  const fs::path dir = out / (photos ? "survey-exif" : "survey-gpx");
  fs::remove_all(dir);
  fs::create_directories(dir / "images");
  fs::copy_file(out / d.condition.name / "camera.yml", dir / "camera.yml");
  if (Status s = TagSurveyImages(d, enu, **geoid, out, dir, photos); !s.ok()) return s;
  if (photos) return Status::Ok();
  return WriteGpxTrack(d, town, enu, **geoid, dir);
}

nlohmann::json TownJson(const DemoOptions& o, const Town& town,
                        const std::vector<PlannedDrive>& drives) {
  nlohmann::json j;
  j["generator"] = "sightfix-demo-route 1";
  j["seed"] = o.seed;
  j["options"] = {{"route_length_m", o.route_length_m},
                  {"image_size", {o.image_width, o.image_height}},
                  {"survey_spacing_m", o.survey_spacing_m},
                  {"query_spacing_m", o.query_spacing_m},
                  {"supersample", o.supersample}};
  j["origin"] = {
      {"lat_deg", kTownOrigin.lat_deg},
      {"lon_deg", kTownOrigin.lon_deg},
      {"height_m", kTownOrigin.height_m},
      {"frame",
       "ENU tangent at origin (GeographicLib LocalCartesian, WGS84); road surface at z = 0"}};
  j["layout"] = LayoutJson(town);
  j["world"] = WorldName(o.world);
  j["survey_sigma_scale"] = o.survey_sigma_scale;
  if (o.world != World::kClean) j["nuisances"] = EnabledNuisanceGroups(NuisancesFor(o));
  if (o.world == World::kClean)
    j["survey_pose_noise"] = {
        {"horizontal_sigma_m_per_axis", 0.02},
        {"vertical_sigma_m", 0.03},
        {"heading_sigma_deg", 0.05},
        {"pitch_roll_sigma_deg", 0.03},
        {"note",
         "drive.csv of the survey holds truth plus this noise; images are rendered at truth"}};
  else
    j["survey_pose_noise"] = {
        {"note", "per drive: drives.survey.survey_error; the survey's truth.csv holds the truth"}};
  for (const PlannedDrive& d : drives) {
    j["drives"][d.condition.name] = DriveJson(d);
    AddWorldJson(town, d, &j["drives"][d.condition.name]);
  }
  if (!town.look_alikes.empty()) j["look_alikes"] = LookAlikesJson(town);
  if (const LightRanges l = NuisancesForWorld(o.world).light; l.enabled)
    j["light"] = TownLightJson(l);
  for (const PlannedDrive& d : drives)
    if (d.condition.name == kOffMapDriveName)
      j["excursion"] = ExcursionJson(town, d.condition.name, d.truth);
  return j;
}

void WriteContactSheet(const fs::path& out, const std::vector<PlannedDrive>& drives) {
  const int cols = 4, tw = 240, th = 180, label = 22;
  cv::Mat sheet(int(drives.size()) * (th + label), cols * tw, CV_8UC3, cv::Scalar(30, 30, 30));
  for (size_t r = 0; r < drives.size(); ++r) {
    const size_t n = drives[r].truth.size();
    for (int c = 0; c < cols && n > 0; ++c) {
      const size_t k = (n - 1) * (2 * c + 1) / (2 * cols);
      cv::Mat img = cv::imread((out / drives[r].condition.name / DriveImageName(k)).string());
      if (img.empty()) continue;
      cv::resize(img, img, cv::Size(tw, th), 0, 0, cv::INTER_AREA);
      img.copyTo(sheet(cv::Rect(c * tw, int(r) * (th + label) + label, tw, th)));
      cv::putText(sheet, drives[r].condition.name + " #" + std::to_string(k),
                  {c * tw + 6, int(r) * (th + label) + 16}, cv::FONT_HERSHEY_SIMPLEX, 0.45,
                  cv::Scalar(235, 235, 235), 1, cv::LINE_AA);
    }
  }
  cv::imwrite((out / "contact_sheet.png").string(), sheet);
}

}  // namespace sightfix::demo
