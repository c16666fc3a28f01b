#include "demo_route/demo_drives.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <opencv2/imgproc.hpp>

#include "demo_route/random.h"
#include "demo_route/sun_light.h"
#include "demo_route/urban_canyon.h"

namespace sightfix::demo {
namespace {

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

// Low sun from the west, warm sky, a dark noisy exposure.
Condition Dusk() {
  Condition dusk = Named("query-dusk", 2);
  dusk.look.sun_dir = SunDir(265, 4);
  dusk.look.sun = 0.25, dusk.look.ambient = 0.5;
  dusk.look.sky_horizon = {0.45, 0.6, 0.92}, dusk.look.sky_zenith = {0.5, 0.32, 0.25},
  dusk.look.haze = {0.45, 0.5, 0.65};
  dusk.look.haze_m = 350;
  dusk.exposure = 0.62, dusk.tone_gamma = 1.45, dusk.tint = {0.8, 0.92, 1.12};
  dusk.noise_sigma = 5.0, dusk.blur_sigma = 0.8, dusk.jpeg_quality = 75;
  dusk.start_offset_s = 10.5 * 3600;
  return dusk;
}

// No sun, a grey sky, flat contrast, the next day.
Condition Overcast() {
  Condition overcast = Named("query-overcast", 3);
  overcast.look.sun = 0.0, overcast.look.ambient = 0.95, overcast.look.cloud = 0.0;
  overcast.look.sky_horizon = {0.8, 0.8, 0.78}, overcast.look.sky_zenith = {0.72, 0.71, 0.7},
  overcast.look.haze = {0.78, 0.78, 0.76};
  overcast.look.haze_m = 300;
  overcast.contrast = 0.72, overcast.tint = {1.08, 1.03, 0.9};
  overcast.noise_sigma = 2.5, overcast.blur_sigma = 0.9, overcast.jpeg_quality = 75;
  overcast.start_offset_s = 26 * 3600;
  return overcast;
}

std::vector<Condition> Conditions() {
  Condition survey = Named("survey", 0);
  survey.look.sun_dir = SunDir(135, 40);
  Condition day = Named("query-day", 1);
  day.look.sun_dir = SunDir(160, 46);
  day.noise_sigma = 2.0, day.blur_sigma = 0.5, day.jpeg_quality = 85, day.exposure = 1.04;
  day.start_offset_s = 3 * 3600;
  return {survey, day, Dusk(), Overcast()};
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

// The query-day look, half an hour later, on the parked vehicles of query-day.
Condition OffMapQuery() {
  Condition c = Conditions()[1];
  c.name = kOffMapDriveName;
  c.start_offset_s += 1800;
  return c;
}

// The realistic world's night: a dark sky with a town's faint glow at the horizon, lit windows,
// street lamps, the car's low beams, other vehicles' lamps and their glare; a high-gain exposure
// (darker, noisier).
Condition NightQuery(const LightRanges& l) {
  Condition night = Named(kNightDriveName, 5);
  night.look.sky_horizon = {0.07, 0.08, 0.1}, night.look.sky_zenith = {0.03, 0.02, 0.02};
  night.look.haze = {0.05, 0.055, 0.065};
  night.look.haze_m = 400, night.look.cloud = 0;
  night.look.window_glow = 1.0;
  night.look.lamp_intensity = l.lamp_intensity;
  night.look.headlight_intensity = l.headlight_intensity;
  night.look.vehicle_lamps = true;
  night.exposure = 0.85, night.noise_sigma = 7.0, night.blur_sigma = 0.6, night.jpeg_quality = 75;
  night.start_offset_s = l.night_offset_s;
  return night;
}

// The realistic world's light on drive d: its sun from the SPA at its start (dusk at its own
// time), shadows on.
void LightDrive(const LightRanges& l, PlannedDrive* d) {
  Condition& c = d->condition;
  if (c.name == "query-dusk") c.start_offset_s = l.dusk_offset_s;
  d->sun_model = true;
  d->sun_unix_s = kSurveyStartUnix + c.start_offset_s;
  const Result<SolarPosition> sun = SunAt(kTownOrigin, d->sun_unix_s);
  assert(sun.ok());  // the town's dates lie well inside the algorithm's years
  d->sun = *sun;
  ApplySun(d->sun, c.name == "query-overcast", l.night_sky_light, &c.look);
  c.look.cast_shadows = true;
  c.look.shadow_texel_m = l.shadow_texel_m, c.look.shadow_range_m = l.shadow_range_m;
}

// The clean world's survey: truth plus white noise, 1-sigma 2 cm per horizontal axis (RTK-grade).
constexpr double kCleanSurveySigmaM = 0.02;

Frame NoisyPose(const Frame& f, Rng& rng) {
  Frame g = f;
  const double nu = 0.03 * rng.Normal(), nn = kCleanSurveySigmaM * rng.Normal(),
               ne = kCleanSurveySigmaM * rng.Normal();
  g.position += cv::Vec3d(ne, nn, nu);
  g.attitude.heading_deg = std::fmod(g.attitude.heading_deg + 0.05 * rng.Normal() + 360, 360);
  g.attitude.pitch_deg += 0.03 * rng.Normal();
  g.attitude.roll_deg += 0.03 * rng.Normal();
  return g;
}

// The survey: the outer lane out along the whole route (length L) and back, steady.
void PlanSurvey(const DemoOptions& o, double L, PlannedDrive* d) {
  d->camera = SurveyCamera(o.image_width, o.image_height);
  d->passes = {{0, L, StreetSection::kSurveyLaneM, 0.0, 0.0},
               {L, 0, StreetSection::kSurveyLaneM, 0.0, 0.0}};
  d->plan.spacing_m = o.survey_spacing_m;
  d->plan.speed_mps = 8.0;
  d->plan.heading_jitter_deg = 0.3, d->plan.pitch_jitter_deg = 0.3, d->plan.roll_jitter_deg = 0.3;
}

// A query drive: the inner lane, 2.5-3.5 m from the survey lane; out along the route, then back
// against it, wandering. The fleet camera (query-overcast) sits lower.
void PlanQuery(const DemoOptions& o, double L, bool fleet, Rng& rng, PlannedDrive* d) {
  d->camera = fleet ? FleetCamera() : SurveyCamera(o.image_width, o.image_height);
  const double lane = StreetSection::kQueryLaneM + rng.Uniform(-0.25, 0.25);
  const double a = rng.Uniform(0.0, 0.08) * L, b = rng.Uniform(0.62, 0.78) * L;
  const double b2 = std::min(L, b + rng.Uniform(0.0, 0.1) * L), c = rng.Uniform(0.12, 0.3) * L;
  d->passes = {{a, b, lane, 0.25, rng.Uniform(0, 6.28)}, {b2, c, lane, 0.25, rng.Uniform(0, 6.28)}};
  d->plan.spacing_m = o.query_spacing_m;
  d->plan.spacing_jitter_m = 0.3 * o.query_spacing_m;
  d->plan.speed_mps = 9.0;
  d->plan.turnaround_s = 8.0;
  d->plan.camera_height_m = fleet ? 1.38 : 1.5;
  d->plan.heading_jitter_deg = 1.6, d->plan.pitch_jitter_deg = 0.7, d->plan.roll_jitter_deg = 0.5;
}

// The off-map query: from up to 90 m before the excursion's turn along the route, into the side
// street to the path's end, and back to where it started; the query camera and wander.
void PlanOffMapQuery(const DemoOptions& o, const Town& town, Rng& rng, PlannedDrive* d) {
  PlanQuery(o, town.route.length(), false, rng, d);
  d->path = town.excursion.path;
  const double start = std::max(0.0, town.excursion.path_mouth_m - 90);
  const double lane = d->passes[0].lane_offset_m, end = d->path.length();
  d->passes = {{start, end, lane, 0.25, rng.Uniform(0, 6.28)},
               {end, start, lane, 0.25, rng.Uniform(0, 6.28)}};
}

// The true pose when the image of frame f is exposed, offset_s after f's time: f moved along the
// drive by the path travelled in offset_s, its heading turned as the path turns (its attitude
// jitter kept).
Frame Exposure(const PlannedDrive& d, const Frame& f, double offset_s) {
  if (offset_s == 0) return f;
  const Frame a = PoseAtTime(d.path, d.passes, d.plan, f.time_s);
  const Frame b = PoseAtTime(d.path, d.passes, d.plan, f.time_s + offset_s);
  Frame g = f;
  g.time_s += offset_s;
  g.position += b.position - a.position;
  // The turn over the offset is the path's yaw rate (over +-0.25 s) times it. A frame's heading
  // is its polyline segment's direction, so two poses a few centimetres apart mostly share a
  // segment: their headings' difference would move a corner's images along the arc without
  // turning them. More than 45 deg in the span is the turn-round between passes (the heading
  // flips where the vehicle stood), not a yaw rate: there the segments' difference stands.
  constexpr double kHalfSpanS = 0.25, kTurnRoundDeg = 45;
  const double mid_s = f.time_s + offset_s / 2;
  const Frame before = PoseAtTime(d.path, d.passes, d.plan, mid_s - kHalfSpanS);
  const Frame after = PoseAtTime(d.path, d.passes, d.plan, mid_s + kHalfSpanS);
  const double span_deg =
      std::remainder(after.attitude.heading_deg - before.attitude.heading_deg, 360.0);
  const double turn_deg =
      std::abs(span_deg) > kTurnRoundDeg
          ? std::remainder(b.attitude.heading_deg - a.attitude.heading_deg, 360.0)
          : span_deg / (2 * kHalfSpanS) * offset_s;
  g.attitude.heading_deg = std::fmod(g.attitude.heading_deg + turn_deg + 360.0, 360.0);
  return g;
}

Frame WithSurveyError(const Frame& f, const SurveyError& e) {
  Frame g = f;
  g.position += e.position_m;
  g.attitude.heading_deg = std::fmod(f.attitude.heading_deg + e.heading_deg + 360.0, 360.0);
  g.attitude.pitch_deg += e.pitch_deg;
  g.attitude.roll_deg += e.roll_deg;
  return g;
}

std::vector<double> FrameTimes(const std::vector<Frame>& frames) {
  std::vector<double> times;
  for (const Frame& f : frames) times.push_back(f.time_s);
  return times;
}

// The realistic survey's reported poses: truth at each drive.csv time plus its drawn error.
void AddSurveyError(const Town& town, const WorldNuisances& n, Rng& rng, PlannedDrive* d) {
  d->survey_error_model = true;
  d->survey_draw = DrawSurveyError(n.survey, rng);
  d->canyon_min_aspect_ratio = n.survey.min_aspect_ratio;
  const CanyonTest canyon = DriveCanyonTest(town, *d, d->canyon_min_aspect_ratio);
  d->jumps = PlanMultipathJumps(n.survey, DriveDuration(d->passes, d->plan), canyon, rng);
  d->survey_errors = SimulateSurveyError(d->survey_draw, d->jumps, canyon, FrameTimes(d->truth));
  for (size_t k = 0; k < d->truth.size(); ++k) {
    d->reported.push_back(WithSurveyError(d->truth[k], d->survey_errors[k]));
    d->reported_sigma_h_m.push_back(d->survey_errors[k].sigma_h_m * n.survey_sigma_scale);
  }
}

// Camera as written, exposure poses and reported poses of drive i (0: the survey). rng is the
// drive's plan stream (the clean survey's white noise continues it); nuisance_rng draws the
// realistic world's nuisances, so the clean world's numbers never change.
void AddNuisances(const Town& town, const WorldNuisances& n, size_t i, Rng& rng, Rng& nuisance_rng,
                  PlannedDrive* d) {
  if (n.calibration.enabled) {
    d->calibration_error_model = true;
    d->calibration_error = DrawCalibrationError(n.calibration, d->camera, nuisance_rng);
    d->camera_written = WithCalibrationError(d->camera, d->calibration_error);
  } else {
    d->camera_written = d->camera;
  }
  for (const Frame& f : d->truth)
    d->exposure.push_back(Exposure(*d, f, d->calibration_error.time_offset_s));
  if (i == 0 && n.survey.enabled) return AddSurveyError(town, n, nuisance_rng, d);
  for (size_t k = 0; k < d->truth.size(); ++k) {
    d->reported.push_back(i == 0 ? NoisyPose(d->truth[k], rng) : d->exposure[k]);
    d->reported_sigma_h_m.push_back(i == 0 ? kCleanSurveySigmaM * n.survey_sigma_scale : 0.0);
  }
}

// The world drive i sees: its parked vehicles and, where the nuisances enable them, its changes
// (own stream) and traffic (own stream; light on the survey), planned around its true path.
DriveWorld WorldOfDrive(const Town& town, const WorldNuisances& n, uint64_t seed, size_t i,
                        const PlannedDrive& d) {
  Rng change_rng(HashSeed(seed, 0x636867, i)), traffic_rng(HashSeed(seed, 0x747266, i));
  DriveWorld w =
      PlanDriveWorld(town, static_cast<int>(i), d.condition.variant, n.changes, change_rng);
  if (!n.traffic.enabled || d.truth.empty()) return w;
  w.has_traffic = true;
  // The camera between frames: straight from one frame's true position to the next (across the
  // road where the drive turns round), before the first and after the last frame held.
  const CameraTrack camera = [&d](double t) {
    auto it = std::lower_bound(d.truth.begin(), d.truth.end(), t,
                               [](const Frame& f, double x) { return f.time_s < x; });
    if (it == d.truth.begin() || it == d.truth.end()) {
      const cv::Vec3d& p = (it == d.truth.end() ? d.truth.back() : *it).position;
      return cv::Vec2d(p[0], p[1]);
    }
    const Frame &a = *(it - 1), &b = *it;
    const double u = (t - a.time_s) / std::max(1e-9, b.time_s - a.time_s);
    const cv::Vec3d p = a.position + u * (b.position - a.position);
    return cv::Vec2d(p[0], p[1]);
  };
  w.traffic =
      PlanTraffic(town.route, d.truth.back().time_s + 1.0, d.passes[0].lane_offset_m,
                  i == 0 ? n.traffic.survey_density_scale : 1.0, n.traffic, camera, traffic_rng);
  return w;
}

// The realistic camera of drive i from its own stream (camera_nuisances.h): the mount moves the
// plan's height and pitch (before its frames are planned), the JPEG quality replaces the
// condition's and the sensor's shot and read noise its Gaussian noise.
void AddCameraNuisances(const CameraNuisanceRanges& r, uint64_t seed, size_t i, PlannedDrive* d) {
  Rng rng(HashSeed(seed, 0x63616d, i));
  d->camera_nuisance_model = true;
  d->camera_draw = DrawCameraNuisances(r, LightLevelOf(d->condition.look), i > 0,
                                       DriveDuration(d->passes, d->plan), rng);
  d->plan.camera_height_m += d->camera_draw.mount_height_offset_m;
  d->plan.camera_pitch_deg += d->camera_draw.mount_pitch_deg;
  d->condition.jpeg_quality = d->camera_draw.jpeg_quality;
  d->condition.noise_sigma = 0;
  d->camera.readout_s = d->camera_draw.readout_s;  // a datasheet's figure: camera.yml states it
}

// The camera's motion at each exposure: the planned path's velocity and yaw rate over +-50 ms
// (0.9 m at 9 m/s: a chord of a 12 m turn is within 1 % of its arc's direction).
std::vector<CameraMotion> ExposureMotions(const PlannedDrive& d) {
  constexpr double kHalfSpanS = 0.05;
  std::vector<CameraMotion> motions;
  for (const Frame& f : d.exposure)
    motions.push_back(MotionBetween(PoseAtTime(d.path, d.passes, d.plan, f.time_s - kHalfSpanS),
                                    PoseAtTime(d.path, d.passes, d.plan, f.time_s + kHalfSpanS),
                                    f.attitude));
  return motions;
}

}  // namespace

std::vector<PlannedDrive> PlanDrives(const Town& town, const DemoOptions& o) {
  const WorldNuisances nuisances = NuisancesFor(o);
  std::vector<PlannedDrive> drives;
  const double L = town.route.length();
  std::vector<Condition> conditions = Conditions();
  if (town.has_excursion) conditions.push_back(OffMapQuery());
  if (nuisances.light.enabled) conditions.push_back(NightQuery(nuisances.light));
  for (size_t i = 0; i < conditions.size(); ++i) {
    Rng rng(HashSeed(o.seed, 0x647276, i)), nuisance_rng(HashSeed(o.seed, 0x6e7569, i));
    PlannedDrive d;
    d.condition = conditions[i];
    if (nuisances.light.enabled) LightDrive(nuisances.light, &d);
    d.path = town.route;
    if (i == 0)
      PlanSurvey(o, L, &d);
    else if (d.condition.name == kOffMapDriveName)
      PlanOffMapQuery(o, town, rng, &d);
    else
      PlanQuery(o, L, i == 3, rng, &d);
    if (nuisances.camera.enabled) AddCameraNuisances(nuisances.camera, o.seed, i, &d);
    d.truth = PlanFrames(d.path, d.passes, d.plan, rng);
    AddNuisances(town, nuisances, i, rng, nuisance_rng, &d);
    if (d.camera_nuisance_model) d.camera_motion = ExposureMotions(d);
    if (i > 0) {
      d.spoofing = PlanSpoofing(DriveDuration(d.passes, d.plan), rng);
      d.gnss = SimulateGnss(d.path, d.passes, d.plan, GnssOptions{}, d.spoofing, rng);
    }
    d.world = WorldOfDrive(town, nuisances, o.seed, i, d);
    drives.push_back(std::move(d));
  }
  return drives;
}

CanyonTest DriveCanyonTest(const Town& town, const PlannedDrive& d, double min_aspect_ratio) {
  return [&town, &d, min_aspect_ratio](double t) {
    const Frame f = PoseAtTime(d.path, d.passes, d.plan, t);
    const double h = f.attitude.heading_deg * M_PI / 180;
    const cv::Vec2d p(f.position[0], f.position[1]), travel(std::sin(h), std::cos(h));
    return CanyonAt(town, p, travel).aspect_ratio >= min_aspect_ratio;
  };
}

std::vector<SurveyError> SurveyErrorsAt(const Town& town, const PlannedDrive& d,
                                        const std::vector<double>& times_s) {
  return SimulateSurveyError(d.survey_draw, d.jumps,
                             DriveCanyonTest(town, d, d.canyon_min_aspect_ratio), times_s);
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

}  // namespace sightfix::demo
