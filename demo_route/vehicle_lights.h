// Other vehicles' lamps at night (realistic world, query-night): the headlights of every moving
// car, van and bus and their tail lights, seen by the camera as a saturated spot with veiling
// glare around it. Glare follows the Stiles-Holladay disability-glare formula (a veiling
// luminance of 10 E / theta^2, theta in degrees from the lamp, E the lamp's illuminance at the
// eye; common practice in road lighting), used here for the lens's own veiling glare in the
// image's linear-light units. A lamp's intensity towards the camera falls off as a Gaussian of
// the angle from its beam axis (its heading for headlights, the reverse for tail lights): a low
// beam sends a share of its light above the cut-off towards oncoming drivers. Lamps cast no
// light on the scene (only the camera car's own beams do, night_light.h) and no shadows.
//
// Pure functions; thread-safe.
#pragma once

#include <nlohmann/json.hpp>
#include <opencv2/core.hpp>
#include <vector>

#include "demo_route/town_layout.h"
#include "demo_route/town_renderer.h"
#include "demo_route/traffic.h"

namespace sightfix::demo {

struct VehicleLamp {
  cv::Vec3d position;  // ENU metres
  cv::Vec3d axis;      // unit, horizontal: where the lamp shines
  double intensity;    // towards axis, Appearance::sun units at 1 m
  cv::Vec3d colour;    // BGR
};

// The lamps' intensities and their glare's parameters (town.json's light.vehicle_lamps records
// them).
struct VehicleLampModel {
  double headlight_intensity = 150;  // towards the beam axis, above the low beam's cut-off
  double tail_intensity = 4;
  double beam_spread_rad = 0.35;  // Gaussian sigma of the intensity's fall-off off-axis
  double glare_constant = 10;     // Stiles-Holladay: veil = glare_constant E / theta_deg^2
  double core_radius_deg = 0.25;  // within this of a lamp the image saturates
  double core_value = 8;          // linear light there (white is about 1)
  double min_veil = 0.002;        // glare fainter than this is not drawn
};

// The lamps of the movers on the route at drive time t_s: two headlights at the front corners
// (0.3 of the height above the body's 0.25 m floor, 0.35 of the width from the centreline) and
// two tail lights at the back; none for cyclists and pedestrians.
std::vector<VehicleLamp> VehicleLampsAt(const Polyline& route, const std::vector<Mover>& movers,
                                        double t_s, const VehicleLampModel& model);

// Adds each lamp's spot and glare to `image` (linear-light BGR, the output of a canvas of
// intrinsics k_canvas with ss x ss samples per pixel) when the lamp is in front of the camera
// and not hidden: the canvas depth at its pixel is no nearer than the lamp by more than 0.3 m.
void AddLampGlare(const std::vector<VehicleLamp>& lamps, const CameraPose& pose,
                  const cv::Matx33d& k_canvas, int ss, const cv::Mat1f& canvas_depth,
                  const VehicleLampModel& model, cv::Mat3f* image);

// town.json's light.vehicle_lamps: the model's parameters and what it is.
nlohmann::json VehicleLampsJson(const VehicleLampModel& model);

}  // namespace sightfix::demo
