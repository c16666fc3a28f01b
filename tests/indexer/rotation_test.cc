#include "indexer/base/rotation.h"

#include <gtest/gtest.h>

#include <random>

namespace sightfix {
namespace {

cv::Vec3d Forward(const Attitude& a) { return EnuFromCamera(a) * cv::Vec3d(0, 0, 1); }
cv::Vec3d Right(const Attitude& a) { return EnuFromCamera(a) * cv::Vec3d(1, 0, 0); }
cv::Vec3d Down(const Attitude& a) { return EnuFromCamera(a) * cv::Vec3d(0, 1, 0); }

void ExpectVec(const cv::Vec3d& got, const cv::Vec3d& want) {
  EXPECT_LT(cv::norm(got - want), 1e-12) << got[0] << "," << got[1] << "," << got[2];
}

// Conventions of docs/design.md section 3, checked axis by axis.
TEST(RotationTest, AxesAtZeroAttitudeLookNorthLevel) {
  ExpectVec(Forward({0, 0, 0}), {0, 1, 0});
  ExpectVec(Right({0, 0, 0}), {1, 0, 0});
  ExpectVec(Down({0, 0, 0}), {0, 0, -1});
}

TEST(RotationTest, HeadingIsClockwiseFromNorth) {
  ExpectVec(Forward({90, 0, 0}), {1, 0, 0});
  ExpectVec(Forward({180, 0, 0}), {0, -1, 0});
  ExpectVec(Forward({270, 0, 0}), {-1, 0, 0});
}

TEST(RotationTest, PitchUpPositiveRollRightSideDown) {
  const double s = std::sin(10 * M_PI / 180), c = std::cos(10 * M_PI / 180);
  ExpectVec(Forward({0, 10, 0}), {0, c, s});
  ExpectVec(Right({0, 0, 10}), {c, 0, -s});
  // Order: heading first, then pitch about the rotated right axis.
  ExpectVec(Forward({90, 10, 0}), {c, 0, s});
}

TEST(RotationTest, AttitudeRoundTripAndQuaternions) {
  std::mt19937 rng(7);
  std::uniform_real_distribution<double> h(0, 360), p(-85, 85), r(-180, 180);
  for (int i = 0; i < 500; ++i) {
    const Attitude a{h(rng), p(rng), r(rng)};
    const cv::Matx33d m = EnuFromCamera(a);
    EXPECT_NEAR(cv::determinant(m), 1.0, 1e-12);
    const Attitude b = AttitudeFromEnuFromCamera(m);
    EXPECT_NEAR(WrapDeg180(b.heading_deg - a.heading_deg), 0, 1e-9);
    EXPECT_NEAR(b.pitch_deg, a.pitch_deg, 1e-9);
    EXPECT_NEAR(WrapDeg180(b.roll_deg - a.roll_deg), 0, 1e-9);
    const Quaternion q = QuaternionFromRotation(m);
    EXPECT_LT(RotationAngleDeg(RotationFromQuaternion(q), m), 1e-9);
  }
}

TEST(RotationTest, QuaternionOfKnownRotation) {
  // 90 degrees about z: q = (cos 45, 0, 0, sin 45) (common practice).
  const cv::Matx33d rz(0, -1, 0, 1, 0, 0, 0, 0, 1);
  const Quaternion q = QuaternionFromRotation(rz);
  EXPECT_NEAR(q.w, std::sqrt(0.5), 1e-12);
  EXPECT_NEAR(q.z, std::sqrt(0.5), 1e-12);
  EXPECT_NEAR(RotationAngleDeg(rz, cv::Matx33d::eye()), 90.0, 1e-9);
  EXPECT_DOUBLE_EQ(WrapDeg180(190), -170);
  EXPECT_DOUBLE_EQ(WrapDeg180(-190), 170);
}

// A turn about up is counterclockwise seen from above (right-handed ENU, common practice):
// east goes to north, and a camera's heading (clockwise from north) drops by the turn.
TEST(RotationTest, RotationAboutUpTurnsLeft) {
  const cv::Vec3d north = RotationAboutUp(M_PI / 2) * cv::Vec3d(1, 0, 0);
  EXPECT_NEAR(north[0], 0, 1e-12);
  EXPECT_NEAR(north[1], 1, 1e-12);
  EXPECT_NEAR(north[2], 0, 1e-12);
  const Attitude a{70, 3, -2};
  const Attitude turned =
      AttitudeFromEnuFromCamera(RotationAboutUp(10 * M_PI / 180) * EnuFromCamera(a));
  EXPECT_NEAR(turned.heading_deg, 60, 1e-9);
  EXPECT_NEAR(turned.pitch_deg, 3, 1e-9);
  EXPECT_NEAR(turned.roll_deg, -2, 1e-9);
}

}  // namespace
}  // namespace sightfix
