// The survey term of a fix's confidence (server/engine/localizer.cc, SurveyVariance): with a
// correlated survey error (the default) every reference's sigma_h^2 reaches the fix whole; with a
// white one it is divided by the points' observation count. On the service tests' map (its
// survey reports sigma_h_m 0.02 on every row), the same query located both ways must give the
// same position and heading and, per horizontal axis, a variance larger by
// covariance_scale x sigma_h^2 x (1 - 1/n), n >= 2 the points' mean observation count (the
// engine counts at least 2): between 0.5 and 1 times covariance_scale x sigma_h^2.
#include <gtest/gtest.h>

#include <cstdlib>
#include <opencv2/imgcodecs.hpp>

#include "indexer/map/camera_model.h"
#include "indexer/map/drive_manifest.h"
#include "server/engine/localizer.h"

namespace sightfix {
namespace {

std::string DataDir() {
  const char* d = std::getenv("SIGHTFIX_SERVICE_DATA");
  return d ? d : "";
}

TEST(SurveyTermTest, CorrelatedSurveyErrorReachesTheFixWhole) {
  if (DataDir().empty()) GTEST_SKIP() << "SIGHTFIX_SERVICE_DATA is not set";
  auto survey = ReadDriveManifest(DataDir() + "/town/survey/drive.csv");
  ASSERT_TRUE(survey.ok());
  for (const DriveRow& r : *survey) ASSERT_DOUBLE_EQ(r.sigma_h_m, 0.02) << r.image;
  LocalizerOptions white, correlated;
  white.survey_error = SurveyError::kWhite;
  ASSERT_EQ(correlated.survey_error, SurveyError::kCorrelated);  // the default
  auto a = Localizer::Open(DataDir() + "/map", white);
  auto b = Localizer::Open(DataDir() + "/map", correlated);
  ASSERT_TRUE(a.ok() && b.ok());
  const std::string dir = DataDir() + "/town/query-day";
  auto rows = ReadDriveManifest(dir + "/drive.csv");
  auto camera = LoadCameraModel(dir + "/camera.yml");
  ASSERT_TRUE(rows.ok() && camera.ok());
  const double whole = correlated.covariance_scale * 0.02 * 0.02;
  int compared = 0;
  for (size_t i = 0; i < rows->size(); i += 6) {
    LocateRequest request;
    request.camera = *camera;
    request.image = cv::imread(dir + "/" + (*rows)[i].image, cv::IMREAD_GRAYSCALE);
    auto fa = (*a)->Locate(request);
    auto fb = (*b)->Locate(request);
    ASSERT_TRUE(fa.ok() && fb.ok());
    if (fa->quality != FixQuality::kRefined) continue;
    ASSERT_EQ(fb->quality, FixQuality::kRefined) << (*rows)[i].image;
    EXPECT_EQ(fa->lat_deg, fb->lat_deg);
    EXPECT_EQ(fa->lon_deg, fb->lon_deg);
    EXPECT_EQ(fa->heading_deg, fb->heading_deg);
    for (int k : {0, 1}) {
      const double added = fb->covariance_en(k, k) - fa->covariance_en(k, k);
      EXPECT_GE(added, 0.5 * whole - 1e-12) << (*rows)[i].image << " axis " << k;
      EXPECT_LE(added, whole + 1e-12) << (*rows)[i].image << " axis " << k;
    }
    EXPECT_NEAR(fb->covariance_en(0, 1), fa->covariance_en(0, 1), 1e-12);
    EXPECT_GT(fb->radius95_m, fa->radius95_m);
    ++compared;
  }
  std::printf("%d fixes compared\n", compared);
  EXPECT_GE(compared, 4);
}

}  // namespace
}  // namespace sightfix
