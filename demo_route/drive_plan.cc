#include "demo_route/drive_plan.h"

#include <algorithm>
#include <cmath>

namespace sightfix::demo {
namespace {

constexpr double kRadToDeg = 180.0 / M_PI;

double Truncated(Rng& rng, double sigma) { return sigma * std::clamp(rng.Normal(), -2.5, 2.5); }

}  // namespace

double PassLength(const Pass& pass) { return std::abs(pass.s_to_m - pass.s_from_m); }

Frame PoseOnPass(const Polyline& route, const Pass& pass, double d, double camera_height_m) {
  const double dir = pass.s_to_m >= pass.s_from_m ? 1.0 : -1.0;
  cv::Vec2d t;
  const cv::Vec2d c = route.At(pass.s_from_m + dir * d, &t);
  const cv::Vec2d travel = dir * t;
  const cv::Vec2d right(travel[1], -travel[0]);
  const double offset =
      pass.lane_offset_m + pass.wander_m * std::sin(2 * M_PI * d / 80.0 + pass.wander_phase);
  const cv::Vec2d p = c + offset * right;
  Frame f;
  f.position = {p[0], p[1], camera_height_m};
  double heading = std::atan2(travel[0], travel[1]) * kRadToDeg;  // clockwise from north
  if (heading < 0) heading += 360;
  f.attitude = {heading, 0, 0};
  return f;
}

double DriveDuration(const std::vector<Pass>& passes, const DrivePlanOptions& o) {
  double t = 0;
  for (size_t i = 0; i < passes.size(); ++i)
    t += PassLength(passes[i]) / o.speed_mps + (i + 1 < passes.size() ? o.turnaround_s : 0);
  return t;
}

std::vector<Frame> PlanFrames(const Polyline& route, const std::vector<Pass>& passes,
                              const DrivePlanOptions& o, Rng& rng) {
  std::vector<Frame> frames;
  double t0 = 0;
  for (const Pass& pass : passes) {
    for (double d = o.spacing_m / 2; d < PassLength(pass);
         d += o.spacing_m + rng.Uniform(-1, 1) * o.spacing_jitter_m) {
      Frame f = PoseOnPass(route, pass, d, o.camera_height_m);
      f.time_s = t0 + d / o.speed_mps;
      f.attitude.heading_deg =
          std::fmod(f.attitude.heading_deg + Truncated(rng, o.heading_jitter_deg) + 360.0, 360.0);
      f.attitude.pitch_deg = Truncated(rng, o.pitch_jitter_deg);
      if (o.camera_pitch_deg != 0) f.attitude.pitch_deg += o.camera_pitch_deg;
      f.attitude.roll_deg = Truncated(rng, o.roll_jitter_deg);
      frames.push_back(f);
    }
    t0 += PassLength(pass) / o.speed_mps + o.turnaround_s;
  }
  return frames;
}

Frame PoseAtTime(const Polyline& route, const std::vector<Pass>& passes, const DrivePlanOptions& o,
                 double t) {
  double t0 = 0;
  for (size_t i = 0; i < passes.size(); ++i) {
    const double dur = PassLength(passes[i]) / o.speed_mps;
    const bool last = i + 1 == passes.size();
    if (t < t0 + dur || last) {
      Frame f = PoseOnPass(route, passes[i],
                           std::clamp((t - t0) * o.speed_mps, 0.0, PassLength(passes[i])),
                           o.camera_height_m);
      f.time_s = t;
      return f;
    }
    if (t < t0 + dur + o.turnaround_s) {  // turning: parked at the end of the pass
      Frame f = PoseOnPass(route, passes[i], PassLength(passes[i]), o.camera_height_m);
      f.time_s = t;
      return f;
    }
    t0 += dur + o.turnaround_s;
  }
  return {};
}

std::vector<SpoofSegment> PlanSpoofing(double duration_s, Rng& rng) {
  // Three attacks, one in each third of the drive, at a slow, a medium and a fast drag rate
  // (order shuffled), each 15-25 s long (a drag that a monitor can see: 0.4 m/s for 20 s is 8 m)
  // but at most 60 % of its third, with at least 10 % of the third clean before it.
  double rates[3] = {0.4, 1.2, 3.5};
  for (int i = 2; i > 0; --i) std::swap(rates[i], rates[rng.Int(0, i)]);
  std::vector<SpoofSegment> out;
  const double slot = duration_s / 3.0;
  for (int k = 0; k < 3; ++k) {
    SpoofSegment s;
    s.length_s = std::min(rng.Uniform(15.0, 25.0), 0.6 * slot);
    const double earliest = k * slot + 0.1 * slot, latest = (k + 1) * slot - s.length_s;
    s.start_s = rng.Uniform(earliest, std::max(earliest, latest));
    s.rate_mps = rates[k];
    s.bearing_deg = rng.Uniform(0, 360);
    out.push_back(s);
  }
  return out;
}

std::vector<GnssSample> SimulateGnss(const Polyline& route, const std::vector<Pass>& passes,
                                     const DrivePlanOptions& drive, const GnssOptions& o,
                                     const std::vector<SpoofSegment>& spoofing, Rng& rng) {
  const double dt = 1.0 / o.rate_hz, duration = DriveDuration(passes, drive);
  const double phi = std::exp(-dt / o.tau_s), q = std::sqrt(1 - phi * phi);
  // First-order Gauss-Markov error per axis, started from its stationary distribution.
  const double eu = o.sigma_v_m * rng.Normal(), en = o.sigma_h_m * rng.Normal(),
               ee = o.sigma_h_m * rng.Normal();
  cv::Vec3d err(ee, en, eu);
  std::vector<GnssSample> out;
  for (double t = 0; t <= duration + 1e-9; t += dt) {
    const Frame truth = PoseAtTime(route, passes, drive, t);
    GnssSample s;
    s.time_s = t;
    s.truth = truth.position;
    s.position = truth.position + err;
    for (const SpoofSegment& seg : spoofing) {
      if (t >= seg.start_s && t < seg.start_s + seg.length_s) {
        const double drag = seg.rate_mps * (t - seg.start_s), b = seg.bearing_deg * M_PI / 180;
        s.position += cv::Vec3d(drag * std::sin(b), drag * std::cos(b), 0);
        s.spoofed = true;
      }
    }
    s.course_deg = std::fmod(truth.attitude.heading_deg + 0.8 * rng.Normal() + 360.0, 360.0);
    s.claimed_sigma_h_m = o.claimed_sigma_h_m;
    out.push_back(s);
    const double wu = o.sigma_v_m * rng.Normal(), wn = o.sigma_h_m * rng.Normal(),
                 we = o.sigma_h_m * rng.Normal();
    err = phi * err + q * cv::Vec3d(we, wn, wu);
  }
  return out;
}

}  // namespace sightfix::demo
