#include "demo_route/camera_nuisances.h"

#include <algorithm>
#include <cmath>

#include "indexer/base/rotation.h"

namespace sightfix::demo {
namespace {

constexpr double kDegToRad = M_PI / 180.0;

double Signed(const Range& r, Rng& rng) {
  const double magnitude = rng.Uniform(r.lo, r.hi);
  return rng.Chance(0.5) ? magnitude : -magnitude;
}

const CameraLightRanges& RangesFor(const CameraNuisanceRanges& r, LightLevel light) {
  return light == LightLevel::kSunlit     ? r.sunlit
         : light == LightLevel::kOvercast ? r.overcast
                                          : r.dusk;
}

// At least one step a drive, at uniformly random times, each +-step_ev (either sign, turned
// back where the running offset would leave +-max_exposure_offset_ev).
std::vector<ExposureStep> DrawSteps(const CameraNuisanceRanges& r, double duration_s, Rng& rng) {
  const double rate = rng.Uniform(r.exposure_steps_per_min.lo, r.exposure_steps_per_min.hi);
  const int count = std::max(1, static_cast<int>(std::lround(rate * duration_s / 60.0)));
  std::vector<double> times;
  for (int i = 0; i < count; ++i) times.push_back(rng.Uniform(0.0, duration_s));
  std::sort(times.begin(), times.end());
  std::vector<ExposureStep> steps;
  double ev = 0;
  for (double t : times) {
    double step = rng.Chance(0.5) ? r.exposure_step_ev : -r.exposure_step_ev;
    if (std::abs(ev + step) > r.max_exposure_offset_ev + 1e-9) step = -step;
    ev += step;
    steps.push_back({t, ev});
  }
  return steps;
}

}  // namespace

const char* LightLevelName(LightLevel level) {
  return level == LightLevel::kSunlit     ? "sunlit"
         : level == LightLevel::kOvercast ? "overcast"
                                          : "dusk";
}

LightLevel LightLevelOf(const Appearance& look) {
  // Night (the sun below the horizon): the camera's longest exposure and highest gain, as at
  // dusk; a real camera's auto-exposure caps the time near the frame interval and raises the
  // gain further, which the night drive's own noise stands for.
  if (look.sun_dir[2] < 0) return LightLevel::kDusk;
  if (look.sun < 0.1) return LightLevel::kOvercast;
  const double elevation_deg = std::asin(std::clamp(look.sun_dir[2], -1.0, 1.0)) / kDegToRad;
  return elevation_deg < 10 ? LightLevel::kDusk : LightLevel::kSunlit;
}

CameraNuisanceDraw DrawCameraNuisances(const CameraNuisanceRanges& r, LightLevel light, bool query,
                                       double duration_s, Rng& rng) {
  const CameraLightRanges& lr = RangesFor(r, light);
  CameraNuisanceDraw d;
  d.light = light;
  d.exposure_s = rng.Uniform(lr.exposure_ms.lo, lr.exposure_ms.hi) / 1000;
  d.rolling_shutter = !rng.Chance(r.global_shutter_share);
  const double readout_s = rng.Uniform(r.readout_ms.lo, r.readout_ms.hi) / 1000;
  d.readout_s = d.rolling_shutter ? readout_s : 0.0;
  d.steps = DrawSteps(r, duration_s, rng);
  d.vignetting_strength = rng.Uniform(r.vignetting_strength.lo, r.vignetting_strength.hi);
  d.full_scale_electrons = rng.Uniform(lr.full_scale_electrons.lo, lr.full_scale_electrons.hi);
  d.read_noise_electrons = rng.Uniform(r.read_noise_electrons.lo, r.read_noise_electrons.hi);
  const Range& q = query ? r.query_jpeg_quality : r.survey_jpeg_quality;
  d.jpeg_quality = static_cast<int>(std::lround(rng.Uniform(q.lo, q.hi)));
  if (query) {
    d.mount_height_offset_m = Signed(r.mount_height_offset_m, rng);
    d.mount_pitch_deg = Signed(r.mount_pitch_deg, rng);
  }
  return d;
}

double ExposureEvAt(const CameraNuisanceDraw& draw, double time_s) {
  double ev = 0;
  for (const ExposureStep& s : draw.steps)
    if (s.time_s <= time_s) ev = s.ev;
  return ev;
}

CameraMotion MotionBetween(const Frame& before, const Frame& after, const Attitude& attitude) {
  const double dt = after.time_s - before.time_s;
  CameraMotion m;
  if (!(dt > 0)) return m;
  const cv::Vec3d velocity_enu = (after.position - before.position) / dt;
  // Heading turns clockwise seen from above: a rotation about ENU up by minus its rate.
  const double yaw_rate =
      std::remainder(after.attitude.heading_deg - before.attitude.heading_deg, 360.0) * kDegToRad /
      dt;
  const cv::Matx33d camera_from_enu = EnuFromCamera(attitude).t();
  m.velocity_mps = camera_from_enu * velocity_enu;
  m.angular_velocity_rad_s = camera_from_enu * cv::Vec3d(0, 0, -yaw_rate);
  return m;
}

double VignettingAt(const CameraModel& camera, double strength, cv::Point2d pixel) {
  const cv::Point2d m = camera.PixelToNormalized(pixel);
  const double cos2 = 1.0 / (1.0 + m.x * m.x + m.y * m.y);
  return 1.0 - strength * (1.0 - cos2 * cos2);
}

void ApplyVignetting(const CameraModel& camera, double strength, cv::Mat* linear) {
  CV_Assert(linear->type() == CV_32FC3 &&
            linear->size() == cv::Size(camera.width_px, camera.height_px));
  const cv::Mat2f m = NormalizedCoordinates(camera);
  cv::Mat3f img = *linear;
  for (int y = 0; y < img.rows; ++y)
    for (int x = 0; x < img.cols; ++x) {
      const cv::Vec2f n = m(y, x);
      const double cos2 = 1.0 / (1.0 + n[0] * n[0] + n[1] * n[1]);
      img(y, x) *= static_cast<float>(1.0 - strength * (1.0 - cos2 * cos2));
    }
}

void AddSensorNoise(double full_scale_electrons, double read_noise_electrons, uint64_t seed,
                    cv::Mat* linear) {
  CV_Assert(linear->type() == CV_32FC3 && full_scale_electrons > 0);
  const double read = read_noise_electrons / full_scale_electrons;
  const double read2 = read * read;
  Rng rng(seed);
  CV_Assert(linear->isContinuous());
  float* v = linear->ptr<float>();
  const size_t n = linear->total() * 3;
  for (size_t i = 0; i < n; i += 2) {
    // Two normal values a draw by Marsaglia's polar method (no trigonometry; Rng::Normal's
    // Box-Muller keeps one value of two), rejections drawn from the same stream.
    double u, w, s;
    do {
      u = 2 * rng.Unit() - 1, w = 2 * rng.Unit() - 1, s = u * u + w * w;
    } while (s >= 1 || s == 0);
    const double f = std::sqrt(-2.0 * std::log(s) / s);
    const double z[2] = {u * f, w * f};
    for (size_t k = i; k < std::min(n, i + 2); ++k)
      v[k] += static_cast<float>(std::sqrt(std::max(0.0f, v[k]) / full_scale_electrons + read2) *
                                 z[k - i]);
  }
}

cv::Mat ApplyCameraNuisances(const RenderedView& view, const CameraModel& camera,
                             const CameraNuisanceDraw& draw, const CameraMotion& motion,
                             double time_s, uint64_t noise_seed) {
  cv::Mat img = ApplyCameraMotion(view.image, view.inverse_depth, camera, motion, draw.exposure_s,
                                  draw.readout_s);
  ApplyVignetting(camera, draw.vignetting_strength, &img);
  img *= std::exp2(ExposureEvAt(draw, time_s));
  AddSensorNoise(draw.full_scale_electrons, draw.read_noise_electrons, noise_seed, &img);
  return img;
}

nlohmann::json CameraNuisanceJson(const CameraNuisanceDraw& d,
                                  const std::vector<double>& frame_times_s) {
  nlohmann::json steps = nlohmann::json::array();
  for (const ExposureStep& s : d.steps) {
    const auto first = std::lower_bound(frame_times_s.begin(), frame_times_s.end(), s.time_s);
    steps.push_back(
        {{"time_s", s.time_s}, {"ev", s.ev}, {"first_image", first - frame_times_s.begin()}});
  }
  return {{"light", LightLevelName(d.light)},
          {"exposure_ms", d.exposure_s * 1e3},
          {"shutter", d.rolling_shutter ? "rolling" : "global"},
          {"readout_ms", d.readout_s * 1e3},
          {"exposure_steps", steps},
          {"vignetting_strength", d.vignetting_strength},
          {"full_scale_electrons", d.full_scale_electrons},
          {"read_noise_electrons", d.read_noise_electrons},
          {"jpeg_quality", d.jpeg_quality},
          {"mount_height_offset_m", d.mount_height_offset_m},
          {"mount_pitch_deg", d.mount_pitch_deg},
          {"model",
           "linear light: motion blur over exposure_ms and rolling-shutter rows over readout_ms "
           "(middle row at the image's time) from the path's velocity and yaw rate and the "
           "render's depth; vignetting 1 - s (1 - cos^4 theta); gain 2^ev from each step's "
           "time (first_image on) to the next; shot and read noise sigma sqrt(v / F + (r / "
           "F)^2), F full_scale_electrons, r read_noise_electrons; then the clean pipeline "
           "without its Gaussian noise"}};
}

}  // namespace sightfix::demo
