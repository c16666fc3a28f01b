// Other vehicles' lamps at night (demo_route/vehicle_lights.h): where a mover's lamps are, and
// the glare a lamp leaves in the image against the Stiles-Holladay disability-glare formula,
// veiling luminance L = 10 E / theta^2 (theta in degrees, E the illuminance at the eye; common
// practice in road lighting, e.g. the glare terms of road-lighting standards; from memory).
#include "demo_route/vehicle_lights.h"

#include <gtest/gtest.h>

#include <cmath>
#include <limits>

namespace sightfix::demo {
namespace {

constexpr double kF = 500;  // focal length, pixels
const cv::Matx33d kK(kF, 0, 320, 0, kF, 240, 0, 0, 1);

// A camera at the origin looking north (ENU y), image x east, image y down.
CameraPose NorthCamera() {
  CameraPose pose;
  pose.position = {0, 0, 0};
  pose.camera_from_enu = cv::Matx33d(1, 0, 0, 0, 0, -1, 0, 1, 0);
  return pose;
}

cv::Mat1f OpenDepth() { return cv::Mat1f(480, 640, std::numeric_limits<float>::infinity()); }

// One headlight 20 m ahead on the optical axis, shining at the camera.
VehicleLamp LampAhead(double distance_m) {
  return {{0, distance_m, 0}, {0, -1, 0}, 150, {1, 1, 1}};
}

TEST(VehicleLightsTest, GlareFallsOffAsStilesHolladay) {
  const VehicleLampModel model;
  cv::Mat3f image(480, 640, cv::Vec3f(0, 0, 0));
  AddLampGlare({LampAhead(20)}, NorthCamera(), kK, 1, OpenDepth(), model, &image);
  const double e = 150.0 / (20 * 20);  // on the beam's axis: the whole intensity
  for (double theta_deg : {1.0, 2.0, 5.0, 10.0}) {
    // The pixel nearest theta to the right of the lamp, whose centre is the principal point.
    const int dx = static_cast<int>(std::lround(kF * std::tan(theta_deg * M_PI / 180)));
    const double actual_deg = std::atan(dx / kF) * 180 / M_PI;
    const double want = 10 * e / (actual_deg * actual_deg);
    EXPECT_NEAR(image(240, 320 + dx)[0], want, 1e-4 * want + 1e-6) << theta_deg << " deg";
  }
  // The core saturates (capped).
  EXPECT_FLOAT_EQ(image(240, 320)[0], static_cast<float>(model.core_value));
  // A lamp 40 m off: its glare reaches sqrt(10 E / min_veil) = 21.7 deg and no further.
  cv::Mat3f far(480, 640, cv::Vec3f(0, 0, 0));
  AddLampGlare({LampAhead(40)}, NorthCamera(), kK, 1, OpenDepth(), model, &far);
  const double reach_deg = std::sqrt(10 * (150.0 / (40 * 40)) / model.min_veil);
  ASSERT_NEAR(reach_deg, 21.65, 0.01);
  auto at_deg = [&](double deg) { return far(240, 320 + int(kF * std::tan(deg * M_PI / 180)))[0]; };
  EXPECT_GT(at_deg(21), 0.0f);
  EXPECT_EQ(at_deg(22.5), 0.0f);
}

TEST(VehicleLightsTest, HiddenBehindOrFacingAwayLampsAddNothing) {
  const VehicleLampModel model;
  const cv::Mat3f black(480, 640, cv::Vec3f(0, 0, 0));
  auto added = [&](const VehicleLamp& lamp, const cv::Mat1f& depth) {
    cv::Mat3f image = black.clone();
    AddLampGlare({lamp}, NorthCamera(), kK, 1, depth, model, &image);
    return cv::sum(image)[0];
  };
  EXPECT_GT(added(LampAhead(20), OpenDepth()), 0);
  cv::Mat1f wall = OpenDepth();
  wall(240, 320) = 15;  // a surface 5 m nearer than the lamp at its pixel
  EXPECT_EQ(added(LampAhead(20), wall), 0);
  VehicleLamp away = LampAhead(20);
  away.axis = {0, 1, 0};  // shining away from the camera: a headlight seen from behind
  EXPECT_EQ(added(away, OpenDepth()), 0);
  VehicleLamp behind = LampAhead(-20);
  behind.axis = {0, 1, 0};  // behind the camera, shining at it
  EXPECT_EQ(added(behind, OpenDepth()), 0);
  // Off the beam's axis the light falls as a Gaussian of the angle: 2 sigma off, e^-2 of it.
  VehicleLamp aside = LampAhead(20);
  const double a = 2 * model.beam_spread_rad;
  aside.axis = {std::sin(a), -std::cos(a), 0};
  cv::Mat3f on = black.clone(), off = black.clone();
  AddLampGlare({LampAhead(20)}, NorthCamera(), kK, 1, OpenDepth(), model, &on);
  AddLampGlare({aside}, NorthCamera(), kK, 1, OpenDepth(), model, &off);
  EXPECT_NEAR(off(240, 330)[0] / on(240, 330)[0], std::exp(-2.0), 1e-4);
}

TEST(VehicleLightsTest, HeadlightsAtTheFrontTailLightsAtTheBack) {
  const Polyline route({{0, 0}, {200, 0}});
  Mover car;
  car.kind = MoverKind::kCar;
  car.s0_m = 50, car.speed_mps = 10, car.direction = -1, car.offset_m = 1.5;
  car.length_m = 4.4, car.width_m = 1.8, car.height_m = 1.5;
  Mover walker = car;
  walker.kind = MoverKind::kPedestrian;
  const VehicleLampModel model;
  const auto lamps = VehicleLampsAt(route, {car, walker}, 2.0, model);
  ASSERT_EQ(lamps.size(), 4u);  // the pedestrian has none
  // At t = 2 s the car is at s = 30 m, heading west (against the route), 1.5 m right of the
  // route's direction: y = -1.5.
  for (const VehicleLamp& l : lamps) {
    const bool head = l.intensity == model.headlight_intensity;
    EXPECT_NEAR(l.position[0], head ? 30 - 2.2 : 30 + 2.2, 1e-9);
    EXPECT_NEAR(std::abs(l.position[1] + 1.5), 0.35 * 1.8, 1e-9);
    EXPECT_NEAR(l.position[2], 0.25 + 0.3 * 1.5, 1e-9);
    EXPECT_NEAR(l.axis[0], head ? -1 : 1, 1e-9);
  }
  EXPECT_TRUE(VehicleLampsAt(route, {car}, 10.0, model).empty());  // off the route by then
}

}  // namespace
}  // namespace sightfix::demo
