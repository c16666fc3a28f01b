#include "demo_route/demo_drives.h"

#include <algorithm>
#include <cmath>
#include <opencv2/imgproc.hpp>

#include "demo_route/random.h"

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

Frame NoisyPose(const Frame& f, Rng& rng) {
  Frame g = f;
  const double nu = 0.03 * rng.Normal(), nn = 0.02 * rng.Normal(), ne = 0.02 * rng.Normal();
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

}  // namespace

std::vector<PlannedDrive> PlanDrives(const Town& town, const DemoOptions& o) {
  std::vector<PlannedDrive> drives;
  const double L = town.route.length();
  const std::vector<Condition> conditions = Conditions();
  for (size_t i = 0; i < conditions.size(); ++i) {
    Rng rng(HashSeed(o.seed, 0x647276, i));
    PlannedDrive d;
    d.condition = conditions[i];
    if (i == 0)
      PlanSurvey(o, L, &d);
    else
      PlanQuery(o, L, i == 3, rng, &d);
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
