#include "demo_route/vehicle_lights.h"

#include <algorithm>
#include <cmath>

namespace sightfix::demo {
namespace {

constexpr double kRadToDeg = 180.0 / M_PI;
const cv::Vec3d kHeadColour(0.95, 0.97, 1.0), kTailColour(0.15, 0.12, 1.0);  // BGR

}  // namespace

std::vector<VehicleLamp> VehicleLampsAt(const Polyline& route, const std::vector<Mover>& movers,
                                        double t_s, const VehicleLampModel& model) {
  std::vector<VehicleLamp> lamps;
  for (const Mover& m : movers) {
    if (m.kind == MoverKind::kCyclist || m.kind == MoverKind::kPedestrian) continue;
    cv::Vec2d c;
    double yaw;
    if (!MoverPlacement(route, m, t_s, &c, &yaw)) continue;
    const cv::Vec2d ahead(std::cos(yaw), std::sin(yaw)), left(-ahead[1], ahead[0]);
    const double z = 0.25 + 0.3 * m.height_m;
    for (int end : {+1, -1}) {  // front: headlights; back: tail lights
      for (int side : {+1, -1}) {
        const cv::Vec2d p = c + end * 0.5 * m.length_m * ahead + side * 0.35 * m.width_m * left;
        lamps.push_back({{p[0], p[1], z},
                         {end * ahead[0], end * ahead[1], 0},
                         end > 0 ? model.headlight_intensity : model.tail_intensity,
                         end > 0 ? kHeadColour : kTailColour});
      }
    }
  }
  return lamps;
}

void AddLampGlare(const std::vector<VehicleLamp>& lamps, const CameraPose& pose,
                  const cv::Matx33d& k_canvas, int ss, const cv::Mat1f& canvas_depth,
                  const VehicleLampModel& model, cv::Mat3f* image) {
  const double f = k_canvas(0, 0) / ss;  // output pixels per unit of tan(angle)
  for (const VehicleLamp& lamp : lamps) {
    const cv::Vec3d to_camera = pose.position - lamp.position;
    const double d = cv::norm(to_camera);
    if (d < 1) continue;  // inside the vehicle's own box
    const double off_axis = std::acos(std::clamp(lamp.axis.dot(to_camera) / d, -1.0, 1.0));
    if (off_axis >= M_PI / 2) continue;  // the camera behind the lamp
    const double spread = off_axis / model.beam_spread_rad;
    const double e = lamp.intensity * std::exp(-0.5 * spread * spread) / (d * d);
    const cv::Vec3d pc = pose.camera_from_enu * (lamp.position - pose.position);
    if (pc[2] < 0.5) continue;
    const double cu = k_canvas(0, 0) * pc[0] / pc[2] + k_canvas(0, 2);
    const double cv_ = k_canvas(1, 1) * pc[1] / pc[2] + k_canvas(1, 2);
    const int iu = static_cast<int>(std::floor(cu)), iv = static_cast<int>(std::floor(cv_));
    if (iu < 0 || iv < 0 || iu >= canvas_depth.cols || iv >= canvas_depth.rows) continue;
    if (canvas_depth(iv, iu) < pc[2] - 0.3) continue;  // something nearer hides it
    const double theta_max_deg = std::sqrt(model.glare_constant * e / model.min_veil);
    if (theta_max_deg <= model.core_radius_deg) continue;
    const double u0 = (cu + 0.5) / ss - 0.5, v0 = (cv_ + 0.5) / ss - 0.5;
    const double reach_px = f * std::tan(std::min(theta_max_deg, 60.0) / kRadToDeg);
    const int x0 = std::max(0, static_cast<int>(std::floor(u0 - reach_px)));
    const int x1 = std::min(image->cols - 1, static_cast<int>(std::ceil(u0 + reach_px)));
    const int y0 = std::max(0, static_cast<int>(std::floor(v0 - reach_px)));
    const int y1 = std::min(image->rows - 1, static_cast<int>(std::ceil(v0 + reach_px)));
    const cv::Vec3f colour(lamp.colour);
    for (int y = y0; y <= y1; ++y) {
      cv::Vec3f* row = image->ptr<cv::Vec3f>(y);
      for (int x = x0; x <= x1; ++x) {
        const double theta_deg = std::atan(std::hypot(x - u0, y - v0) / f) * kRadToDeg;
        if (theta_deg > theta_max_deg) continue;
        const double t = std::max(theta_deg, model.core_radius_deg);
        const double veil = std::min(model.core_value, model.glare_constant * e / (t * t));
        row[x] += static_cast<float>(veil) * colour;
      }
    }
  }
}

nlohmann::json VehicleLampsJson(const VehicleLampModel& model) {
  return {{"drives", "query-night"},
          {"vehicles", "moving cars, vans and buses: two headlights, two tail lights"},
          {"headlight_intensity", model.headlight_intensity},
          {"tail_intensity", model.tail_intensity},
          {"beam_spread_rad", model.beam_spread_rad},
          {"glare_constant", model.glare_constant},
          {"core_radius_deg", model.core_radius_deg},
          {"core_value", model.core_value},
          {"min_veil", model.min_veil},
          {"model",
           "veiling glare glare_constant * E / theta_deg^2 (Stiles-Holladay), E = intensity * "
           "exp(-off_axis^2 / (2 beam_spread_rad^2)) / distance^2, capped at core_value within "
           "core_radius_deg; no light cast on the scene"}};
}

}  // namespace sightfix::demo
