#include "demo_route/demo_town.h"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <opencv2/core/utility.hpp>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>
#include <thread>

#include "demo_route/drive_plan.h"
#include "demo_route/town_renderer.h"
#include "indexer/map/drive_manifest.h"
#include "indexer/builder/exif_gps.h"
#include "indexer/base/geo.h"
#include "indexer/builder/geoid.h"
#include "indexer/base/iso_time.h"
#include "indexer/base/progress.h"
#include "indexer/base/threads.h"

namespace sightfix::demo {
namespace fs = std::filesystem;
namespace {

// The invented site: open water in no country, an arbitrary datum for the demo (not a place).
const GeoPoint kTownOrigin{44.0, -40.0, 40.0};
// 2026-05-04T09:00:00Z, the survey's start; query drives start later the same day.
constexpr double kSurveyStartUnix = 1777885200.0;

// One drive's look and its camera's post-processing.
struct Condition {
  std::string name;
  int variant = 0;  // which parked vehicles are present
  Appearance look;
  double exposure = 1.0, contrast = 1.0, tone_gamma = 1.0;
  cv::Vec3d tint{1, 1, 1};  // BGR gain
  double noise_sigma = 1.0, blur_sigma = 0.0;
  int jpeg_quality = 92;
  double start_offset_s = 0;  // after the survey's start
};

cv::Vec3d SunDir(double azimuth_deg, double elevation_deg) {
  const double a = azimuth_deg * M_PI / 180, e = elevation_deg * M_PI / 180;
  return {std::sin(a) * std::cos(e), std::cos(a) * std::cos(e), std::sin(e)};
}

Condition Named(const char* name, int variant) {
  Condition c;
  c.name = name;
  c.variant = variant;
  return c;
}

std::vector<Condition> Conditions() {
  Condition survey = Named("survey", 0);
  survey.look.sun_dir = SunDir(135, 40);
  Condition day = Named("query-day", 1);
  day.look.sun_dir = SunDir(160, 46);
  day.noise_sigma = 2.0, day.blur_sigma = 0.5, day.jpeg_quality = 85, day.exposure = 1.04;
  day.start_offset_s = 3 * 3600;
  Condition dusk = Named("query-dusk", 2);
  dusk.look.sun_dir = SunDir(265, 4);
  dusk.look.sun = 0.25, dusk.look.ambient = 0.5;
  dusk.look.sky_horizon = {0.45, 0.6, 0.92}, dusk.look.sky_zenith = {0.5, 0.32, 0.25},
  dusk.look.haze = {0.45, 0.5, 0.65};
  dusk.look.haze_m = 350;
  dusk.exposure = 0.62, dusk.tone_gamma = 1.45, dusk.tint = {0.8, 0.92, 1.12};
  dusk.noise_sigma = 5.0, dusk.blur_sigma = 0.8, dusk.jpeg_quality = 75;
  dusk.start_offset_s = 10.5 * 3600;
  Condition overcast = Named("query-overcast", 3);
  overcast.look.sun = 0.0, overcast.look.ambient = 0.95, overcast.look.cloud = 0.0;
  overcast.look.sky_horizon = {0.8, 0.8, 0.78}, overcast.look.sky_zenith = {0.72, 0.71, 0.7},
  overcast.look.haze = {0.78, 0.78, 0.76};
  overcast.look.haze_m = 300;
  overcast.contrast = 0.72, overcast.tint = {1.08, 1.03, 0.9};
  overcast.noise_sigma = 2.5, overcast.blur_sigma = 0.9, overcast.jpeg_quality = 75;
  overcast.start_offset_s = 26 * 3600;
  return {survey, day, dusk, overcast};
}

CameraModel SurveyCamera(int w, int h) {
  CameraModel c;
  c.width_px = w, c.height_px = h;
  c.fx = c.fy = 500.0 * w / 640.0;  // 65 degrees horizontal field of view
  c.cx = (w - 1) / 2.0, c.cy = (h - 1) / 2.0;
  return c;
}

// The fleet camera of query-overcast: another size, a wider lens, barrel distortion.
CameraModel FleetCamera() {
  CameraModel c;
  c.width_px = 720, c.height_px = 540;
  c.fx = 445, c.fy = 447, c.cx = 362.4, c.cy = 268.1;
  c.distortion = {-0.22, 0.05, 4e-4, -3e-4, 0.0};
  return c;
}

cv::Mat FinishImage(const cv::Mat& linear, const Condition& c, uint64_t seed) {
  cv::Mat img = linear * c.exposure;
  img = (img - cv::Scalar::all(0.45)) * c.contrast + cv::Scalar::all(0.45);
  std::vector<cv::Mat> ch;
  cv::split(img, ch);
  for (int i = 0; i < 3; ++i) ch[i] *= c.tint[i];
  cv::merge(ch, img);
  cv::max(img, 0.0, img);
  if (c.tone_gamma != 1.0) cv::pow(img, c.tone_gamma, img);
  cv::Mat out;
  img.convertTo(out, CV_32FC3, 255.0);
  if (c.blur_sigma > 0) cv::GaussianBlur(out, out, cv::Size(0, 0), c.blur_sigma);
  cv::Mat noise(out.size(), CV_32FC3);
  cv::RNG rng(seed);
  rng.fill(noise, cv::RNG::NORMAL, 0.0, c.noise_sigma);
  out += noise;
  out.convertTo(out, CV_8UC3);
  return out;
}

struct PlannedDrive {
  Condition condition;
  CameraModel camera;
  std::vector<Pass> passes;
  DrivePlanOptions plan;
  std::vector<Frame> truth;
  std::vector<Frame> reported;  // survey: INS-reported poses; queries: the truth itself
  std::vector<SpoofSegment> spoofing;
  std::vector<GnssSample> gnss;
};

Frame NoisyPose(const Frame& f, Rng& rng) {
  Frame g = f;
  const double nu = 0.03 * rng.Normal(), nn = 0.02 * rng.Normal(), ne = 0.02 * rng.Normal();
  g.position += cv::Vec3d(ne, nn, nu);
  g.attitude.heading_deg = std::fmod(g.attitude.heading_deg + 0.05 * rng.Normal() + 360, 360);
  g.attitude.pitch_deg += 0.03 * rng.Normal();
  g.attitude.roll_deg += 0.03 * rng.Normal();
  return g;
}

std::vector<PlannedDrive> PlanDrives(const Town& town, const DemoOptions& o) {
  std::vector<PlannedDrive> drives;
  const double L = town.route.length();
  const std::vector<Condition> conditions = Conditions();
  for (size_t i = 0; i < conditions.size(); ++i) {
    Rng rng(HashSeed(o.seed, 0x647276, i));
    PlannedDrive d;
    d.condition = conditions[i];
    if (i == 0) {
      d.camera = SurveyCamera(o.image_width, o.image_height);
      d.passes = {{0, L, StreetSection::kSurveyLaneM, 0.0, 0.0},
                  {L, 0, StreetSection::kSurveyLaneM, 0.0, 0.0}};
      d.plan.spacing_m = o.survey_spacing_m;
      d.plan.speed_mps = 8.0;
      d.plan.heading_jitter_deg = 0.3, d.plan.pitch_jitter_deg = 0.3, d.plan.roll_jitter_deg = 0.3;
    } else {
      d.camera = i == 3 ? FleetCamera() : SurveyCamera(o.image_width, o.image_height);
      // Inner lane, 2.5-3.5 m from the survey lane; out along the route, then back against it.
      const double lane = StreetSection::kQueryLaneM + rng.Uniform(-0.25, 0.25);
      const double a = rng.Uniform(0.0, 0.08) * L, b = rng.Uniform(0.62, 0.78) * L;
      const double b2 = std::min(L, b + rng.Uniform(0.0, 0.1) * L), c = rng.Uniform(0.12, 0.3) * L;
      d.passes = {{a, b, lane, 0.25, rng.Uniform(0, 6.28)},
                  {b2, c, lane, 0.25, rng.Uniform(0, 6.28)}};
      d.plan.spacing_m = o.query_spacing_m;
      d.plan.spacing_jitter_m = 0.3 * o.query_spacing_m;
      d.plan.speed_mps = 9.0;
      d.plan.turnaround_s = 8.0;
      d.plan.camera_height_m = i == 3 ? 1.38 : 1.5;
      d.plan.heading_jitter_deg = 1.6, d.plan.pitch_jitter_deg = 0.7, d.plan.roll_jitter_deg = 0.5;
    }
    d.truth = PlanFrames(town.route, d.passes, d.plan, rng);
    for (const Frame& f : d.truth) d.reported.push_back(i == 0 ? NoisyPose(f, rng) : f);
    if (i > 0) {
      d.spoofing = PlanSpoofing(DriveDuration(d.passes, d.plan), rng);
      d.gnss = SimulateGnss(town.route, d.passes, d.plan, GnssOptions{}, d.spoofing, rng);
    }
    drives.push_back(std::move(d));
  }
  return drives;
}

Status WriteDriveFiles(const PlannedDrive& d, const EnuFrame& enu, const fs::path& dir) {
  Status s = SaveCameraModel(d.camera, (dir / "camera.yml").string());
  if (!s.ok()) return s;
  const double start = kSurveyStartUnix + d.condition.start_offset_s;
  std::vector<DriveRow> rows;
  for (size_t k = 0; k < d.reported.size(); ++k) {
    const Frame& f = d.reported[k];
    DriveRow r;
    char name[32];
    std::snprintf(name, sizeof(name), "images/%06zu.jpg", k);
    r.image = name;
    r.timestamp_s = start + f.time_s;
    r.position = enu.ToGeo(f.position);
    r.attitude = f.attitude;
    r.camera = "camera.yml";
    r.sigma_h_m = d.condition.variant == 0 ? 0.02 : 0.0;
    rows.push_back(r);
  }
  s = WriteDriveManifest((dir / "drive.csv").string(), rows);
  if (!s.ok() || d.gnss.empty()) return s;
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
  if (!g) return Status::IoError("cannot write " + (dir / "gnss.csv").string());
  // Ground truth of the attacks, for the evaluator (gnss_stream.h has the format).
  std::ofstream sp(dir / "spoofing.csv");
  sp << "start,end,rate_mps,bearing_deg\n";
  for (const SpoofSegment& x : d.spoofing) {
    std::snprintf(buf, sizeof(buf), "%s,%s,%.3f,%.2f\n", FormatIsoUtc(start + x.start_s).c_str(),
                  FormatIsoUtc(start + x.start_s + x.length_s).c_str(), x.rate_mps, x.bearing_deg);
    sp << buf;
  }
  return sp ? Status::Ok() : Status::IoError("cannot write " + (dir / "spoofing.csv").string());
}


// The survey as EXIF-tagged JPEGs (photos = true) or as JPEGs with times plus a GPX track.
Status ExportPhotoSurvey(const PlannedDrive& d, const Town& town, const EnuFrame& enu,
                         const fs::path& out, bool photos) {
  Result<std::unique_ptr<Geoid>> geoid = Geoid::OpenEgm96();
  if (!geoid.ok()) return geoid.status();
  const fs::path dir = out / (photos ? "survey-exif" : "survey-gpx");
  fs::remove_all(dir);
  fs::create_directories(dir / "images");
  fs::copy_file(out / d.condition.name / "camera.yml", dir / "camera.yml");
  const double start = kSurveyStartUnix + d.condition.start_offset_s;
  for (size_t k = 0; k < d.reported.size(); ++k) {
    char name[32];
    std::snprintf(name, sizeof(name), "images/%06zu.jpg", k);
    fs::copy_file(out / d.condition.name / name, dir / name);
    const Frame& f = d.reported[k];
    const GeoPoint p = enu.ToGeo(f.position);
    ExifGps g;
    g.time_s = start + f.time_s;
    g.has_position = photos;
    if (photos) {
      g.lat_deg = p.lat_deg, g.lon_deg = p.lon_deg;
      g.altitude_msl_m = (*geoid)->MslFromEllipsoidal(p.lat_deg, p.lon_deg, p.height_m);
      g.img_direction_deg = std::fmod(f.attitude.heading_deg + 360.0, 360.0);
      g.h_error_m = 0.02;  // the survey's INS accuracy (drive.csv's sigma_h_m)
    }
    if (Status s = WriteExifGps((dir / name).string(), g); !s.ok()) return s;
  }
  if (photos) return Status::Ok();
  std::ofstream gpx(dir / "track.gpx");
  gpx << "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<gpx version=\"1.1\" "
         "creator=\"sightfix-demo-route\" xmlns=\"http://www.topografix.com/GPX/1/1\">\n"
         "<trk><name>survey</name><trkseg>\n";
  const double duration = DriveDuration(d.passes, d.plan);
  char buf[256];
  for (int i = 0; i * 0.1 <= duration + 0.1; ++i) {
    const double t = std::min(i * 0.1, duration);
    const GeoPoint p = enu.ToGeo(PoseAtTime(town.route, d.passes, d.plan, t).position);
    std::snprintf(buf, sizeof(buf), "<trkpt lat=\"%.9f\" lon=\"%.9f\"><ele>%.3f</ele><time>%s</time></trkpt>\n",
                  p.lat_deg, p.lon_deg, (*geoid)->MslFromEllipsoidal(p.lat_deg, p.lon_deg, p.height_m),
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
  j["layout"] = {{"turn_radius_m", town.options.turn_radius_m},
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
  j["survey_pose_noise"] = {
      {"horizontal_sigma_m_per_axis", 0.02},
      {"vertical_sigma_m", 0.03},
      {"heading_sigma_deg", 0.05},
      {"pitch_roll_sigma_deg", 0.03},
      {"note",
       "drive.csv of the survey holds truth plus this noise; images are rendered at truth"}};
  const GnssOptions gnss;
  for (const PlannedDrive& d : drives) {
    nlohmann::json dj;
    dj["images"] = d.truth.size();
    dj["camera"] = CameraJson(d.camera);
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
    const Condition& c = d.condition;
    dj["appearance"] = {{"vehicle_variant", c.variant},
                        {"exposure", c.exposure},
                        {"contrast", c.contrast},
                        {"tone_gamma", c.tone_gamma},
                        {"tint_bgr", {c.tint[0], c.tint[1], c.tint[2]}},
                        {"noise_sigma", c.noise_sigma},
                        {"blur_sigma_px", c.blur_sigma},
                        {"jpeg_quality", c.jpeg_quality},
                        {"sun", c.look.sun},
                        {"ambient", c.look.ambient}};
    if (!d.gnss.empty()) {
      dj["gnss"] = {{"file", "gnss.csv"},
                    {"rate_hz", gnss.rate_hz},
                    {"model", "first-order Gauss-Markov per axis"},
                    {"sigma_h_m_per_axis", gnss.sigma_h_m},
                    {"sigma_v_m", gnss.sigma_v_m},
                    {"tau_s", gnss.tau_s},
                    {"claimed_sigma_h_m", gnss.claimed_sigma_h_m}};
      const double start = kSurveyStartUnix + c.start_offset_s;
      for (const SpoofSegment& s : d.spoofing)
        dj["spoofed_segments"].push_back(
            {{"start", FormatIsoUtc(start + s.start_s)},
             {"start_s", s.start_s},
             {"length_s", s.length_s},
             {"rate_mps", s.rate_mps},
             {"bearing_deg", s.bearing_deg},
             {"model", "offset grows linearly at rate_mps along bearing_deg, then snaps back"}});
    }
    j["drives"][c.name] = dj;
  }
  return j;
}

void WriteContactSheet(const fs::path& out, const std::vector<PlannedDrive>& drives) {
  const int cols = 4, tw = 240, th = 180, label = 22;
  cv::Mat sheet(int(drives.size()) * (th + label), cols * tw, CV_8UC3, cv::Scalar(30, 30, 30));
  for (size_t r = 0; r < drives.size(); ++r) {
    const size_t n = drives[r].truth.size();
    for (int c = 0; c < cols && n > 0; ++c) {
      const size_t k = (n - 1) * (2 * c + 1) / (2 * cols);
      char name[64];
      std::snprintf(name, sizeof(name), "images/%06zu.jpg", k);
      cv::Mat img = cv::imread((out / drives[r].condition.name / name).string());
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

}  // namespace

bool DemoOptions::Validate(std::string* error) const {
  auto fail = [&](const char* m) { return *error = m, false; };
  if (out_dir.empty()) return fail("--out is required");
  if (!(route_length_m >= 100 && route_length_m <= 20000))
    return fail("--route-length-m must be within [100, 20000]");
  if (image_width < 160 || image_height < 120 || image_width > 4096 || image_height > 4096)
    return fail("--image-size must be between 160x120 and 4096x4096");
  if (!(survey_spacing_m >= 0.5 && survey_spacing_m <= 20))
    return fail("survey spacing must be within [0.5, 20] m");
  if (!(query_spacing_m >= 0.5 && query_spacing_m <= 50))
    return fail("query spacing must be within [0.5, 50] m");
  if (supersample < 1 || supersample > 4) return fail("--supersample must be 1..4");
  if (jobs < 0) return fail("--jobs must be >= 0");
  return true;
}

Result<DemoSummary> GenerateDemoTown(const DemoOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  const auto t_start = std::chrono::steady_clock::now();
  PinLibraryThreads();  // we parallelise across images ourselves
  TownOptions town_options;
  town_options.seed = o.seed;
  town_options.route_length_m = o.route_length_m;
  const Town town = BuildTown(town_options);
  const std::vector<PlannedDrive> drives = PlanDrives(town, o);
  std::vector<std::vector<Vehicle>> variants;
  for (int v = 0; v < 4; ++v) variants.push_back(VehiclesForVariant(town, v));
  const TownScene scene(town, variants);
  const EnuFrame enu(kTownOrigin);

  const fs::path out(o.out_dir);
  std::error_code ec;
  for (const PlannedDrive& d : drives) {
    fs::remove_all(out / d.condition.name, ec);
    fs::create_directories(out / d.condition.name / "images", ec);
    if (ec)
      return Status::IoError("cannot create " + (out / d.condition.name).string() + ": " +
                             ec.message());
  }
  struct Job {
    const PlannedDrive* drive;
    size_t index;
  };
  std::vector<Job> jobs;
  for (const PlannedDrive& d : drives)
    for (size_t k = 0; k < d.truth.size(); ++k) jobs.push_back({&d, k});
  const int threads = o.jobs > 0 ? o.jobs : std::max(1u, std::thread::hardware_concurrency());
  std::atomic<size_t> next{0};
  std::atomic<bool> failed{false};
  std::string failure;
  std::mutex failure_mu;
  Progress progress("rendering images", static_cast<long>(jobs.size()));
  RenderOptions render;
  render.supersample = o.supersample;
  auto worker = [&] {
    for (size_t j; !failed && (j = next++) < jobs.size();) {
      const PlannedDrive& d = *jobs[j].drive;
      const Frame& f = d.truth[jobs[j].index];
      const CameraPose pose{f.position, EnuFromCamera(f.attitude).t()};
      const cv::Mat linear =
          scene.Render(pose, d.camera, d.condition.look, d.condition.variant, render);
      const cv::Mat img = FinishImage(
          linear, d.condition, HashSeed(o.seed, 0x696d67, d.condition.variant, jobs[j].index));
      char name[32];
      std::snprintf(name, sizeof(name), "images/%06zu.jpg", jobs[j].index);
      const fs::path path = out / d.condition.name / name;
      if (!cv::imwrite(path.string(), img, {cv::IMWRITE_JPEG_QUALITY, d.condition.jpeg_quality})) {
        std::lock_guard<std::mutex> lock(failure_mu);
        failure = "cannot write " + path.string();
        failed = true;
      }
      progress.Advance();
    }
  };
  std::vector<std::thread> pool;
  for (int i = 0; i < threads; ++i) pool.emplace_back(worker);
  for (std::thread& t : pool) t.join();
  progress.Finish();
  if (failed) return Status::IoError(failure);
  const double render_s = progress.ElapsedS();

  DemoSummary summary;
  for (const PlannedDrive& d : drives) {
    Status s = WriteDriveFiles(d, enu, out / d.condition.name);
    if (!s.ok()) return s;
    summary.drives.push_back({d.condition.name, static_cast<int>(d.truth.size())});
  }
  for (bool photos : {true, false})
    if (photos ? o.export_exif : o.export_gpx)
      if (Status s = ExportPhotoSurvey(drives[0], town, enu, out, photos); !s.ok()) return s;
  std::ofstream(out / "town.json") << TownJson(o, town, drives).dump(2) << "\n";
  WriteContactSheet(out, drives);
  summary.buildings = static_cast<int>(town.buildings.size());
  summary.vehicles = static_cast<int>(town.vehicles.size());
  summary.poles = static_cast<int>(town.poles.size());
  summary.trees = static_cast<int>(town.trees.size());
  summary.render_s = render_s;
  summary.total_s =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - t_start).count();
  summary.contact_sheet = (out / "contact_sheet.png").string();
  return summary;
}

}  // namespace sightfix::demo
