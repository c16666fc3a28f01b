#include "demo_route/traffic.h"

#include <algorithm>
#include <cmath>
#include <opencv2/imgproc.hpp>

#include "demo_route/paint_primitives.h"
#include "demo_route/town_painter.h"

namespace sightfix::demo {
namespace {

// Lines of the street cross-section (traffic.h), metres from the centreline.
constexpr double kCyclePathM = 8.25;
constexpr double kWalkLineM = 9.95;
// The camera vehicle's box about its camera (a car), and the clearance kept from it, metres.
constexpr double kCameraHalfLengthM = 2.3, kCameraHalfWidthM = 0.95, kClearanceM = 0.6;
constexpr double kTrackStepS = 0.1;

struct Size3 {
  double length, width, height;
};

// A motor vehicle's kind and size: buses 10-12 m, vans 5-6 m, cars 3.8-4.8 m.
Size3 MotorSize(MoverKind kind, Rng& rng) {
  switch (kind) {
    case MoverKind::kBus:
      return {rng.Uniform(10, 12), 2.5, rng.Uniform(2.9, 3.2)};
    case MoverKind::kVan:
      return {rng.Uniform(5, 6), rng.Uniform(1.9, 2.05), rng.Uniform(2.0, 2.5)};
    default:
      return {rng.Uniform(3.8, 4.8), rng.Uniform(1.7, 1.85), rng.Uniform(1.4, 1.6)};
  }
}

Size3 MoverSize(MoverKind kind, Rng& rng) {
  if (kind == MoverKind::kCyclist) return {1.75, 0.55, rng.Uniform(1.6, 1.8)};
  if (kind == MoverKind::kPedestrian) return {0.3, 0.45, rng.Uniform(1.55, 1.9)};
  return MotorSize(kind, rng);
}

MoverKind DrawMotorKind(const TrafficRanges& r, Rng& rng) {
  const double u = rng.Unit();
  return u < r.bus_share ? MoverKind::kBus
                         : (u < r.bus_share + r.van_share ? MoverKind::kVan : MoverKind::kCar);
}

// Whether m's box ever comes within the clearance of the camera vehicle's box over the drive,
// tested every kTrackStepS with the two boxes parallel (both follow the route; the camera turns
// round parked at a pass's end).
bool MeetsCamera(const Polyline& route, const Mover& m, double duration_s,
                 const CameraTrack& camera) {
  const double reach_along = m.length_m / 2 + kCameraHalfLengthM + kClearanceM;
  const double reach_across = m.width_m / 2 + kCameraHalfWidthM + kClearanceM;
  for (double t = 0; t <= duration_s + 1e-9; t += kTrackStepS) {
    cv::Vec2d c;
    double yaw;
    if (!MoverPlacement(route, m, t, &c, &yaw)) continue;
    const cv::Vec2d d = camera(t) - c, ax(std::cos(yaw), std::sin(yaw)), ay(-ax[1], ax[0]);
    if (std::abs(d.dot(ax)) < reach_along && std::abs(d.dot(ay)) < reach_across) return true;
  }
  return false;
}

// One line of movers: at |offset_m| on both sides (along the route on the right, against it on
// the left), each side populated over [0, duration_s] with gaps drawn from `gap`.
struct Line {
  double offset_m;
  double speed_mps[2];  // along, against
  Range gap;
  bool motor;  // kinds drawn by DrawMotorKind, else `kind`
  MoverKind kind;
};

void PlaceLine(const Polyline& route, const Line& line, double duration_s, double density,
               const TrafficRanges& r, const CameraTrack& camera, Rng& rng, TrafficPlan* plan) {
  const double L = route.length();
  for (int side = 0; side < 2; ++side) {
    const double v = line.speed_mps[side], reach = v * duration_s;
    const int dir = side == 0 ? 1 : -1;
    // Along the route a mover must start in [-reach, L] to be on it some time; against it, in
    // [0, L + reach]. Walk the line from its far end forwards.
    double s = side == 0 ? -reach : L + reach;
    for (;;) {
      Mover m;
      m.kind = line.motor ? DrawMotorKind(r, rng) : line.kind;
      const Size3 size = MoverSize(m.kind, rng);
      m.length_m = size.length, m.width_m = size.width, m.height_m = size.height;
      s += dir * (rng.Uniform(line.gap.lo, line.gap.hi) / density + m.length_m / 2);
      if (side == 0 ? s > L : s < 0) break;
      m.s0_m = s;
      s += dir * m.length_m / 2;
      m.id = static_cast<int>(plan->movers.size() + plan->rejected);
      m.speed_mps = v, m.direction = dir, m.offset_m = dir * line.offset_m;
      m.seed = rng.Next();
      if (MeetsCamera(route, m, duration_s, camera))
        ++plan->rejected;
      else
        plan->movers.push_back(m);
    }
  }
}

// The figure's clothes: trousers below, a shirt above, a head; a bicycle under a cyclist.
void DrawFigure(cv::Mat& img, MoverKind kind, Rng& r, int face) {
  const cv::Scalar shirt = RandomColour(r, 0.2, 0.9, 0.25, 0.9),
                   trousers = RandomColour(r, 0.1, 0.6, 0.15, 0.6),
                   skin = Hsv(r.Uniform(8, 20), 0.45, r.Uniform(0.35, 0.85));
  auto a = [](const cv::Scalar& c) { return cv::Scalar(c[0], c[1], c[2], 255); };
  const int w = img.cols, h = img.rows;
  const bool side = face < 2, cyclist = kind == MoverKind::kCyclist;
  const int body_w = side && cyclist ? w / 3 : std::max(2, w * 3 / 5);
  const int cx = w / 2, head = std::max(2, h / 9);
  if (cyclist && side) {  // wheels and frame
    const int wr = std::max(2, h * 35 / 180);
    for (int x : {wr + 1, w - wr - 2})
      cv::circle(img, {x, h - wr - 1}, wr, cv::Scalar(30, 30, 30, 255), std::max(1, wr / 6));
    cv::line(img, {wr + 1, h - wr - 1}, {w - wr - 2, h - wr - 1}, a(shirt), 2);
  }
  const int hip = cyclist ? h * 45 / 100 : h * 52 / 100;
  cv::rectangle(img, cv::Rect(cx - body_w / 2, hip, body_w, h - hip - (cyclist ? h / 5 : 0)),
                a(trousers), -1);
  cv::rectangle(img, cv::Rect(cx - body_w / 2, head * 2, body_w, hip - head * 2), a(shirt), -1);
  cv::circle(img, {cx, head}, head, a(skin), -1);
}

}  // namespace

const char* MoverKindName(MoverKind kind) {
  switch (kind) {
    case MoverKind::kCar:
      return "car";
    case MoverKind::kVan:
      return "van";
    case MoverKind::kBus:
      return "bus";
    case MoverKind::kCyclist:
      return "cyclist";
    default:
      return "pedestrian";
  }
}

bool MoverPlacement(const Polyline& route, const Mover& m, double t_s, cv::Vec2d* centre,
                    double* yaw_rad) {
  const double s = m.s0_m + m.direction * m.speed_mps * t_s;
  if (s < 0 || s > route.length()) return false;
  cv::Vec2d t;
  const cv::Vec2d c = route.At(s, &t);
  const cv::Vec2d right(t[1], -t[0]);
  *centre = c + m.offset_m * right;
  *yaw_rad = std::atan2(m.direction * t[1], m.direction * t[0]);
  return true;
}

TrafficPlan PlanTraffic(const Polyline& route, double duration_s, double camera_lane_offset_m,
                        double density_scale, const TrafficRanges& r, const CameraTrack& camera,
                        Rng& rng) {
  TrafficPlan plan;
  plan.density_scale = density_scale;
  plan.motor_lane_offset_m = camera_lane_offset_m < StreetSection::kLaneWidthM
                                 ? StreetSection::kSurveyLaneM
                                 : StreetSection::kQueryLaneM;
  for (double& v : plan.motor_speed_mps)
    v = rng.Uniform(r.motor_speed_mps.lo, r.motor_speed_mps.hi);
  plan.cycle_speed_mps = rng.Uniform(r.cycle_speed_mps.lo, r.cycle_speed_mps.hi);
  plan.walk_speed_mps = rng.Uniform(r.walk_speed_mps.lo, r.walk_speed_mps.hi);
  const Line lines[] = {{plan.motor_lane_offset_m,
                         {plan.motor_speed_mps[0], plan.motor_speed_mps[1]},
                         r.motor_gap_m,
                         true,
                         MoverKind::kCar},
                        {kCyclePathM,
                         {plan.cycle_speed_mps, plan.cycle_speed_mps},
                         r.cycle_gap_m,
                         false,
                         MoverKind::kCyclist},
                        {kWalkLineM,
                         {plan.walk_speed_mps, plan.walk_speed_mps},
                         r.walk_gap_m,
                         false,
                         MoverKind::kPedestrian}};
  for (const Line& line : lines)
    PlaceLine(route, line, duration_s, density_scale, r, camera, rng, &plan);
  return plan;
}

nlohmann::json TrafficJson(const TrafficPlan& plan) {
  nlohmann::json j = {
      {"model",
       "each mover keeps one line and speed: route arc length s0_m + direction * speed_mps * t "
       "(t seconds since the drive's start), offset_m to the right of the route's direction; "
       "not drawn off the route"},
      {"density_scale", plan.density_scale},
      {"motor_lane_offset_m", plan.motor_lane_offset_m},
      {"motor_speed_mps_along_against", {plan.motor_speed_mps[0], plan.motor_speed_mps[1]}},
      {"cycle_path_offset_m", kCyclePathM},
      {"cycle_speed_mps", plan.cycle_speed_mps},
      {"walk_line_offset_m", kWalkLineM},
      {"walk_speed_mps", plan.walk_speed_mps},
      {"rejected_near_camera", plan.rejected},
      {"per_frame_file", "occlusion.csv"},
      {"movers", nlohmann::json::array()}};
  for (const Mover& m : plan.movers)
    j["movers"].push_back({{"id", m.id},
                           {"kind", MoverKindName(m.kind)},
                           {"s0_m", m.s0_m},
                           {"speed_mps", m.speed_mps},
                           {"direction", m.direction},
                           {"offset_m", m.offset_m},
                           {"size_m", {m.length_m, m.width_m, m.height_m}}});
  return j;
}

cv::Mat PaintFigure(MoverKind kind, double width_m, double height_m, uint64_t seed, int face) {
  Rng r(seed);
  const int w = std::max(4, static_cast<int>(width_m * kObjectTexelsPerM));
  const int h = std::max(4, static_cast<int>(height_m * kObjectTexelsPerM));
  cv::Mat img(h, w, CV_8UC4, cv::Scalar(0, 0, 0, 0));
  if (face == 4) {  // the top: a head and shoulders seen from above
    img.setTo(cv::Scalar(60, 60, 60, 255));
    return img;
  }
  DrawFigure(img, kind, r, face);
  return img;
}

}  // namespace sightfix::demo
